"""Solvers for the ``strings`` family: ``strings-ref`` (program induction) and ``literal``.

``strings-ref`` is Bayesian program induction over the family's transformation grammar (groups
and symbols as units; first/last/all/counted positions and literal symbols as selectors; successor
and predecessor shifts, literal replacement, repetition, removal, run continuation, swapping and
reversal as operations). It enumerates candidate descriptions of the source change, keeps those
consistent with the example (likelihood 1, else 0), weights them by a description-length prior
``P(d) ∝ 2^-DL(d)``, applies the most probable one to the target's own parse and ranks the
answers by posterior mass.

Enumeration order and budget
----------------------------
Candidates are drawn from the grammar instance of the item (every position of the string, every
symbol of the example as a literal) without repetition, in a seeded order that favours short
descriptions: the Gumbel top-k trick samples the order from a tempered prior
``∝ 2^(-DL / TEMPERATURE)``. ``budget`` caps the number of descriptions tried. Longer strings,
mixed grouping and more distinct symbols make the grammar instance larger, so at a fixed budget
the shortest consistent description is missed more often and accuracy falls.

``literal`` is the baseline that copies the change literally: the same symbols written at the same
place of the target (``defg -> defh`` gives ``qrst -> qrsh``).
"""

from __future__ import annotations

import math
import zlib
from collections.abc import Mapping
from typing import Any

import numpy as np
from twofold.study.exceptions import SolverError
from twofold.study.families.strings import (
    apply_program,
    describe_program,
    description_length,
    literal_edit,
    program_space,
)

from ._base import Answer, register_solver

__all__ = ["LiteralSolver", "StringsReference", "TEMPERATURE"]

#: temperature (in bits) of the prior that orders the enumeration
TEMPERATURE = 4.0


