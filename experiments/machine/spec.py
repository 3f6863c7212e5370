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
import re
from collections.abc import Mapping, Sequence
from typing import Any

from twofold.experiments.solvers import Solver, builtin_solvers, make_builtin
from twofold.study.checks import check_choice, check_number, fail
from twofold.study.exceptions import InputError, SolverError, SpecError
from twofold.study.item import MODES, canonical_json
from twofold.study.render import MEDIA

from ._core import redact_mapping
from .adapters import Adapter, adapter_for, spec_forms

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
        """``builtin``, or the adapter claiming the spec (``python``, ``command``, ``http``...)."""
        return _kind(self.spec)

    @property
    def adapter(self) -> Adapter | None:
        """The adapter claiming the spec, or None for a built-in solver."""
        return adapter_for(self.spec)

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
    adapter = adapter_for(spec)
    return "builtin" if adapter is None else adapter.name


def _default_name(spec: str) -> str:
    adapter = adapter_for(spec)
    name = spec if adapter is None else adapter.default_name(spec)
    name = re.sub(r"^[^A-Za-z0-9]+", "", re.sub(r"[^A-Za-z0-9_.-]", "-", name))[:64]
    return name or "solver"


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
            "a solver spec: " + spec_forms(),
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
    adapter = adapter_for(spec.spec)
    if adapter is None:
        try:
            solver = make_builtin(spec.spec, seed=seed, **spec.options)
        except InputError:
            raise SolverError(
                f"{where}: unknown solver spec {spec.spec!r}; use "
                + spec_forms(f"a built-in name ({', '.join(builtin_solvers())})")
                + "."
            ) from None
        except TypeError as err:
            raise SolverError(f"{where}: bad options for {spec.spec!r}: {err}.") from err
    else:
        solver = adapter.build(spec, seed, where)
    medium = spec.medium or getattr(solver, "medium", None)
    if medium not in MEDIA:
        raise SolverError(
            f"{where}: field 'medium': got {medium!r}; accepted: one of {', '.join(MEDIA)} "
            "(set medium in the [[solvers]] entry or a medium attribute on the solver)."
        )
    return solver
