"""The solver protocol: ``solve(view, mode) -> Answer``, and the registry of built-in solvers.

A solver is any object with a ``medium`` attribute (``"text"``, ``"picture"`` or ``"structured"``:
the view it wants) and a ``solve(view, mode)`` method. ``view`` is the item rendered in that
medium (a str, PNG bytes, or a dict; never containing the answer) and ``mode`` is ``"generate"``
or ``"select"``. In select mode the answer is a 1-based choice number.
"""

from __future__ import annotations

import dataclasses
import hashlib
from collections import Counter
from collections.abc import Callable, Mapping
from typing import Any, Protocol, runtime_checkable

import numpy as np
from twofold.study._check import fail
from twofold.study.exceptions import InputError
from twofold.study.item import canonical_json

__all__ = [
    "Answer",
    "ItemSeeded",
    "Solver",
    "builtin_solvers",
    "make_builtin",
    "register_solver",
    "trial_rng",
]


@dataclasses.dataclass(frozen=True)
class Answer:
    """What a solver returns for one trial.

    Attributes
    ----------
    answer : Any
        The response in the family's form (generate mode) or a 1-based choice number (select).
    effort : float or None
        The machine analogue of response time, in ``effort_unit``.
    effort_unit : str or None
        ``"nodes"``, ``"programs"``, ``"rules"``, ``"tokens"``, ``"seconds"``...
    explanation : str or None
        A human-readable account of how the answer was reached, where the solver has one.
    raw : Any
        The solver's raw output (e.g. a model's reply text), kept for invalid answers.
    """

    answer: Any
    effort: float | None = None
    effort_unit: str | None = None
    explanation: str | None = None
    raw: Any = None


@runtime_checkable
class Solver(Protocol):
    """Anything with a ``medium`` and a ``solve(view, mode)`` method."""

    medium: str

    def solve(self, view: Any, mode: str) -> Answer: ...


def trial_rng(seed: int, key: str, draw: int = 0) -> np.random.Generator:
    """A generator seeded by ``(seed, key, draw)`` only: the same trial always gets the same stream.

    ``key`` is the item id (or any stable text naming the trial); it enters through its SHA-256,
    so the stream does not depend on which items were solved before, in which process or in
    which order -- a resumed or multi-process sweep draws exactly what an uninterrupted one does.
    """
    digest = hashlib.sha256(key.encode("utf-8")).digest()
    words = [int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4)]
    return np.random.default_rng([int(seed), *words, int(draw)])


class ItemSeeded:
    """Mixin for seeded solvers: one random stream per ``(seed, item id, mode)``.

    The item id comes from the structured view's ``item`` field; a view without one (a hand-made
    view) is keyed by its canonical JSON. Asking again for the same trial in the same solver
    object gives the next stream (``draw`` counts up), so repeated calls on one view still vary.
    """

    seed: int

    def _trial_rng(self, view: Any, mode: str) -> np.random.Generator:
        if isinstance(view, Mapping) and isinstance(view.get("item"), str):
            key = f"item:{view['item']}|{mode}"
        else:
            try:
                key = "view:" + canonical_json(view) + "|" + mode
            except (TypeError, ValueError):
                key = f"view:{view!r}|{mode}"
        draws = self.__dict__.setdefault("_draws", Counter())
        draw = draws[key]
        draws[key] += 1
        return trial_rng(self.seed, key, draw)


#: name -> (factory(**options) -> Solver, one-line description)
_BUILTINS: dict[str, tuple[Callable[..., Solver], str]] = {}


def register_solver(
    name: str, description: str
) -> Callable[[Callable[..., Solver]], Callable[..., Solver]]:
    """Decorator registering a built-in solver factory under ``name``.

    The factory takes keyword options (always ``seed`` and ``budget`` for reference solvers)
    and returns a solver.
    """

    def deco(factory: Callable[..., Solver]) -> Callable[..., Solver]:
        _BUILTINS[name] = (factory, description)
        return factory

    return deco


def builtin_solvers() -> dict[str, str]:
    """Names and descriptions of the built-in solvers, sorted by name."""
    _load()
    return {k: _BUILTINS[k][1] for k in sorted(_BUILTINS)}


def make_builtin(name: str, **options: Any) -> Solver:
    """Build the built-in solver ``name`` with ``options``."""
    _load()
    if name not in _BUILTINS:
        raise fail(
            "solver", name, "a built-in solver: " + ", ".join(sorted(_BUILTINS)), error=InputError
        )
    return _BUILTINS[name][0](**options)


def _load() -> None:
    import importlib
    import pkgutil

    from twofold.experiments import solvers as pkg

    for mod in pkgutil.iter_modules(pkg.__path__):
        if not mod.name.startswith("_"):
            importlib.import_module(f"{pkg.__name__}.{mod.name}")