def _check_opt(name: str, value: Any, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < low:
        raise SolverError(f"field '{name}': got {value!r}; accepted: an integer >= {low}.")
    return value


def _read_view(view: Any) -> tuple[str, tuple[int, ...], tuple[int, ...], tuple[int, ...]]:
    if not isinstance(view, Mapping):
        raise SolverError(
            f"field 'view': got {type(view).__name__}; accepted: the structured view (a dict)."
        )
    try:
        symbols = "".join(view["symbol_order"])
        src, chg, tgt = (
            tuple(symbols.index(c) for c in view[k]) for k in ("source", "changed", "target")
        )
    except (KeyError, ValueError, TypeError) as err:
        raise SolverError(
            "field 'view': not a strings structured view (needs symbol_order, source, changed, "
            f"target drawn from the order): {err}"
        ) from err
    return symbols, src, chg, tgt


def _decode(seq: tuple[int, ...], symbols: str) -> str:
    return "".join(symbols[v] for v in seq)


def _edit_distance(a: str, b: str) -> int:
    prev = list(range(len(b) + 1))
    for i, ca in enumerate(a, start=1):
        cur = [i]
        for j, cb in enumerate(b, start=1):
            cur.append(min(prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (ca != cb)))
        prev = cur
    return prev[-1]


def _pick_choice(choices: list[str], ranked: list[str], fallback: str) -> tuple[int, str]:
    """1-based choice: the best-ranked answer offered, else the offer nearest the fallback."""
    for ans in ranked:
        if ans in choices:
            return choices.index(ans) + 1, f"chose {ans!r} (rank {ranked.index(ans) + 1})"
    dists = [_edit_distance(c, fallback) for c in choices]
    k = int(np.argmin(dists))
    return k + 1, f"no ranked answer offered; chose the choice nearest {fallback!r}"


class StringsReference:
    """Reference solver for ``strings``: program induction under a description-length prior.

    Parameters
    ----------
    seed : int, default 0
        Seeds the enumeration order (combined with the item's strings, so answers do not depend
        on the order items are solved in).
    budget : int, default 100
        Most candidate descriptions tried on one item (the effort unit is ``"programs"``).
    """

    medium = "structured"

    def __init__(self, *, seed: int = 0, budget: int = 100):
        self.seed = _check_opt("seed", seed, 0)
        self.budget = _check_opt("budget", budget, 1)

    def _rank(
        self, symbols: str, src: tuple[int, ...], chg: tuple[int, ...], tgt: tuple[int, ...]
    ) -> tuple[list[tuple[str, float, str]], int]:
        n = len(symbols)
        space = program_space(src, chg, n)
        dls = np.array([description_length(p, n) for p in space])
        key = zlib.crc32(f"{symbols}|{_decode(src, symbols)}|{_decode(chg, symbols)}".encode())
        rng = np.random.default_rng([self.seed, key])
        logits = -dls * math.log(2.0) / TEMPERATURE + rng.gumbel(size=len(space))
        order = np.argsort(-logits, kind="stable")[: self.budget]
        found: list[tuple[float, str, str]] = []
        for i in order:
            prog = space[int(i)]
            if apply_program(prog, src, n) != chg:
                continue
            out = apply_program(prog, tgt, n)
            if out is None:
                continue
            found.append(
                (float(dls[int(i)]), _decode(out, symbols), describe_program(prog, symbols))
            )
        tried = len(order)
        if not found:
            return [], tried
        found.sort(key=lambda f: (f[0], f[2]))
        best_dl = found[0][0]
        mass: dict[str, float] = {}
        why: dict[str, str] = {}
        for dl, out, desc in found:
            mass[out] = mass.get(out, 0.0) + 2.0 ** -(dl - best_dl)
            why.setdefault(out, f"{desc} ({dl:.1f} bits)")
        total = sum(mass.values())
        best = found[0][1]
        ranked = sorted(mass, key=lambda a: (a != best, -mass[a], a))
        return [(a, mass[a] / total, why[a]) for a in ranked], tried

    def solve(self, view: Any, mode: str) -> Answer:
        symbols, src, chg, tgt = _read_view(view)
        ranking, tried = self._rank(symbols, src, chg, tgt)
        target = _decode(tgt, symbols)
        raw = [{"answer": a, "posterior": round(p, 6), "reading": w} for a, p, w in ranking]
        if ranking:
            best, _, why = ranking[0]
            expl = f"best description: {why}; {len(ranking)} distinct answer(s) from {tried} tried"
        else:
            best = target
            expl = f"no description consistent with the example among {tried} tried; target copied"
        if mode == "select":
            choices = list(view.get("choices") or [])
            if not choices:
                raise SolverError("field 'choices': select mode needs choices in the view.")
            k, note = _pick_choice(choices, [r[0] for r in ranking], best)
            return Answer(
                k, effort=tried, effort_unit="programs", explanation=f"{expl}; {note}", raw=raw
            )
        if mode != "generate":
            raise SolverError(f"field 'mode': got {mode!r}; accepted: generate, select.")
        return Answer(best, effort=tried, effort_unit="programs", explanation=expl, raw=raw)


class LiteralSolver:
    """Baseline: write the changed symbols literally at the same place of the target."""

    medium = "structured"

    def __init__(self, *, seed: int = 0):
        self.seed = _check_opt("seed", seed, 0)

    def solve(self, view: Any, mode: str) -> Answer:
        symbols, src, chg, tgt = _read_view(view)
        out = _decode(literal_edit(src, chg, tgt), symbols)
        expl = "copied the change literally at the same place"
        if mode == "select":
            choices = list(view.get("choices") or [])
            if not choices:
                raise SolverError("field 'choices': select mode needs choices in the view.")
            k, note = _pick_choice(choices, [out], out)
            return Answer(k, effort=1, effort_unit="rules", explanation=f"{expl}; {note}", raw=out)
        if mode != "generate":
            raise SolverError(f"field 'mode': got {mode!r}; accepted: generate, select.")
        return Answer(out, effort=1, effort_unit="rules", explanation=expl, raw=out)


@register_solver(
    "strings-ref",
    "strings: program induction over a transformation grammar; budget = descriptions tried",
)
def _make_ref(*, seed: int = 0, budget: int = 100) -> StringsReference:
    return StringsReference(seed=seed, budget=budget)


@register_solver("literal", "strings baseline: copies the change literally at the same place")
def _make_literal(*, seed: int = 0) -> LiteralSolver:
    return LiteralSolver(seed=seed)
