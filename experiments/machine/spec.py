"""Solver specs: how a study names a machine respondent, and how it is built.

A solver is named by a spec string, alone on the command line or in a ``[[solvers]]`` entry of
``study.toml``::

    strings-ref                       a built-in solver (see ``builtin_solvers()``)
    python:my_pkg.my_mod:my_solver    an importable function, object with solve(), or class
    command:python3 my_child.py --x   a child process speaking JSON lines (see PROTOCOL.md)
    http://127.0.0.1:8000/v1/chat     (or http:URL) a chat-style HTTP endpoint

and a ``[[solvers]]`` entry adds::

    [[solvers]]
    name = "my-model"          # the study's name for it (sessions are "<name>-s<seed>")
    spec = "http:https://example.invalid/v1/chat/completions"
    seeds = 3                  # or a list [0, 5, 9]; default 1 (seed 0)
    modes = ["select"]         # default: every mode listed on each item
    families = ["strings"]     # default: items of every family
    medium = "text"            # default: the solver's own medium
    timeout = 60               # seconds per trial (default 120)
    [solvers.options]          # handed to the solver or adapter
    model = "some-model"
    api_key_env = "MY_API_KEY" # the key is read from this variable, never stored
"""

from __future__ import annotations

import dataclasses
import hashlib
import importlib
import inspect
import re
import shlex
from collections.abc import Mapping, Sequence
from typing import Any

from twofold.experiments.solvers import Answer, Solver, builtin_solvers, make_builtin
from twofold.study._check import check_choice, check_number, fail
from twofold.study.exceptions import InputError, SolverError, SpecError
from twofold.study.item import MODES, canonical_json
from twofold.study.render import MEDIA

from ._core import coerce_answer, redact_mapping

__all__ = [
    "DEFAULT_TIMEOUT",
    "SolverSpec",
    "build_solver",
    "parse_solver_entry",
    "solver_from_string",
    "study_solvers",
]

DEFAULT_TIMEOUT = 120.0
_ENTRY_KEYS = ("name", "spec", "seeds", "options", "timeout", "modes", "medium", "families")
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")
#: option names whose values are secrets and never enter a hash, log or report
SECRET_OPTIONS = ("api_key",)
#: option tables whose values may hold secrets; recorded with every value shown as ``***``
REDACTED_TABLES = ("headers", "env")
_INTERPRETERS = ("python", "node", "ruby", "perl", "julia", "Rscript", "bash", "sh", "java")


@dataclasses.dataclass(frozen=True)
class SolverSpec:
    """One machine respondent as the study names it.

    Attributes
    ----------
    name : str
        The study's name for the solver; session ids are ``f"{name}-s{seed}"``.
    spec : str
        The spec string (see the module docstring).
    seeds : tuple of int
        One session per seed.
    options : dict
        Options for the built-in solver or the adapter.
    timeout : float
        Seconds allowed per trial.
    modes : tuple of str or None
        Response modes to run; ``None`` runs every mode listed on each item.
    medium : str or None
        The view to render; ``None`` uses the solver's own ``medium``.
    families : tuple of str or None
        Only items of these families; ``None`` runs every item.
    """

    name: str
    spec: str
    seeds: tuple[int, ...] = (0,)
    options: dict[str, Any] = dataclasses.field(default_factory=dict)
    timeout: float = DEFAULT_TIMEOUT
    modes: tuple[str, ...] | None = None
    medium: str | None = None
    families: tuple[str, ...] | None = None

    @property
    def kind(self) -> str:
        """``builtin``, ``python``, ``command`` or ``http``."""
        return _kind(self.spec)

    def config(self) -> dict[str, Any]:
        """The configuration that determines the solver's answers (no name, seed or secrets).

        Header values (``options.headers``) and a command child's environment values
        (``options.env``) are shown as ``***``: they may hold keys.
        """
        opts = {k: v for k, v in self.options.items() if k not in SECRET_OPTIONS}
        for k in REDACTED_TABLES:
            if k in opts:
                opts[k] = redact_mapping(opts[k])
        return {
            "spec": self.spec,
            "options": opts,
            "timeout": self.timeout,
            "modes": None if self.modes is None else list(self.modes),
            "medium": self.medium,
            "families": None if self.families is None else list(self.families),
        }

    @property
    def config_hash(self) -> str:
        """SHA-256 (hex) of the canonical :meth:`config`."""
        return hashlib.sha256(canonical_json(self.config()).encode("utf-8")).hexdigest()

    def identity_hash(self, solver: Any = None) -> str:
        """SHA-256 (hex) of :meth:`config` plus the ``version`` the built solver declares.

        This is the trial-cache key of the solver's answers: a new spec, new options or a new
        declared version start from scratch instead of replaying old answers.
        """
        version = getattr(solver, "version", None)
        body = {**self.config(), "version": None if version is None else str(version)}
        return hashlib.sha256(canonical_json(body).encode("utf-8")).hexdigest()

    def session_id(self, seed: int) -> str:
        from twofold.study.logs import session_id

        return session_id(self.name, seed)

    def to_dict(self) -> dict[str, Any]:
        """A plain, picklable description (for worker processes)."""
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> SolverSpec:
        d = dict(data)
        d["seeds"] = tuple(d["seeds"])
        d["modes"] = None if d.get("modes") is None else tuple(d["modes"])
        d["families"] = None if d.get("families") is None else tuple(d["families"])
        return cls(**d)


