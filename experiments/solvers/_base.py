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
from twofold.study.item import canonical_json
from twofold.study.registry import Registry

__all__ = [
    "Answer",
    "BuiltinSolver",
    "ItemSeeded",
    "SOLVERS",
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


@dataclasses.dataclass(frozen=True)
class BuiltinSolver:
    """A registered solver: its factory (``factory(**options) -> Solver``) and one line about it."""

    factory: Callable[..., Solver]
    description: str


_PKG = "twofold.experiments.solvers"

#: Every built-in solver, by name -> the module that registers it (loaded on first use), plus
#: solvers registered at run time and plugins of the ``twofold.solvers`` entry-point group.
SOLVERS: Registry[BuiltinSolver] = Registry(
    "solver",
    builtins={
        "choices-only": f"{_PKG}.baselines",
        "contrast-ref": f"{_PKG}.contrast",
        "copy-input": f"{_PKG}.grids",
        "grids-ref": f"{_PKG}.grids",
        "literal": f"{_PKG}.strings",
        "matrices-ref": f"{_PKG}.matrices",
        "position-only": f"{_PKG}.baselines",
        "random": f"{_PKG}.baselines",
        "reference": f"{_PKG}.reference",
        "strings-ref": f"{_PKG}.strings",
    },
    group="twofold.solvers",
)


def register_solver(
    name: str, description: str
) -> Callable[[Callable[..., Solver]], Callable[..., Solver]]:
    """Decorator registering a built-in solver factory under ``name``.

    The factory takes keyword options (always ``seed`` and ``budget`` for reference solvers)
    and returns a solver.
    """

    def deco(factory: Callable[..., Solver]) -> Callable[..., Solver]:
        SOLVERS.register(name, BuiltinSolver(factory, description))
        return factory

    return deco


def builtin_solvers() -> dict[str, str]:
    """Names and descriptions of the built-in solvers, sorted by name."""
    return {k: entry.description for k, entry in SOLVERS.load_all().items()}


def make_builtin(name: str, **options: Any) -> Solver:
    """Build the built-in solver ``name`` with ``options``.

    Raises
    ------
    InputError
        ``field 'solver': got 'x'; accepted: one of choices-only, contrast-ref, ...`` for an
        unknown name.
    """
    return SOLVERS.get(name).factory(**options)
