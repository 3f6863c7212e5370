"""The readings of a source change: every consistent program, the kinds of readings, the
literal edit and the analysis of one item."""

from __future__ import annotations

import math
from collections.abc import Sequence

from .grammar import (
    _SHIFTS,
    ACCEPT_MARGIN,
    RULES,
    Program,
    _select,
    _selectors,
    _step,
    _units,
    apply_program,
    description_length,
    is_literal,
)


def consistent_programs(src: Sequence[int], chg: Sequence[int], n: int) -> list[Program]:
    """Every description of the grammar that turns ``src`` into ``chg`` (exhaustive).

    Map descriptions are found constructively (aligning units and solving for the op); the other
    forms are tested one by one. Aliases (``pos 1`` = ``first``, ``rpos 1`` = ``last``) are left
    out of the grammar.
    """
    src, chg = tuple(src), tuple(chg)
    if src == chg:
        return []
    out: list[Program] = []
    ls, lc = len(src), len(chg)
    for level in ("group", "symbol"):
        units = _units(src, level)
        nu = len(units)
        vals = [u[0] for u in units]
        if lc == ls:
            # align: each source unit must map to a uniform slice of the changed string
            new: list[int] = []
            pos = 0
            ok = True
            for _v, c in units:
                piece = chg[pos : pos + c]
                if piece.count(piece[0]) != c:
                    ok = False
                    break
                new.append(piece[0])
                pos += c
            if ok:
                changed = {i for i in range(nu) if new[i] != vals[i]}
                for sel in _selectors(nu, vals, with_values=True):
                    idx = _select(sel, units)
                    if not idx or not changed <= set(idx):
                        continue
                    for k in _SHIFTS:
                        if all(new[i] == (vals[i] + k) % n for i in idx):
                            out.append(("map", level, sel, ("shift", k)))
                    first = new[idx[0]]
                    if all(new[i] == first for i in idx):
                        out.append(("map", level, sel, ("set", first)))
            prog: Program = ("swap", level)
            if apply_program(prog, src, n) == chg:
                out.append(prog)
        elif lc > ls:
            for sel in _selectors(nu, vals, with_values=True):
                idx = _select(sel, units)
                if not idx or sum(units[i][1] for i in idx) != lc - ls:
                    continue  # the repeated units would not add the right number of symbols
                prog = ("double", level, sel)
                if apply_program(prog, src, n) == chg:
                    out.append(prog)
            if chg[:ls] == src:
                tail = chg[ls:]
                count = units[-1][1] if level == "group" else 1
                if len(tail) == count and tail.count(tail[0]) == count:
                    v = tail[0]
                    last = vals[-1]
                    if nu >= 2 and v == (last + _step(last, vals[-2], n)) % n:
                        out.append(("append", level, ("next",)))
                    for k in _SHIFTS:
                        if v == (last + k) % n:
                            out.append(("append", level, ("shift", k)))
                    out.append(("append", level, ("value", v)))
        else:
            for sel in _selectors(nu, vals, with_values=True):
                idx = _select(sel, units)
                if not idx or sum(units[i][1] for i in idx) != ls - lc:
                    continue
                prog = ("delete", level, sel)
                if apply_program(prog, src, n) == chg:
                    out.append(prog)
    if lc == ls and chg == src[::-1]:
        out.append(("reverse",))
    return out


def rule_program(rule: str) -> Program:
    """The intended program of a rule name (a key of :data:`RULES`)."""
    return RULES[rule]


def _sym(v: int, symbols: str | None) -> str:
    return repr(symbols[v]) if symbols is not None else f"#{v}"