def _kind(spec: str) -> str:
    if spec.startswith("python:"):
        return "python"
    if spec.startswith("command:"):
        return "command"
    if spec.startswith(("http:", "https:")):
        return "http"
    return "builtin"


def _default_name(spec: str) -> str:
    kind = _kind(spec)
    if kind == "python":
        name = spec.rsplit(":", 1)[-1].replace("_", "-")
    elif kind == "command":
        argv = shlex.split(spec[len("command:") :]) or ["command"]
        prog = argv[0]
        if prog.rsplit("/", 1)[-1].startswith(_INTERPRETERS):
            scripts = [a for a in argv[1:] if not a.startswith("-")]
            prog = scripts[0] if scripts else prog
        name = prog.rsplit("/", 1)[-1].rsplit(".", 1)[0].replace("_", "-")
    elif kind == "http":
        name = "http-" + re.sub(r"[^A-Za-z0-9]+", "-", _url(spec).split("://", 1)[-1]).strip("-")
    else:
        name = spec
    name = re.sub(r"^[^A-Za-z0-9]+", "", re.sub(r"[^A-Za-z0-9_.-]", "-", name))[:64]
    return name or "solver"


def _url(spec: str) -> str:
    return spec[len("http:") :] if spec.startswith("http:http") else spec


def _seeds(value: Any, *, where: str) -> tuple[int, ...]:
    accepted = "a number of seeds (1 to 1000) or a non-empty list of distinct integers >= 0"
    if isinstance(value, int) and not isinstance(value, bool):
        if not 1 <= value <= 1000:
            raise fail("seeds", value, accepted, where=where, error=SpecError)
        return tuple(range(value))
    if (
        isinstance(value, list | tuple)
        and value
        and all(isinstance(s, int) and not isinstance(s, bool) and s >= 0 for s in value)
        and len(set(value)) == len(value)
    ):
        return tuple(value)
    raise fail("seeds", value, accepted, where=where, error=SpecError)


