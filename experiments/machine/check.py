"""A conformance check users can run on their own solver before a sweep."""

from __future__ import annotations

from typing import Any

from twofold.study.bank import Bank
from twofold.study.exceptions import SolverError
from twofold.study.render import MEDIA

from .runner import run_trial
from .spec import SolverSpec, build_solver, parse_solver_entry

__all__ = ["CHECK_COLUMNS", "check_solver"]

#: columns of the table returned by :func:`check_solver`
CHECK_COLUMNS = (
    "item",
    "family",
    "mode",
    "status",
    "correct",
    "error_type",
    "effort",
    "effort_unit",
    "detail",
)


def check_solver(solver: Any, bank: Bank, *, n_items: int = 5, seed: int = 0) -> Any:
    """Run ``solver`` on the first ``n_items`` items of each family of ``bank``, every mode.

    Parameters
    ----------
    solver : Solver, SolverSpec or str
        A solver object, a spec, or a spec string (``python:...``, ``command:...``...).
    bank : Bank
        Items to try (e.g. a small bank made with ``twofold items generate``).
    n_items : int, default 5
        Items per family.
    seed : int, default 0
        Seed for building a solver from a spec.

    Returns
    -------
    pandas.DataFrame
        One row per trial with columns :data:`CHECK_COLUMNS` (as in the trial log).

    Raises
    ------
    SolverError
        The solver has no valid ``medium`` or no ``solve`` method, or no trial came back
        ``ok`` or ``invalid`` (every one failed or timed out); the message quotes the first reason.
    """
    import pandas as pd

    if isinstance(solver, str):
        solver = parse_solver_entry({"spec": solver}, where="check_solver")
    medium_override = None
    if isinstance(solver, SolverSpec):
        medium_override = solver.medium
        solver = build_solver(solver, seed)
    medium = medium_override or getattr(solver, "medium", None)
    if medium not in MEDIA:
        raise SolverError(
            f"check_solver: field 'medium': got {medium!r}; accepted: one of {', '.join(MEDIA)}."
        )
    if not callable(getattr(solver, "solve", None)):
        raise SolverError("check_solver: the solver has no solve(view, mode) method.")
    rows = []
    per_family: dict[str, int] = {}
    for item in bank:
        if per_family.get(item.family, 0) >= n_items:
            continue
        per_family[item.family] = per_family.get(item.family, 0) + 1
        for mode in item.modes:
            row = run_trial(solver, item, mode, medium=str(medium))
            rows.append({c: row.get(c) for c in CHECK_COLUMNS})
    table = pd.DataFrame(rows, columns=list(CHECK_COLUMNS))
    if len(table) and not table["status"].isin(["ok", "invalid"]).any():
        raise SolverError(
            f"check_solver: all {len(table)} trials failed; first reason: "
            f"{str(table['detail'].iloc[0]).splitlines()[0]}"
        )
    return table
