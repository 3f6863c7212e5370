"""``reference``: one machine respondent for every family, dispatching to each family's own.

A study that mixes families needs one solver that answers all of them. This one keeps the reference
solver each family declares (``Family.reference_solver``, built lazily) and passes each item's
structured view to the solver of the item's family, so a study can name "reference" once and set
per-family budgets.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from twofold.study.checks import fail
from twofold.study.exceptions import InputError
from twofold.study.families import get_family, known_families

from ._base import Answer, Solver, make_builtin, register_solver

__all__ = ["ReferenceSolver"]


class ReferenceSolver:
    """Dispatch each item to its family's reference solver.

    Parameters
    ----------
    seed : int, default 0
        Passed to every family solver.
    budgets : mapping of family name to int, optional
        Budget per family; a family not named uses its solver's default budget.
    budget : int, optional
        One budget for every family (``budgets`` entries win).

    Every family's solver is built here, so a bad option fails before the first trial.
    """

    medium = "structured"

    def __init__(
        self, *, seed: int = 0, budgets: Mapping[str, int] | None = None, budget: int | None = None
    ):
        self.seed = seed
        if budgets is not None and not isinstance(budgets, Mapping):
            raise fail("budgets", budgets, "a table {family = budget}", error=InputError)
        self.budgets = dict(budgets or {})
        self.budget = budget
        self._solvers: dict[str, Solver] = {}
        #: family -> the name of the built-in solver it declares as its reference
        self.references = {
            fam: name
            for fam in known_families()
            if (name := get_family(fam).reference_solver) is not None
        }
        families = sorted(self.references)
        for fam in sorted(self.budgets):
            if fam not in families:
                raise fail(
                    "budgets." + str(fam), fam, "one of " + ", ".join(families), error=InputError
                )
        for fam in families:
            self._solver(fam)
        #: declared version (part of the trial-cache key): this dispatcher's and each family's
        self.version = "reference/2;" + ";".join(
            f"{self.references[fam]}/{getattr(self._solvers[fam], 'version', None) or '1'}"
            for fam in families
        )

    def _solver(self, family: str) -> Solver:
        if family not in self.references:
            raise fail(
                "view.family",
                family,
                "a family with a reference solver: " + ", ".join(sorted(self.references)),
                error=InputError,
            )
        if family not in self._solvers:
            opts: dict[str, Any] = {"seed": self.seed}
            b = self.budgets.get(family, self.budget)
            if b is not None:
                opts["budget"] = b
            self._solvers[family] = make_builtin(self.references[family], **opts)
        return self._solvers[family]

    def solve(self, view: Any, mode: str) -> Answer:
        family = view.get("family") if isinstance(view, dict) else None
        if not isinstance(family, str):
            raise fail(
                "view.family", family, "a structured view naming its family", error=InputError
            )
        return self._solver(family).solve(view, mode)


@register_solver(
    "reference",
    "every family: dispatches to its reference solver (options: seed, budget, budgets={family=N})",
)
def _make(**options: Any) -> ReferenceSolver:
    return ReferenceSolver(**options)