def parse_solver_entry(entry: Any, *, where: str = "study.toml: solvers") -> SolverSpec:
    """Check one ``[[solvers]]`` entry (a table) and return its :class:`SolverSpec`.

    Raises
    ------
    SpecError
        Naming the key, what was found and what is accepted.
    """
    if not isinstance(entry, Mapping):
        raise fail(
            "solvers", entry, "a table with spec, name, seeds...", where=where, error=SpecError
        )
    for key in entry:
        check_choice("solvers." + str(key), key, _ENTRY_KEYS, where=where, error=SpecError)
    spec = entry.get("spec")
    if not isinstance(spec, str) or not spec.strip():
        raise fail(
            "spec",
            spec,
            "a solver spec: a built-in name, python:MODULE:ATTRIBUTE, command:ARGV or http:URL",
            where=where,
            error=SpecError,
        )
    spec = spec.strip()
    name = entry.get("name", _default_name(spec))
    if not isinstance(name, str) or not _NAME.match(name):
        raise fail(
            "name", name, "1-64 letters, digits, '.', '-' or '_'", where=where, error=SpecError
        )
    seeds = _seeds(entry.get("seeds", 1), where=where)
    options = entry.get("options", {})
    if not isinstance(options, Mapping):
        raise fail("options", options, "a table of solver options", where=where, error=SpecError)
    timeout = check_number(
        "timeout",
        entry.get("timeout", DEFAULT_TIMEOUT),
        low=0.001,
        high=86400,
        where=where,
        error=SpecError,
    )
    modes = entry.get("modes")
    if modes is not None:
        if isinstance(modes, str):
            modes = [modes]
        if not isinstance(modes, list) or not modes:
            raise fail(
                "modes", modes, "a non-empty list of generate, select", where=where, error=SpecError
            )
        for m in modes:
            check_choice("modes", m, MODES, where=where, error=SpecError)
        modes = tuple(modes)
    medium = entry.get("medium")
    if medium is not None:
        check_choice("medium", medium, MEDIA, where=where, error=SpecError)
    families = entry.get("families")
    if families is not None:
        from twofold.study.families import known_families

        if isinstance(families, str):
            families = [families]
        if not isinstance(families, list) or not families:
            raise fail(
                "families",
                families,
                "a non-empty list of family names",
                where=where,
                error=SpecError,
            )
        for f in families:
            check_choice("families", f, known_families(), where=where, error=SpecError)
        families = tuple(families)
    if "api_key" in options:
        raise fail(
            "options.api_key",
            "(hidden)",
            "no key in the study file; set api_key_env to the name of an environment variable",
            where=where,
            error=SpecError,
        )
    return SolverSpec(
        name=name,
        spec=spec,
        seeds=seeds,
        options=dict(options),
        timeout=timeout,
        modes=modes,
        medium=medium,
        families=families,
    )


def solver_from_string(
    spec: str,
    *,
    name: str | None = None,
    seeds: int | Sequence[int] | None = None,
    options: Mapping[str, Any] | None = None,
    entries: Sequence[SolverSpec] = (),
) -> SolverSpec:
    """A :class:`SolverSpec` from a command-line spec string.

    When ``spec`` is the name of one of ``entries`` (the study's ``[[solvers]]``), that entry is
    used; ``seeds`` and ``options`` then override its own.
    """
    for entry in entries:
        if entry.name == spec:
            changes: dict[str, Any] = {}
            if seeds is not None:
                changes["seeds"] = _seeds(seeds, where="--seeds")
            if options:
                changes["options"] = {**entry.options, **dict(options)}
            if name is not None:
                changes["name"] = name
            return dataclasses.replace(entry, **changes)
    raw: dict[str, Any] = {"spec": spec}
    if name is not None:
        raw["name"] = name
    if seeds is not None:
        raw["seeds"] = seeds
    if options:
        raw["options"] = dict(options)
    return parse_solver_entry(raw, where="--solver")


def study_solvers(study: Any) -> list[SolverSpec]:
    """The ``[[solvers]]`` entries of a loaded study, checked; names must be unique."""
    entries = study.table("solvers")
    where = f"{study.file.name}: solvers"
    if not isinstance(entries, list):
        raise fail(
            "solvers", entries, "an array of tables [[solvers]]", where=where, error=SpecError
        )
    out = [parse_solver_entry(e, where=f"{where}[{i}]") for i, e in enumerate(entries)]
    seen: set[str] = set()
    for i, s in enumerate(out):
        if s.name in seen:
            raise fail(
                "name",
                s.name,
                "a name not used by another solver",
                where=f"{where}[{i}]",
                error=SpecError,
            )
        seen.add(s.name)
    return out


# -- building ------------------------------------------------------------------------------------


