"""The ``python:`` adapter: an importable function, object with ``solve()``, or class.

``python:MODULE:ATTRIBUTE`` imports ``MODULE`` and takes ``ATTRIBUTE`` (dotted for nested
names): a class is built with the entry's options (and ``seed`` when it accepts one); an object
with a ``solve(view, mode)`` method or a plain function is used as it is. The current folder is
importable, as it is for ``python -m``: a ``my_model.py`` in the folder the command runs in is
found as ``python:my_model:solve``.

The view the solver receives (its medium) is the first of: the ``[[solvers]]`` entry's
``medium``, the option ``medium`` (``--option medium=text``), a ``medium`` attribute on the
object, class or function, a module-level ``medium`` beside a plain function, else
``structured``.
"""

from __future__ import annotations

import importlib
import inspect
import os
import sys
from typing import TYPE_CHECKING, Any

from twofold.experiments.solvers import Answer
from twofold.study.exceptions import SolverError

from .._core import coerce_answer
from . import Adapter

if TYPE_CHECKING:  # pragma: no cover
    from twofold.experiments.solvers import Solver

    from ..spec import SolverSpec

__all__ = ["ADAPTER"]

PREFIX = "python:"


def default_name(spec: str) -> str:
    """The attribute's name (``python:pkg.mod:my_solver`` -> ``my-solver``)."""
    return spec.rsplit(":", 1)[-1].replace("_", "-")


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

    def close(self) -> None:
        close = getattr(self._owner, "close", None)
        if callable(close):
            close()


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


def build(spec: SolverSpec, seed: int, where: str) -> Solver:
    """Import the target; build a class with its options (and ``seed`` when it takes one)."""
    target = spec.spec[len(PREFIX) :]
    module_name, sep, attr = target.partition(":")
    if not sep or not module_name or not attr:
        raise SolverError(
            f"{where}: spec {spec.spec!r} is not python:MODULE:ATTRIBUTE (e.g. "
            "python:my_pkg.solvers:solve)."
        )
    cwd = os.getcwd()
    if cwd not in sys.path and "" not in sys.path:
        sys.path.insert(0, cwd)  # as `python -m` does: the user's my_model.py beside study.toml
        importlib.invalidate_caches()
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
    medium = spec.options.get("medium") or getattr(obj, "medium", None)
    if medium is None and inspect.isfunction(obj):
        medium = getattr(sys.modules.get(obj.__module__), "medium", None)
    medium = medium or "structured"
    if hasattr(obj, "solve") and callable(obj.solve):
        _check_signature(obj.solve, f"{attr}.solve", where)
        return _FunctionSolver(obj.solve, medium, owner=obj)
    if callable(obj):
        _check_signature(obj, attr, where)
        return _FunctionSolver(obj, medium)
    raise SolverError(
        f"{where}: {attr} is neither callable nor an object with a solve(view, mode) method."
    )


ADAPTER = Adapter("python", (PREFIX,), "python:MODULE:ATTRIBUTE", default_name, build)