def describe_program(prog: Program, symbols: str | None = None) -> str:
    """A short English description of a program (symbols named when ``symbols`` is given)."""
    form = prog[0]
    if form == "reverse":
        return "reverse the string"
    level = prog[1]
    unit = "group" if level == "group" else "symbol"
    if form == "swap":
        return f"swap the first and last {unit}"

    def sel_text(sel: Program) -> str:
        if sel[0] == "first":
            return f"the first {unit}"
        if sel[0] == "last":
            return f"the last {unit}"
        if sel[0] == "all":
            return f"every {unit}"
        if sel[0] == "pos":
            return f"{unit} {sel[1]} from the start"
        if sel[0] == "rpos":
            return f"{unit} {sel[1]} from the end"
        return f"every {unit} showing {_sym(sel[1], symbols)}"

    if form == "map":
        op = prog[3]
        if op[0] == "set":
            return f"replace {sel_text(prog[2])} by {_sym(op[1], symbols)}"
        k = op[1]
        word = "successor" if k > 0 else "predecessor"
        times = "" if abs(k) == 1 else f" ({abs(k)} places)"
        return f"replace {sel_text(prog[2])} by its {word}{times}"
    if form == "double":
        return f"repeat {sel_text(prog[2])}"
    if form == "delete":
        return f"remove {sel_text(prog[2])}"
    rel = prog[2]
    if rel[0] == "next":
        return f"add a {unit} continuing the run"
    if rel[0] == "prev":
        return f"add a {unit} going back along the run"
    if rel[0] == "shift":
        word = "successor" if rel[1] > 0 else "predecessor"
        return f"add the {word} of the last {unit}"
    return f"add {_sym(rel[1], symbols)} at the end"


def _reading_kind(prog: Program, intended: Program) -> str:
    if is_literal(prog):
        return "literal"
    if len(prog) > 1 and len(intended) > 1 and prog[1] != intended[1]:
        return f"{prog[1]}-level"
    if prog[0] in ("map", "double", "delete") and prog[2][0] in ("pos", "rpos"):
        return "counted-from-start" if prog[2][0] == "pos" else "counted-from-end"
    return "other-rule"


def literal_edit(src: Sequence[int], chg: Sequence[int], tgt: Sequence[int]) -> tuple[int, ...]:
    """The change copied literally: the same symbols written at the same place in the target.

    The edited region of the source (after the common prefix and suffix) is located in the target
    at the same offset (from the end when the edit reaches the end, else from the start) and
    replaced by the literal symbols of the changed string.
    """
    src, chg, tgt = tuple(src), tuple(chg), tuple(tgt)
    p = 0
    while p < min(len(src), len(chg)) and src[p] == chg[p]:
        p += 1
    q = 0
    while q < min(len(src), len(chg)) - p and src[-1 - q] == chg[-1 - q]:
        q += 1
    removed = len(src) - p - q
    inserted = chg[p : len(chg) - q]
    if q == 0 and p > 0:
        cut = max(len(tgt) - removed, 0)
        return tgt[:cut] + inserted
    start = min(p, len(tgt))
    return tgt[:start] + inserted + tgt[start + removed :]


# -- analysis of one item (shared by generation, checks and the classifier) -------------------
class _Analysis:
    """Every reading of an item's source change and what it gives on the target."""

    __slots__ = ("accepted", "answer", "best_dl", "intended_dl", "outputs", "simpler")

    def __init__(
        self,
        intended: Program,
        src: tuple[int, ...],
        chg: tuple[int, ...],
        tgt: tuple[int, ...],
        n: int,
        symbols: str,
    ):
        ans = apply_program(intended, tgt, n)
        self.answer = ans
        self.intended_dl = description_length(intended, n)
        progs = consistent_programs(src, chg, n)
        # (dl, program, output) sorted by description length, then a fixed order
        readings = []
        for prog in progs:
            out = apply_program(prog, tgt, n)
            readings.append((description_length(prog, n), prog, out))
        readings.sort(key=lambda r: (r[0], repr(r[1])))
        self.outputs = readings
        self.best_dl = readings[0][0] if readings else math.inf
        self.simpler = [r for r in readings if r[0] < self.intended_dl - 1e-9 and r[2] != ans]
        acc: dict[tuple[int, ...], str] = {}
        for dl, prog, out in readings:
            if out is None or out == ans or out in acc or is_literal(prog):
                continue
            if dl <= self.intended_dl + ACCEPT_MARGIN + 1e-9:
                acc[out] = f"{_reading_kind(prog, intended)}: {describe_program(prog, symbols)}"
        self.accepted = acc
