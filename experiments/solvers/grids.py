"""Built-in solvers for the ``grids`` family.

``grids-ref``
    Enumerative search over compositions of the family's grid operations, shortest first, pruned
    by consistency with the demonstrations (see :func:`twofold.study.families.grids.search`).
    Effort is the number of programs tried.
``copy-input``
    A baseline: the probe unchanged (generate mode), or the choice most like the probe (select
    mode).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from twofold.study.checks import check_choice, check_int
from twofold.study.exceptions import InputError
from twofold.study.families.grids import SearchResult, describe_program, search

from ._base import Answer, register_solver

__all__ = ["CopyInputSolver", "GridsRefSolver"]


def _arr(grid: Any) -> np.ndarray:
    return np.asarray(grid, dtype=np.int8)


def _view_parts(view: Any) -> tuple[list[tuple[np.ndarray, np.ndarray]], np.ndarray]:
    if not isinstance(view, dict) or "examples" not in view or "probe" not in view:
        raise InputError(
            f"field 'view': got {str(view)[:60]!r}; accepted: the structured view of a grids "
            "item (a dict with 'examples' and 'probe').",
            field="view",
        )
    pairs = [(_arr(p["before"]), _arr(p["after"])) for p in view["examples"]]
    return pairs, _arr(view["probe"])


def _choices(view: dict[str, Any]) -> list[np.ndarray]:
    raw = view.get("choices")
    if not raw:
        raise InputError(
            "field 'choices': got none; accepted: a select-mode view with choices.",
            field="choices",
        )
    return [_arr(c) for c in raw]


def _same(a: np.ndarray, b: np.ndarray) -> bool:
    return a.shape == b.shape and bool(np.array_equal(a, b))


class GridsRefSolver:
    """Enumerative program search over the grids grammar.

    Parameters
    ----------
    seed : int, default 0
        Shuffles the order in which operations are tried (which consistent program is found
        first) and breaks ties when no program is found in select mode.
    budget : int, default 2000
        Most programs tried (prefixes expanded plus complete candidates checked).
    depth : int, default 3
        Longest composition searched.
    """

    medium = "structured"

    def __init__(self, *, seed: int = 0, budget: int = 2_000, depth: int = 3):
        self.seed = check_int("seed", seed, low=0, where="grids-ref")
        self.budget = check_int("budget", budget, low=1, where="grids-ref")
        self.depth = check_int("depth", depth, low=1, high=4, where="grids-ref")

    def solve(self, view: Any, mode: str) -> Answer:
        check_choice("mode", mode, ("generate", "select"), where="grids-ref")
        pairs, test = _view_parts(view)
        choices = _choices(view) if mode == "select" else []
        stats = SearchResult()
        found: tuple[Any, np.ndarray, int | None] | None = None
        for prog, out in search(
            pairs,
            test,
            max_depth=self.depth,
            budget=self.budget,
            order_seed=self.seed,
            stats=stats,
        ):
            if mode == "generate":
                found = (prog, out, None)
                break
            hits = [k for k, c in enumerate(choices, start=1) if _same(c, out)]
            if hits:
                found = (prog, out, hits[0])
                break
        if found is None:
            why = "budget ran out" if stats.exhausted else "no consistent program"
            if mode == "generate":
                return Answer(
                    answer=test.tolist(),
                    effort=float(stats.tried),
                    effort_unit="programs",
                    explanation=f"{why} after {stats.tried} programs; copied the probe",
                )
            guess = int(np.random.default_rng(self.seed).integers(len(choices))) + 1
            return Answer(
                answer=guess,
                effort=float(stats.tried),
                effort_unit="programs",
                explanation=f"{why} after {stats.tried} programs; guessed choice {guess}",
            )
        prog, out, k = found
        words = describe_program([list(op) for op in prog])
        return Answer(
            answer=out.tolist() if mode == "generate" else k,
            effort=float(stats.tried),
            effort_unit="programs",
            explanation=f"{words} (found after {stats.tried} programs)",
            raw={"program": [list(op) for op in prog]},
        )


class CopyInputSolver:
    """Baseline: answer with the probe (or the choice most like it)."""

    medium = "structured"

    def __init__(self, *, seed: int = 0, budget: int | None = None):
        self.seed = check_int("seed", seed, low=0, where="copy-input")

    def solve(self, view: Any, mode: str) -> Answer:
        check_choice("mode", mode, ("generate", "select"), where="copy-input")
        _, test = _view_parts(view)
        if mode == "generate":
            return Answer(
                answer=test.tolist(),
                effort=1.0,
                effort_unit="programs",
                explanation="copied the probe",
            )
        choices = _choices(view)
        scores = [_similarity(c, test) for c in choices]
        k = int(np.argmax(scores)) + 1  # the first of equally similar choices
        return Answer(
            answer=k,
            effort=1.0,
            effort_unit="programs",
            explanation=f"choice {k} is the most like the probe",
        )


def _similarity(a: np.ndarray, b: np.ndarray) -> float:
    """Share of equal cells when the shapes match; below zero by the size gap otherwise."""
    if a.shape == b.shape:
        return float((a == b).mean())
    return -float(abs(a.shape[0] - b.shape[0]) + abs(a.shape[1] - b.shape[1]))


@register_solver("grids-ref", "grids: enumerative search over compositions of grid operations")
def make_grids_ref(*, seed: int = 0, budget: int = 2_000, depth: int = 3) -> GridsRefSolver:
    """The reference solver for the grids family (see :class:`GridsRefSolver`)."""
    return GridsRefSolver(seed=seed, budget=budget, depth=depth)


@register_solver("copy-input", "grids baseline: the probe unchanged, or the choice most like it")
def make_copy_input(*, seed: int = 0, budget: int | None = None) -> CopyInputSolver:
    """The copy-the-input baseline for the grids family."""
    return CopyInputSolver(seed=seed, budget=budget)