def build_solver(spec: SolverSpec, seed: int = 0) -> Solver:
    """Build the solver ``spec`` names, for ``seed``; check that it can start.

    Built-in solvers get ``seed`` and their options; ``python:`` classes are called with their
    options (and ``seed`` when they accept it); ``command:`` starts the child and checks its hello
    reply; ``http:`` checks that the endpoint answers.

    Raises
    ------
    SolverError
        One line naming the solver and what to fix (unknown name, unimportable module, a child
        that does not speak the protocol, an endpoint that is down).
    """
    where = f"solver '{spec.name}'"
    kind = spec.kind
    if kind == "builtin":
        try:
            solver = make_builtin(spec.spec, seed=seed, **spec.options)
        except InputError:
            raise SolverError(
                f"{where}: unknown solver spec {spec.spec!r}; use a built-in name ("
                + ", ".join(builtin_solvers())
                + "), python:MODULE:ATTRIBUTE, command:ARGV or http:URL."
            ) from None
        except TypeError as err:
            raise SolverError(f"{where}: bad options for {spec.spec!r}: {err}.") from err
    elif kind == "python":
        solver = _python_solver(spec, seed, where=where)
    elif kind == "command":
        from .command import CommandSolver

        solver = CommandSolver(
            spec.spec[len("command:") :],
            options=spec.options,
            seed=seed,
            timeout=spec.timeout,
            name=spec.name,
        )
    else:
        from .chat import ChatSolver

        solver = ChatSolver(
            _url(spec.spec), options=spec.options, seed=seed, timeout=spec.timeout, name=spec.name
        )
    medium = spec.medium or getattr(solver, "medium", None)
    if medium not in MEDIA:
        raise SolverError(
            f"{where}: field 'medium': got {medium!r}; accepted: one of {', '.join(MEDIA)} "
            "(set medium in the [[solvers]] entry or a medium attribute on the solver)."
        )
    return solver


class _FunctionSolver:
    """Wraps a user's ``solve(view, mode)`` (function or method) so it returns an Answer."""

    def __init__(self, fn: Any, medium: str, owner: Any = None):
        self._fn = fn
        self._owner = owner
        self.medium = medium
        self.max_in_flight = int(getattr(owner, "max_in_flight", 1) or 1)
        #: the version the user's solver declares (part of the trial-cache key)
        self.version = getattr(owner if owner is not None else fn, "version", None)

    def solve(self, view: Any, mode: str) -> Answer:
        return coerce_answer(self._fn(view, mode))


def _check_signature(fn: Any, attr: str, where: str) -> None:
    """Refuse a solve function that cannot be called as ``solve(view, mode)``."""
    try:
        sig = inspect.signature(fn)
    except (TypeError, ValueError):  # builtins without a signature: trust them
        return
    try:
        sig.bind(None, "generate")
    except TypeError as err:
        raise SolverError(
            f"{where}: {attr} cannot be called as solve(view, mode) ({err}); fix its signature."
        ) from None

    def close(self) -> None:
        close = getattr(self._owner, "close", None)
        if callable(close):
            close()


def _python_solver(spec: SolverSpec, seed: int, *, where: str) -> Solver:
    target = spec.spec[len("python:") :]
    module_name, sep, attr = target.partition(":")
    if not sep or not module_name or not attr:
        raise SolverError(
            f"{where}: spec {spec.spec!r} is not python:MODULE:ATTRIBUTE (e.g. "
            "python:my_pkg.solvers:solve)."
        )
    try:
        module = importlib.import_module(module_name)
    except ImportError as err:
        raise SolverError(
            f"{where}: cannot import module {module_name!r} ({err}); install it or fix the spec."
        ) from err
    obj: Any = module
    for part in attr.split("."):
        if not hasattr(obj, part):
            raise SolverError(
                f"{where}: module {module_name!r} has no attribute {attr!r}; fix the spec."
            )
        obj = getattr(obj, part)
    options = {k: v for k, v in spec.options.items() if k != "medium"}
    if inspect.isclass(obj):
        params = inspect.signature(obj).parameters
        takes_seed = "seed" in params or any(
            p.kind is inspect.Parameter.VAR_KEYWORD for p in params.values()
        )
        try:
            obj = obj(**({"seed": seed} if takes_seed else {}), **options)
        except TypeError as err:
            raise SolverError(
                f"{where}: cannot build {attr} with options {options}: {err}."
            ) from err
    elif options:
        raise SolverError(
            f"{where}: options {sorted(options)} given but {attr} is not a class to build with "
            "them; remove the options or point the spec at a class."
        )
    medium = spec.options.get("medium") or getattr(obj, "medium", None) or "structured"
    if hasattr(obj, "solve") and callable(obj.solve):
        _check_signature(obj.solve, f"{attr}.solve", where)
        return _FunctionSolver(obj.solve, medium, owner=obj)
    if callable(obj):
        _check_signature(obj, attr, where)
        return _FunctionSolver(obj, medium)
    raise SolverError(
        f"{where}: {attr} is neither callable nor an object with a solve(view, mode) method."
    )
