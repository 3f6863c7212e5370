"""The ``strings`` family: symbol-string analogies.

A source string and its changed form are shown with a target string; the respondent produces the
analogous change of the target (``abc -> abd``; ``ijk -> ?``). Strings are runs of consecutive
symbols of an ordered, circular symbol set (letters, digits, or an invented glyph order that is
shown on screen), optionally grouped (``aabbcc``).

The transformation grammar
--------------------------
Every change is a *description* (a program) from a small grammar of our own, applied to a parse of
the string into *units*: either single symbols (level ``symbol``) or runs of one repeated symbol
(level ``group``). Programs are plain tuples:

``("map", level, selector, op)``
    change the selected units; ``op`` is ``("shift", k)`` (move ``k`` places along the circular
    order, k in -2..2) or ``("set", v)`` (become the literal symbol ``v``).
``("double", level, selector)`` / ``("delete", level, selector)``
    repeat / remove the selected units.
``("append", level, rel)``
    add a unit after the last one: ``("next",)`` continues the run's step, ``("shift", k)`` is the
    last unit moved ``k`` places, ``("value", v)`` is the literal ``v``.
``("swap", level)``
    exchange the first and last units. ``("reverse",)`` reverses the string.

Selectors are ``("first",)``, ``("last",)``, ``("all",)``, ``("pos", k)`` (k-th from the start,
k >= 2), ``("rpos", k)`` (k-th from the end, k >= 2) and ``("value", v)`` (every unit showing the
literal symbol ``v``). Programs that name a literal symbol (``value`` selectors, ``set`` ops,
``value`` appends) are the *literal* readings.

Each program has a description length in bits (:func:`description_length`): a cost for the form,
the level (groups are free, symbols cost one bit), the selector (positions cost more the further
they are counted, literals cost ``1 + log2(alphabet size)``) and the operation. The validity check
enumerates every description consistent with the source change (:func:`consistent_programs`),
applies each to the target's own parse, rejects an item when a strictly shorter description gives
another answer (reason ``"simpler reading"``), and records as accepted answers the answers of
non-literal descriptions at most :data:`ACCEPT_MARGIN` bits longer than the intended one, labelled
by the kind of reading (``symbol-level``, ``group-level``, ``counted-from-start``...).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np

from ..exceptions import ResponseError
from ..item import Item
from . import register
from ._base import Family, ParamSpec, Rejected

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = [
    "ACCEPT_MARGIN",
    "ALPHABETS",
    "RULES",
    "StringsFamily",
    "apply_program",
    "consistent_programs",
    "describe_program",
    "description_length",
    "is_literal",
    "literal_edit",
    "program_space",
    "rule_program",
]

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


def _encode(text: str, symbols: str) -> tuple[int, ...]:
    return tuple(symbols.index(c) for c in text)


def _decode(seq: Sequence[int], symbols: str) -> str:
    return "".join(symbols[v] for v in seq)


# -- the family -------------------------------------------------------------------------------
_ERROR_TYPES = {
    "no-change": "copied the target unchanged",
    "literal": "applied the change literally: the same symbols at the same place, or the same "
    "symbol value replaced, instead of the relation (successor, run, position)",
    "wrong-grouping": "applied the rule to single symbols where it concerns groups of repeated "
    "symbols, or the other way round",
    "wrong-position": "applied the right change at another position (first instead of last...)",
    "wrong-direction": "moved the other way along the symbol order (predecessor for successor)",
    "partial": "applied the change to only part of what it concerns",
    "other": "any other wrong response",
}


class StringsFamily(Family):
    """Symbol-string analogies with recorded alternative readings (see the module docstring)."""

    name = "strings"
    prefix = "str"
    version = "2"
    modes = ("generate", "select")
    params = (
        ParamSpec(
            "rule",
            "choice",
            "any",
            "the intended change; 'any' draws one per item",
            options=("any", *RULES),
        ),
        ParamSpec("length", "int", 3, "number of groups in the source and target", low=3, high=10),
        ParamSpec(
            "grouping",
            "choice",
            "none",
            "none: single symbols; pairs: every symbol doubled; mixed: runs of 1-3",
            options=("none", "pairs", "mixed"),
        ),
        ParamSpec(
            "direction",
            "choice",
            "up",
            "whether the strings run forwards or backwards along the symbol order",
            options=("up", "down"),
        ),
        ParamSpec(
            "wrap", "bool", False, "whether the target or its change passes the end of the order"
        ),
        ParamSpec(
            "alphabet",
            "choice",
            "letters",
            "symbol order: letters, digits, or an invented glyph order shown on screen",
            options=tuple(ALPHABETS),
        ),
    )
    factors = (
        "rule",
        "length",
        "n_symbols",
        "grouping",
        "direction",
        "wrap",
        "alphabet",
        "n_readings",
    )
    distractor_schemes = {
        "near-miss": "wrong answers from related rules (literal copy, wrong position, wrong "
        "grouping, wrong direction, partial change, no change), topped up with one-symbol edits",
        "one-edit": "the answer with one symbol replaced, inserted or removed",
    }
    variant_operators = {
        "other-alphabet": "same rule, grouping and direction on another symbol order",
        "reverse-direction": "strings run the other way along the symbol order; same rule",
        "longer": "one or two more groups in source and target; same rule",
        "relocate": "same structure started at other places of the same symbol order",
    }
    error_types = _ERROR_TYPES
    default_choices = 4
    answer_format = (
        "the changed target string: symbols from the given order, written without spaces"
    )

    def __init__(self) -> None:
        self._cache: dict[str, dict[str, Any]] = {}

    # -- generation -------------------------------------------------------------------------
    @staticmethod
    def _sizes(grouping: str, length: int, rng: np.random.Generator) -> list[int]:
        if grouping == "none":
            return [1] * length
        if grouping == "pairs":
            return [2] * length
        while True:
            sizes = [int(x) for x in rng.integers(1, 4, size=length)]
            if len(set(sizes)) > 1:
                return sizes

    @staticmethod
    def _run(start: int, sizes: Sequence[int], d: int) -> tuple[int, ...]:
        out: list[int] = []
        for i, c in enumerate(sizes):
            out.extend([start + d * i] * c)
        return tuple(out)

    def _build(
        self,
        *,
        rule: str,
        src_sizes: Sequence[int],
        tgt_sizes: Sequence[int],
        direction: str,
        wrap: bool,
        alphabet: str,
        rng: np.random.Generator,
    ) -> dict[str, Any]:
        symbols = ALPHABETS[alphabet]
        n = len(symbols)
        prog = RULES[rule]
        d = 1 if direction == "up" else -1
        # Descriptions without literals commute with moving the start, so one raw application
        # from start 0 tells, for every start, whether the string and its change stay in range.
        raw_s = self._run(0, src_sizes, d)
        out_s = apply_program(prog, raw_s, None)
        if out_s is None:
            raise Rejected("rule does not apply to the source")
        lo = min(min(raw_s), min(out_s))
        hi = max(max(raw_s), max(out_s))
        if hi - lo >= n:
            raise Rejected("source does not fit the symbol order")
        s0 = -lo + int(rng.integers(n - (hi - lo)))
        src = tuple(v + s0 for v in raw_s)
        chg = tuple(v + s0 for v in out_s)
        raw_t = self._run(0, tgt_sizes, d)
        out_t = apply_program(prog, raw_t, None)
        if out_t is None:
            raise Rejected("rule does not apply to the target")
        t_lo, t_hi = min(raw_t), max(raw_t)
        a_lo, a_hi = min(out_t), max(out_t)
        crossing, inside, plain = [], [], []
        for t0 in range(n):
            t_in = t0 + t_lo >= 0 and t0 + t_hi < n
            a_in = t0 + a_lo >= 0 and t0 + a_hi < n
            if t_in and a_in:
                plain.append(t0)
            elif t_in:
                crossing.append(t0)
            else:
                inside.append(t0)
        pool = (crossing or inside) if wrap else plain
        while True:
            if not pool:
                raise Rejected("no target position with the requested wrap")
            t0 = pool.pop(int(rng.integers(len(pool))))
            tgt = tuple((v + t0) % n for v in raw_t)
            if tgt != src and tgt != chg:
                break
        an = _Analysis(prog, src, chg, tgt, n, symbols)
        if an.answer is None or an.answer == tgt:
            raise Rejected("no visible change on the target")
        if an.simpler:
            raise Rejected("simpler reading")
        return {
            "symbols": symbols,
            "src": src,
            "chg": chg,
            "tgt": tgt,
            "analysis": an,
        }

    def _make_item(
        self,
        *,
        built: dict[str, Any],
        rule: str,
        params: Mapping[str, Any],
        alphabet: str,
        grouping: str,
        direction: str,
        wrap: bool,
        length: int,
        rng: np.random.Generator,
        seed: int,
        modes: Sequence[str],
        distractor_scheme: str | None,
        n_choices: int,
        variant_of: str | None = None,
        variant_operator: str | None = None,
    ) -> Item:
        symbols = built["symbols"]
        an: _Analysis = built["analysis"]
        if an.answer is None:  # the analysis of a valid item always has an answer
            raise Rejected("no answer")
        answer = _decode(an.answer, symbols)
        accepted = [
            {"answer": _decode(out, symbols), "label": label} for out, label in an.accepted.items()
        ]
        stimulus = {
            "alphabet": alphabet,
            "symbols": symbols,
            "circular": True,
            "source": _decode(built["src"], symbols),
            "changed": _decode(built["chg"], symbols),
            "target": _decode(built["tgt"], symbols),
        }
        factors = {
            "rule": rule,
            "length": length,
            "n_symbols": len(built["tgt"]),
            "grouping": grouping,
            "direction": direction,
            "wrap": wrap,
            "alphabet": alphabet,
            "n_readings": 1 + len(accepted),
        }
        choices = None
        scheme = None
        if "select" in modes:
            scheme = distractor_scheme or next(iter(self.distractor_schemes))
            choices = self._choices(
                stimulus, answer, accepted, rule, scheme, n_choices, rng, an.outputs
            )
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors=factors,
            modes=list(modes),
            stimulus=stimulus,
            answer=answer,
            accepted=accepted,
            choices=choices,
            distractor_scheme=scheme,
            variant_of=variant_of,
            variant_operator=variant_operator,
            seed=seed,
        )

    def generate(
        self,
        params: Mapping[str, Any],
        rng: np.random.Generator,
        *,
        seed: int,
        modes: Sequence[str],
        distractor_scheme: str | None,
        n_choices: int,
    ) -> Item:
        p = {**self.default_params(), **params}
        rule = p["rule"]
        if rule == "any":
            names = list(RULES)
            rule = names[int(rng.integers(len(names)))]
        length = int(p["length"])
        src_sizes = self._sizes(p["grouping"], length, rng)
        tgt_sizes = self._sizes(p["grouping"], length, rng)
        built = self._build(
            rule=rule,
            src_sizes=src_sizes,
            tgt_sizes=tgt_sizes,
            direction=p["direction"],
            wrap=bool(p["wrap"]),
            alphabet=p["alphabet"],
            rng=rng,
        )
        return self._make_item(
            built=built,
            rule=rule,
            params=p,
            alphabet=p["alphabet"],
            grouping=p["grouping"],
            direction=p["direction"],
            wrap=bool(p["wrap"]),
            length=length,
            rng=rng,
            seed=seed,
            modes=modes,
            distractor_scheme=distractor_scheme,
            n_choices=n_choices,
        )

    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        if operator not in self.variant_operators:
            raise Rejected(f"unknown operator {operator}")
        f = item.factors
        st = item.stimulus
        symbols = st["symbols"]
        rule = f["rule"]
        src_sizes = [c for _, c in _runs(_encode(st["source"], symbols))]
        tgt_sizes = [c for _, c in _runs(_encode(st["target"], symbols))]
        alphabet, direction = f["alphabet"], f["direction"]
        if operator == "other-alphabet":
            others = [a for a in ALPHABETS if a != alphabet]
            alphabet = others[int(rng.integers(len(others)))]
        elif operator == "reverse-direction":
            direction = "down" if direction == "up" else "up"
        elif operator == "longer":
            extra = int(rng.integers(1, 3))
            if len(src_sizes) + extra > 10:  # the parameter's upper bound
                raise Rejected("too long")
            grouping = f["grouping"]
            more_s = self._sizes(grouping, extra + 1, rng)[:extra]
            more_t = self._sizes(grouping, extra + 1, rng)[:extra]
            src_sizes = src_sizes + more_s
            tgt_sizes = tgt_sizes + more_t
        built = None
        for _ in range(8):
            try:
                built = self._build(
                    rule=rule,
                    src_sizes=src_sizes,
                    tgt_sizes=tgt_sizes,
                    direction=direction,
                    wrap=bool(f["wrap"]),
                    alphabet=alphabet,
                    rng=rng,
                )
            except Rejected:
                continue
            if operator == "relocate" and (
                _decode(built["src"], symbols) == st["source"]
                and _decode(built["tgt"], symbols) == st["target"]
            ):
                built = None
                continue
            break
        if built is None:
            raise Rejected(f"{operator}: no valid isomorph")
        params = dict(item.params)
        params.update(alphabet=alphabet, direction=direction, length=len(src_sizes))
        n_choices = len(item.choices) if item.choices is not None else self.default_choices
        return self._make_item(
            built=built,
            rule=rule,
            params=params,
            alphabet=alphabet,
            grouping=f["grouping"],
            direction=direction,
            wrap=bool(f["wrap"]),
            length=len(src_sizes),
            rng=rng,
            seed=item.seed,
            modes=item.modes,
            distractor_scheme=item.distractor_scheme,
            n_choices=n_choices,
            variant_of=item.id,
            variant_operator=operator,
        )

    # -- related rules and distractors --------------------------------------------------------
    def _related(
        self,
        stimulus: Mapping[str, Any],
        rule: str,
        readings: Sequence[tuple[float, Program, Any]] | None = None,
    ) -> dict[str, list[str]]:
        """Outputs of rules related to the intended one, per error type (in classifier order)."""
        symbols = stimulus["symbols"]
        n = len(symbols)
        src = _encode(stimulus["source"], symbols)
        chg = _encode(stimulus["changed"], symbols)
        tgt = _encode(stimulus["target"], symbols)
        prog = RULES[rule]
        ans = apply_program(prog, tgt, n)
        rel: dict[str, list[tuple[int, ...]]] = {k: [] for k in _ERROR_TYPES if k != "other"}
        rel["no-change"].append(tgt)
        rel["literal"].append(literal_edit(src, chg, tgt))
        if readings is None:
            readings = [
                (0.0, p, apply_program(p, tgt, n)) for p in consistent_programs(src, chg, n)
            ]
        for _, p, out in readings:
            if is_literal(p) and out is not None:
                rel["literal"].append(out)
        if prog[0] != "reverse":
            other = "symbol" if prog[1] == "group" else "group"
            swapped = (prog[0], other, *prog[2:])
            out = apply_program(swapped, tgt, n)
            if out is not None:
                rel["wrong-grouping"].append(out)
        if prog[0] in ("map", "double", "delete") and prog[2][0] in ("first", "last"):
            nu = len(_units(tgt, prog[1]))
            for sel in _selectors(nu, [], with_values=False):
                if sel != prog[2] and sel[0] != "all":
                    out = apply_program((prog[0], prog[1], sel, *prog[3:]), tgt, n)
                    if out is not None:
                        rel["wrong-position"].append(out)
        if prog[0] == "map" and prog[3][0] == "shift":
            out = apply_program(prog[:3] + (("shift", -prog[3][1]),), tgt, n)
            rel["wrong-direction"].append(out)  # type: ignore[arg-type]
        if prog[0] == "append" and prog[2][0] == "next":
            out = apply_program((prog[0], prog[1], ("prev",)), tgt, n)
            if out is not None:
                rel["wrong-direction"].append(out)
        if rule == "reverse":
            out = apply_program(("swap", "group"), tgt, n)
            if out is not None:
                rel["partial"].append(out)
        if ans is not None:
            rel["partial"].extend(_partials(tgt, ans))
        return {k: [_decode(s, symbols) for s in v if s] for k, v in rel.items()}

    def _info(self, item: Item) -> dict[str, Any]:
        info = self._cache.get(item.id)
        if info is None:
            if len(self._cache) > 4096:
                self._cache.clear()
            related = self._related(item.stimulus, item.factors["rule"])
            info = {"related": related}
            self._cache[item.id] = info
        return info

    def _choices(
        self,
        stimulus: Mapping[str, Any],
        answer: str,
        accepted: Sequence[Mapping[str, Any]],
        rule: str,
        scheme: str,
        n_choices: int,
        rng: np.random.Generator,
        readings: Sequence[tuple[float, Program, Any]] | None = None,
    ) -> list[str]:
        symbols = stimulus["symbols"]
        taken = {answer} | {a["answer"] for a in accepted}
        picked: list[str] = []
        if scheme == "near-miss":
            related = self._related(stimulus, rule, readings)
            pool: list[str] = []
            for key in (
                "wrong-position",
                "wrong-grouping",
                "literal",
                "wrong-direction",
                "no-change",
                "partial",
            ):
                cands = [c for c in dict.fromkeys(related[key]) if c not in taken]
                if key == "partial" and cands:
                    cands = [cands[int(rng.integers(len(cands)))]]
                pool.extend(cands)
            for c in pool:
                if len(picked) >= n_choices - 1:
                    break
                if c not in picked and c not in taken:
                    picked.append(c)
        need = n_choices - 1 - len(picked)
        if need > 0:
            picked.extend(_sample_edits(answer, symbols, need, taken | set(picked), rng))
        options = [answer, *picked]
        order = rng.permutation(len(options))
        return [options[int(i)] for i in order]

    # -- checks -------------------------------------------------------------------------------
    def check(self, item: Item) -> list[str]:
        problems: list[str] = []
        st = item.stimulus
        rule = item.factors.get("rule")
        if rule not in RULES:
            return [f"factors.rule: unknown rule {rule!r}"]
        symbols = ALPHABETS.get(str(st.get("alphabet")))
        if symbols is None or st.get("symbols") != symbols:
            return ["stimulus.symbols: does not match the named alphabet"]
        try:
            src, chg, tgt = (_encode(st[k], symbols) for k in ("source", "changed", "target"))
        except (KeyError, ValueError):
            return ["stimulus: strings use symbols outside the order"]
        n = len(symbols)
        prog = RULES[rule]
        if apply_program(prog, src, n) != chg:
            problems.append("the rule does not turn source into changed")
        an = _Analysis(prog, src, chg, tgt, n, symbols)
        if an.answer is None or _decode(an.answer, symbols) != item.answer:
            problems.append("answer is not the rule applied to the target")
        if an.simpler:
            problems.append("a simpler reading gives another answer")
        acc = {_decode(o, symbols) for o in an.accepted}
        if acc != {a["answer"] for a in item.accepted}:
            problems.append("accepted answers differ from the readings found")
        if item.choices is not None:
            if sum(c == item.answer for c in item.choices) != 1:
                problems.append("the answer is not among the choices exactly once")
            if len(set(item.choices)) != len(item.choices):
                problems.append("duplicate choices")
        return problems

    # -- responses ----------------------------------------------------------------------------
    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        symbols = item.stimulus["symbols"]
        text = response
        if isinstance(text, list | tuple) and all(isinstance(s, str) for s in text):
            text = "".join(text)
        if isinstance(text, int) and not isinstance(text, bool) and symbols.isdigit():
            text = str(text)
        if not isinstance(text, str):
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a string of "
                f"symbols from the order {symbols}.",
                field="response",
            )
        cleaned = _clean(text, symbols)
        if cleaned is None:
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a non-empty "
                f"string of symbols from the order {symbols} (spaces and commas are ignored).",
                field="response",
            )
        return cleaned

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        if mode == "select":
            response = item.choices[int(response) - 1]  # type: ignore[index]
        related = self._info(item)["related"]
        for key in (
            "no-change",
            "literal",
            "wrong-grouping",
            "wrong-position",
            "wrong-direction",
            "partial",
        ):
            if response in related[key]:
                return key
        st = item.stimulus
        symbols = st["symbols"]
        try:
            resp = _encode(response, symbols)
        except ValueError:
            return "other"
        if _is_partial(_encode(st["target"], symbols), _encode(item.answer, symbols), resp):
            return "partial"
        return "other"

    def sample_error(self, item: Item, mode: str, rng: np.random.Generator) -> tuple[Any, str]:
        if mode == "select":
            assert item.choices is not None
            wrong = [k for k in range(1, len(item.choices) + 1) if k != item.answer_choice]
            k = wrong[int(rng.integers(len(wrong)))]
            return k, self.classify_error(item, k, mode)
        correct = {item.answer} | {a["answer"] for a in item.accepted}
        related = self._info(item)["related"]
        options: list[tuple[str, str]] = []
        for key, outs in related.items():
            for out in dict.fromkeys(outs):
                if out not in correct and self.classify_error(item, out, mode) == key:
                    options.append((out, key))
                    break
        symbols = item.stimulus["symbols"]
        for _ in range(20):
            length = len(item.answer)
            rand = "".join(symbols[int(i)] for i in rng.integers(len(symbols), size=length))
            if rand not in correct and self.classify_error(item, rand, mode) == "other":
                options.append((rand, "other"))
                break
        if not options:
            raise Rejected("no wrong response found")
        return options[int(rng.integers(len(options)))]

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            return super().parse_text(item, text, mode)
        symbols = item.stimulus["symbols"]
        found = _parse_reply(text, symbols, item.stimulus)
        if found is None:
            raise ResponseError(
                f"item {item.id}: no string of symbols from the order {symbols} found in reply.",
                field="response",
            )
        return found

    # -- rendering ----------------------------------------------------------------------------
    def render_text(self, item: Item, mode: str) -> str:
        st = item.stimulus
        order = " ".join(st["symbols"])
        lines = [
            "Symbol-string analogy.",
            "The symbols come in this order, and the order is circular (after the last symbol "
            "comes the first again):",
            order,
            "",
            f"This string:      {st['source']}",
            f"was changed into: {st['changed']}",
            "",
            f"Change this string in the same way: {st['target']}",
        ]
        if mode == "select":
            lines += ["", "Choices:"]
            lines += [f"{k}. {c}" for k, c in enumerate(item.choices or (), start=1)]
            lines += [
                "",
                'Answer format: the number of your choice, on its own line as "Answer: <number>".',
            ]
        else:
            lines += [
                "",
                f'Answer format: {self.answer_format}, on its own line as "Answer: <string>".',
            ]
        return "\n".join(lines)

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        st = item.stimulus
        view: dict[str, Any] = {
            "family": self.name,
            "item": item.id,
            "mode": mode,
            "task": "Change the target string in the same way as the source string was changed.",
            "alphabet": st["alphabet"],
            "symbol_order": list(st["symbols"]),
            "circular": bool(st["circular"]),
            "source": st["source"],
            "changed": st["changed"],
            "target": st["target"],
            "response_format": self.answer_format if mode == "generate" else "a choice number",
        }
        if mode == "select":
            view["choices"] = list(item.choices or ())
        return view

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        from matplotlib.patches import FancyArrowPatch, Rectangle

        ink, fill, accent = "#1f2430", "#f1ece2", "#2a6f97"
        st = item.stimulus
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_xlim(0, 600)
        ax.set_ylim(600, 0)
        ax.axis("off")

        def boxes(text: str, y: float, x0: float, size: float, *, dashed: bool = False) -> float:
            fs = max(6.0, min(20.0, size * 0.55))
            for i, ch in enumerate(text):
                x = x0 + i * size
                ax.add_patch(
                    Rectangle(
                        (x, y),
                        size * 0.92,
                        size * 0.92,
                        facecolor=fill,
                        edgecolor=ink,
                        linewidth=1.0,
                        linestyle="--" if dashed else "-",
                    )
                )
                ax.text(
                    x + size * 0.46,
                    y + size * 0.48,
                    ch,
                    ha="center",
                    va="center",
                    fontsize=fs,
                    color=ink,
                )
            return x0 + len(text) * size

        syms = st["symbols"]
        ax.text(20, 22, "Symbol order (circular)", fontsize=11, color=ink, va="center")
        size = min(34.0, 560.0 / len(syms))
        end = boxes(syms, 38, 20, size)
        ax.add_patch(
            FancyArrowPatch(
                (end - size * 0.5, 44 + size),
                (20 + size * 0.5, 44 + size),
                connectionstyle="arc3,rad=-0.06",
                arrowstyle="->",
                color=accent,
                linewidth=1.2,
                mutation_scale=12,
            )
        )
        longest = max(len(st[k]) for k in ("source", "changed", "target"))
        longest = max(longest, len(item.answer) if mode == "generate" else longest)
        if mode == "select":
            longest = max([longest, *(len(c) for c in item.choices or ())])
        sz = min(40.0, 440.0 / max(longest, 1))
        rows = [("source", st["source"]), ("becomes", st["changed"]), ("target", st["target"])]
        y = 120.0
        for label, text in rows:
            ax.text(20, y + sz * 0.45, label, fontsize=11, color=ink, va="center")
            boxes(text, y, 130, sz)
            y += sz + 18
        ax.text(20, y + sz * 0.45, "becomes", fontsize=11, color=ink, va="center")
        ax.text(
            130 + sz * 0.46,
            y + sz * 0.48,
            "?",
            ha="center",
            va="center",
            fontsize=max(8.0, sz * 0.6),
            color=accent,
            fontweight="bold",
        )
        ax.add_patch(
            Rectangle(
                (130, y),
                sz * 0.92,
                sz * 0.92,
                fill=False,
                edgecolor=accent,
                linestyle="--",
                linewidth=1.2,
            )
        )
        y += sz + 26
        if mode == "select":
            choices = list(item.choices or ())
            room = (590 - y) / max(len(choices), 1)
            csz = min(sz, 440.0 / max(longest, 1), room - 4)
            for k, c in enumerate(choices, start=1):
                ax.text(20, y + csz * 0.45, f"{k}.", fontsize=11, color=ink, va="center")
                boxes(c, y, 130, csz)
                y += csz + 4


def _sample_edits(
    answer: str, symbols: str, k: int, exclude: set[str], rng: np.random.Generator
) -> list[str]:
    """``k`` distinct one-symbol edits of ``answer`` outside ``exclude``."""
    out: list[str] = []
    seen = set(exclude)
    for _ in range(20 * k):
        if len(out) >= k:
            return out
        i = int(rng.integers(len(answer)))
        kind = int(rng.integers(3))
        s = symbols[int(rng.integers(len(symbols)))]
        if kind == 0:
            cand = answer[:i] + s + answer[i + 1 :]
        elif kind == 1:
            cand = answer[:i] + s + answer[i:]
        else:
            cand = answer[:i] + answer[i + 1 :]
        if cand and cand not in seen:
            seen.add(cand)
            out.append(cand)
    rest = [e for e in _one_edits(answer, symbols) if e not in seen]
    if len(out) + len(rest) < k:
        raise Rejected("too few distractors")
    idx = rng.choice(len(rest), size=k - len(out), replace=False)
    return out + [rest[int(i)] for i in sorted(idx)]


def _one_edits(answer: str, symbols: str) -> list[str]:
    out: list[str] = []
    seen = {answer}
    for i in range(len(answer)):
        for s in symbols:
            for cand in (answer[:i] + s + answer[i + 1 :], answer[:i] + s + answer[i:]):
                if cand not in seen:
                    seen.add(cand)
                    out.append(cand)
        if len(answer) > 1:
            cand = answer[:i] + answer[i + 1 :]
            if cand not in seen:
                seen.add(cand)
                out.append(cand)
    return out


def _partials(tgt: tuple[int, ...], ans: tuple[int, ...]) -> list[tuple[int, ...]]:
    """Responses that carry out part of the change from ``tgt`` to ``ans``."""
    out: list[tuple[int, ...]] = []
    if len(tgt) == len(ans):
        diff = [i for i in range(len(ans)) if ans[i] != tgt[i]]
        if len(diff) >= 2:
            for i in diff:  # leave one changed place unchanged / change only one place
                r = list(ans)
                r[i] = tgt[i]
                out.append(tuple(r))
                r = list(tgt)
                r[i] = ans[i]
                out.append(tuple(r))
    elif len(ans) > len(tgt) and ans[: len(tgt)] == tgt:
        out.extend(ans[:k] for k in range(len(tgt) + 1, len(ans)))
    elif len(ans) < len(tgt) and tgt[len(tgt) - len(ans) :] == ans:
        out.extend(tgt[k:] for k in range(1, len(tgt) - len(ans)))
    return [o for o in out if o != ans and o != tgt]


def _is_partial(tgt: tuple[int, ...], ans: tuple[int, ...], resp: tuple[int, ...]) -> bool:
    if resp == ans or resp == tgt:
        return False
    if len(tgt) == len(ans) == len(resp):
        return all(r == a or r == t for r, a, t in zip(resp, ans, tgt, strict=True))
    if len(tgt) < len(resp) < len(ans):
        return ans[: len(resp)] == resp and resp[: len(tgt)] == tgt
    if len(ans) < len(resp) < len(tgt):
        return tgt[len(tgt) - len(resp) :] == resp and resp[len(resp) - len(ans) :] == ans
    return False


_SEPARATORS = re.compile(r"[\s,;·\-–—_|/]+")
_STRIP = "\"'`*“”‘’«»()[]{}<>.:!?"


def _clean(text: str, symbols: str) -> str | None:
    """A candidate answer with separators and wrapping punctuation removed, or ``None``."""
    s = text.strip().strip(_STRIP).strip()
    if symbols.isalpha():
        s = s.lower()
    s = _SEPARATORS.sub("", s)
    if not s or any(c not in symbols for c in s):
        return None
    return s


@lru_cache(maxsize=8)
def _marker() -> re.Pattern[str]:
    return re.compile(
        r"(?:final\s+answer|answer|result|output)\s*(?:is|would\s+be|:|=|-)?\s*[:=]?\s*",
        re.IGNORECASE,
    )


def _segment_answer(segment: str, symbols: str, near: set[str]) -> str | None:
    """The answer written at the start of a segment (``abd``, ``a b d``, ``**abd**``), or ``None``.

    Punctuation-only tokens are skipped. A run of single symbols separated by spaces is one answer.
    Otherwise the first token made of symbols is taken; for letter orders a later token whose
    symbols all lie near the item's strings wins over a leading ordinary word (``the``).
    """
    cleaned = []
    for tok in segment.split():
        if not tok.strip(_STRIP):
            continue  # punctuation only: ** or :
        cleaned.append(_clean(tok, symbols))
    if not cleaned or cleaned[0] is None:
        return None
    singles = []
    for c in cleaned:
        if c is None or len(c) != 1:
            break
        singles.append(c)
    if len(singles) >= 2:
        return "".join(singles)
    first = cleaned[0]
    if not symbols.isalpha() or set(first) <= near:
        return first
    for c in cleaned[1:]:
        if c is not None and len(c) >= 2 and set(c) <= near:
            return c
    return first


def _near(symbols: str, stimulus: Mapping[str, Any]) -> set[str]:
    """Symbols within two places of a symbol of the target or the changed string."""
    n = len(symbols)
    return {
        symbols[(symbols.index(c) + k) % n]
        for c in stimulus["target"] + stimulus["changed"]
        for k in (-2, -1, 0, 1, 2)
    }


def _parse_reply(text: str, symbols: str, stimulus: Mapping[str, Any]) -> str | None:
    near = _near(symbols, stimulus)
    # 1. after the last "Answer:"-style marker
    for m in reversed(list(_marker().finditer(text))):
        lines = [ln for ln in text[m.end() :].split("\n") if ln.strip(_STRIP + " \t")]
        rest = lines[0] if lines else ""
        got = _segment_answer(rest, symbols, near)
        if got is not None:
            return got
    # 2. the last code block, quoted or bold stretch
    spans = re.findall(
        r"```[^\n]*\n(.*?)```|`([^`\n]+)`|\*\*([^*\n]+)\*\*|\"([^\"\n]+)\"", text, re.DOTALL
    )
    for groups in reversed(spans):
        inner = next((g for g in groups if g), "")
        for line in reversed(inner.strip().splitlines()):
            got = _clean(line, symbols)
            if got is not None:
                return got
    # 3. the last run of symbols in prose that could be an answer to this item: two or more
    # symbols, each near the target or the changed string (so ordinary words are not taken for
    # answers), preferring runs other than the strings shown
    shown = {stimulus["source"], stimulus["changed"], stimulus["target"]}
    cands = []
    for line in text.splitlines():
        for tok in re.split(r"\s+|->|→|=>", line):
            c = _clean(tok, symbols)
            if c is not None and len(c) >= 2 and set(c) <= near:
                cands.append(c)
    fresh = [c for c in cands if c not in shown]
    if fresh:
        return fresh[-1]
    return cands[-1] if cands else None


register(StringsFamily())
