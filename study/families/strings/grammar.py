"""The transformation grammar of the ``strings`` family: symbol orders, programs, their
application to a string and their description length."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

#: Symbol orders. ``glyphs`` is an order invented for twofold and always shown to respondents.
ALPHABETS: dict[str, str] = {
    "letters": "abcdefghijklmnopqrstuvwxyz",
    "digits": "0123456789",
    # every glyph is in the DejaVu Sans and DejaVu Sans Mono fonts the pictures and the participant
    # screens use, so no respondent ever sees a missing-glyph box
    "glyphs": "◇○△☆□✕◐⊕∞§⌂¤",
}

Program = tuple[Any, ...]

#: rule name -> the intended program (a description in the grammar above)
RULES: dict[str, Program] = {
    "succ-last": ("map", "group", ("last",), ("shift", 1)),
    "pred-first": ("map", "group", ("first",), ("shift", -1)),
    "shift-all": ("map", "group", ("all",), ("shift", 1)),
    "double-last": ("double", "group", ("last",)),
    "extend": ("append", "group", ("next",)),
    "drop-first": ("delete", "group", ("first",)),
    "swap-ends": ("swap", "group"),
    "reverse": ("reverse",),
}

#: non-literal readings at most this many bits longer than the intended one are accepted answers
ACCEPT_MARGIN = 1.0

_SHIFTS = (1, -1, 2, -2)
_FORM_COST = {"map": 1.0, "double": 2.0, "delete": 2.0, "append": 2.0, "swap": 2.0, "reverse": 2.0}
_LEVEL_COST = {"group": 0.0, "symbol": 1.0}


# -- the grammar ------------------------------------------------------------------------------
def _runs(seq: Sequence[int]) -> list[list[int]]:
    out: list[list[int]] = []
    for v in seq:
        if out and out[-1][0] == v:
            out[-1][1] += 1
        else:
            out.append([v, 1])
    return out


def _units(seq: Sequence[int], level: str) -> list[list[int]]:
    if level == "symbol":
        return [[v, 1] for v in seq]
    return _runs(seq)


def _expand(units: Sequence[Sequence[int]]) -> tuple[int, ...]:
    out: list[int] = []
    for v, c in units:
        out.extend([v] * c)
    return tuple(out)


def _select(sel: Program, units: Sequence[Sequence[int]]) -> list[int] | None:
    n_units = len(units)
    kind = sel[0]
    if kind == "first":
        return [0]
    if kind == "last":
        return [n_units - 1]
    if kind == "all":
        return list(range(n_units))
    if kind == "pos":
        return [sel[1] - 1] if sel[1] <= n_units else None
    if kind == "rpos":
        return [n_units - sel[1]] if sel[1] <= n_units else None
    if kind == "value":
        return [i for i, u in enumerate(units) if u[0] == sel[1]]
    raise ValueError(f"unknown selector {sel!r}")


def _step(a: int, b: int, n: int | None) -> int:
    if n is None:
        return a - b
    d = (a - b) % n
    return d - n if d > n // 2 else d


def apply_program(prog: Program, seq: Sequence[int], n: int | None) -> tuple[int, ...] | None:
    """Apply a description to a string of symbol indices.

    Parameters
    ----------
    prog : tuple
        A program of the grammar (see the module docstring).
    seq : sequence of int
        The string as indices into the symbol order.
    n : int or None
        Size of the circular symbol order; ``None`` computes without wrapping (raw indices), which
        the generator uses to see whether a change passes the end of the order.

    Returns
    -------
    tuple of int or None
        The changed string, or ``None`` where the description does not apply (a position past the
        end, a run step of a one-unit string, an empty result).
    """
    form = prog[0]
    if not seq:
        return None
    if form == "reverse":
        return tuple(reversed(seq))
    level = prog[1]
    units = _units(seq, level)
    if form == "map":
        idx = _select(prog[2], units)
        if idx is None:
            return None
        op = prog[3]
        for i in idx:
            v = units[i][0]
            if op[0] == "shift":
                v = v + op[1]
                units[i][0] = v % n if n is not None else v
            else:
                units[i][0] = op[1]
        return _expand(units)
    if form == "double" or form == "delete":
        idx = _select(prog[2], units)
        if idx is None:
            return None
        chosen = set(idx)
        out = []
        for i, u in enumerate(units):
            if form == "delete" and i in chosen:
                continue
            out.append(u)
            if form == "double" and i in chosen:
                out.append(u)
        return _expand(out) if out else None
    if form == "swap":
        if len(units) < 2:
            return None
        units[0], units[-1] = units[-1], units[0]
        return _expand(units)
    if form == "append":
        rel = prog[2]
        last_v, last_c = units[-1]
        count = last_c if level == "group" else 1
        if rel[0] in ("next", "prev"):
            if len(units) < 2:
                return None
            step = _step(last_v, units[-2][0], n)
            v = last_v + (step if rel[0] == "next" else -step)
        elif rel[0] == "shift":
            v = last_v + rel[1]
        else:
            v = rel[1]
        if n is not None:
            v %= n
        return tuple(seq) + (v,) * count
    raise ValueError(f"unknown program form {form!r}")


def is_literal(prog: Program) -> bool:
    """Whether a description names a literal symbol (a value selector, set op or value append)."""
    for part in prog[1:]:
        if isinstance(part, tuple) and part and part[0] in ("value", "set"):
            return True
    return False


def _sel_cost(sel: Program, n: int) -> float:
    if sel[0] in ("first", "last", "all"):
        return 1.0
    if sel[0] in ("pos", "rpos"):
        return 2.0 + math.log2(sel[1])
    return 1.0 + math.log2(n)


def description_length(prog: Program, n: int) -> float:
    """Description length of a program in bits, for a symbol order of size ``n``.

    Form + level + selector + operation. Shifts by one cost 1 bit and by two 3 bits; a position
    ``k`` costs ``2 + log2(k)``; a literal symbol costs ``1 + log2(n)``.
    """
    form = prog[0]
    cost = _FORM_COST[form]
    if form == "reverse":
        return cost
    cost += _LEVEL_COST[prog[1]]
    if form in ("map", "double", "delete"):
        cost += _sel_cost(prog[2], n)
    if form == "map":
        op = prog[3]
        cost += (1.0 if abs(op[1]) == 1 else 3.0) if op[0] == "shift" else 1.0 + math.log2(n)
    elif form == "append":
        rel = prog[2]
        if rel[0] in ("next", "prev"):
            cost += 1.0
        elif rel[0] == "shift":
            cost += 2.0 if abs(rel[1]) == 1 else 4.0
        else:
            cost += 1.0 + math.log2(n)
    return cost


def _selectors(n_units: int, values: Sequence[int], *, with_values: bool) -> list[Program]:
    sels: list[Program] = [("first",), ("last",), ("all",)]
    sels += [("pos", k) for k in range(2, n_units + 1)]
    sels += [("rpos", k) for k in range(2, n_units + 1)]
    if with_values:
        sels += [("value", v) for v in sorted(set(values))]
    return sels


def program_space(src: Sequence[int], chg: Sequence[int], n: int) -> list[Program]:
    """Every description the grammar offers for a source change, before testing consistency.

    Forms are limited by the length change (same length: map/swap/reverse; longer: double/append;
    shorter: delete) and literal symbols by the symbols of the example. The list order is fixed;
    its size grows with string length, grouping and the number of distinct symbols.
    """
    out: list[Program] = []
    ls, lc = len(src), len(chg)
    lits = sorted(set(chg))
    for level in ("group", "symbol"):
        units = _units(src, level)
        vals = [u[0] for u in units]
        if lc == ls:
            for sel in _selectors(len(units), vals, with_values=True):
                for k in _SHIFTS:
                    out.append(("map", level, sel, ("shift", k)))
                for v in lits:
                    out.append(("map", level, sel, ("set", v)))
            out.append(("swap", level))
        elif lc > ls:
            for sel in _selectors(len(units), vals, with_values=True):
                out.append(("double", level, sel))
            out.append(("append", level, ("next",)))
            for k in _SHIFTS:
                out.append(("append", level, ("shift", k)))
            for v in lits:
                out.append(("append", level, ("value", v)))
        else:
            for sel in _selectors(len(units), vals, with_values=True):
                out.append(("delete", level, sel))
    if lc == ls:
        out.append(("reverse",))
    return out
