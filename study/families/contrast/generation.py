"""Generation of ``contrast`` items: rule templates, panel construction and repairs, and
the validity check."""

from __future__ import annotations

import random
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from .._base import Rejected
from .enumeration import _all_sep, _lit_rule, leaf_vectors, rule_vector, separating
from .evaluation import _ev, _has, _pairs
from .notation import (
    ATOMS,
    ATTRIBUTES,
    COL,
    INSIDE,
    QUANTS,
    RELATIONS,
    ROW,
    RULE_ATTRS,
    SIZE,
    Rule,
    _negate,
    rule_length,
)

# ------------------------------------------------------------------------------------------------
# Rule templates and panel construction
# ------------------------------------------------------------------------------------------------

_REPAIRS = 4
_FEATURAL_LENGTHS = (2, 3, 4, 5, 6)
_COUNT_LENGTHS = (1, 2, 3, 4, 5, 6)
_RELATIONAL_LENGTHS = (2, 3, 4, 5, 6)


class _Fail(Exception):
    pass


class _FastRng:
    """The few draws panel building needs, from Python's generator seeded by the item's rng.

    numpy's per-call overhead dominates for single draws; this keeps items deterministic.
    """

    def __init__(self, rng: np.random.Generator):
        self.r = random.Random(int(rng.integers(2**63)))

    def integers(self, lo: int, hi: int | None = None) -> int:
        if hi is None:
            lo, hi = 0, lo
        return self.r.randrange(lo, hi)

    def random(self) -> float:
        return self.r.random()

    def permutation(self, n: int) -> list[int]:
        return self.r.sample(range(n), n)

    def choice(self, n: int, k: int, replace: bool = False) -> list[int]:
        return self.r.sample(range(n), k)


class _Ctx:
    """Per-item generation context: the random generator and the allowed values."""

    def __init__(
        self, rng: np.random.Generator, allowed: list[list[int]], lo: int, hi: int, nest: bool
    ):
        self.rng = _FastRng(rng)
        self.rnd = self.rng.r.random
        self._np = rng
        self._pool: list[list[int]] = []
        self._cells: list[list[int]] = []
        self.allowed = allowed
        self.lo, self.hi = lo, hi
        self.nest = nest

    def new_cells(self) -> list[int]:
        """The nine cells in random order (drawn in blocks for speed)."""
        if not self._cells:
            self._cells = self._np.permuted(np.tile(np.arange(9), (64, 1)), axis=1).tolist()
        return self._cells.pop()

    def new_values(self) -> list[int]:
        """Random values of the five object attributes (drawn in blocks for speed)."""
        if not self._pool:
            tab = np.zeros((5, 4), dtype=np.int64)
            sizes = np.array([len(al) for al in self.allowed[:5]])
            for a, al in enumerate(self.allowed[:5]):
                tab[a, : len(al)] = al
            pick = (self._np.random((128, 5)) * sizes).astype(np.int64)
            self._pool = tab[np.arange(5), pick].tolist()
        return self._pool.pop()

    def pick(self, seq: Sequence[Any]) -> Any:
        return seq[int(self.rnd() * len(seq))]


def _attr_atoms(attr: str) -> list[int]:
    if attr == "position":
        return [k for k, (a, _) in enumerate(ATOMS) if ATTRIBUTES[a] in ("row", "col")]
    ai = ATTRIBUTES.index(attr)
    return [k for k, (a, _) in enumerate(ATOMS) if a == ai]


def _rule_attr(atom: int) -> str:
    name = ATTRIBUTES[ATOMS[atom][0]]
    return "position" if name in ("row", "col") else name


def _atoms_of(rule: Rule) -> list[int]:
    kind = rule[0]
    if kind == "q":
        return list(rule[2])
    if kind == "#":
        return [rule[1]]
    if kind == "r":
        return [a for a in rule[2:] if a is not None]
    if kind == "not":
        return _atoms_of(rule[1])
    if kind == "and":
        return [a for x in rule[1] for a in _atoms_of(x)]
    return []


def _relations_of(rule: Rule) -> list[str]:
    if rule[0] == "r":
        return [rule[1]]
    if rule[0] == "not":
        return _relations_of(rule[1])
    if rule[0] == "and":
        return [r for x in rule[1] for r in _relations_of(x)]
    return []


def relevant_attributes(rule: Rule) -> set[str]:
    """Object attributes a rule depends on (``position`` for rows, columns, above, leftof)."""
    out = {_rule_attr(a) for a in _atoms_of(rule)}
    for rel in _relations_of(rule):
        out.add("size" if rel in ("bigger", "inside") else "position")
    return out


def _feasible_rel(rel: str, a: int | None, b: int | None) -> bool:
    def val(atom: int | None, attr: int) -> int | None:
        if atom is None or ATOMS[atom][0] != attr:
            return None
        return ATOMS[atom][1]

    if rel in ("above", "leftof"):
        attr = ROW if rel == "above" else COL
        va, vb = val(a, attr), val(b, attr)
        return (
            (va is None or va < 2)
            and (vb is None or vb > 0)
            and (va is None or vb is None or va < vb)
        )
    va, vb = val(a, SIZE), val(b, SIZE)
    if rel == "bigger":
        return (
            (va is None or va > 0)
            and (vb is None or vb < 2)
            and (va is None or vb is None or va > vb)
        )
    # inside: a inside b, same cell, a smaller than b
    pa, pb = [val(a, ROW), val(a, COL)], [val(b, ROW), val(b, COL)]
    for x, y in zip(pa, pb, strict=True):
        if x is not None and y is not None and x != y:
            return False
    return (
        (va is None or va < 2) and (vb is None or vb > 0) and (va is None or vb is None or va < vb)
    )


def _binary(attr: str) -> bool:
    return attr in ("edge", "tilt")


def _template_ok(kind: str, attr: str, length: int) -> bool:
    if kind == "relational":
        return attr != "count" and length in _RELATIONAL_LENGTHS
    if attr == "count":
        return length in _COUNT_LENGTHS
    if length == 3 and (_binary(attr) or attr == "position"):
        # ~every[v] of a two-valued attribute is some[other value] (length 2); ~every[top]
        # cannot be false with more objects than a row holds
        return False
    return length in _FEATURAL_LENGTHS


def _make_rule(kind: str, attr: str, length: int, ctx: _Ctx) -> Rule:
    """A random rule of exactly ``length`` with its main atom about ``attr``."""
    pick = ctx.pick
    lo, hi = ctx.lo, ctx.hi

    def atom(a: str) -> int:
        return pick(_attr_atoms(a))

    def other(exclude: set[str], *, no_position: bool = False, many: bool = False) -> str:
        opts = [
            a
            for a in RULE_ATTRS
            if a not in exclude
            and not (no_position and a == "position")
            and not (many and _binary(a))
        ]
        return pick(opts)

    def quant(a: int, *, position_ok: bool = True) -> Rule:
        qs = QUANTS if (position_ok and _rule_attr(a) != "position") else ("some", "no")
        return ("q", pick(qs), (a,))

    def q2(x: int, y: int) -> Rule:
        qs = QUANTS if "position" not in (_rule_attr(x), _rule_attr(y)) else ("some", "no")
        return ("q", pick(qs), tuple(sorted((x, y), key=lambda k: ATOMS[k])))

    def at_least() -> Rule:
        if hi <= lo:
            raise _Fail("count cannot vary")
        return ("n", ">=", int(ctx.rng.integers(lo + 1, hi + 1)))

    def exactly() -> Rule:
        if hi <= lo:
            raise _Fail("count cannot vary")
        return ("n", "=", int(ctx.rng.integers(lo, hi + 1)))

    def count_of(a: int) -> Rule:
        return ("#", a, int(ctx.rng.integers(1, min(3, hi) + 1)))

    def rel(x: int | None, y: int | None) -> Rule:
        opts = [r for r in RELATIONS if _feasible_rel(r, x, y)]
        if not opts:
            raise _Fail("no feasible relation")
        return ("r", pick(opts), x, y)

    if kind == "relational":
        x = atom(attr)
        y = atom(other(set()))
        if length == 2:
            return rel(x, None) if ctx.rng.random() < 0.5 else rel(None, x)
        if length == 3:
            return rel(x, y)
        if length == 4:
            return (
                ("not", rel(x, y))
                if ctx.rng.random() < 0.5
                else ("and", (rel(x, None), at_least()))
            )
        z = atom(other({attr}))
        if length == 5:
            if ctx.rng.random() < 0.5:
                return ("and", (rel(x, None), quant(z)))
            return ("and", (rel(x, y), at_least()))
        return ("and", (rel(x, y), quant(z)))
    if attr == "count":
        y = atom(other(set()))
        if length == 1:
            return exactly() if ctx.rng.random() < 0.5 else at_least()
        if length == 2:
            return count_of(y)
        if length == 3:
            return ("not", count_of(y))
        if length == 4:
            return ("and", (quant(y), exactly()))
        z = atom(other({_rule_attr(y)}, many=length == 6, no_position=length == 6))
        if length == 5:
            return ("and", (count_of(y), quant(z)))
        return ("and", (count_of(y), ("not", ("q", "every", (z,)))))
    x = atom(attr)
    if length == 2:
        return quant(x)
    if length == 3:
        return ("not", ("q", "every", (x,)))
    y = atom(other({attr}))
    if length == 4:
        return q2(x, y) if ctx.rng.random() < 0.5 else ("and", (quant(x), at_least()))
    if length == 5:
        return ("and", (quant(x), quant(y)))
    if ctx.rng.random() < 0.5 and not _binary(attr) and attr != "position":
        return ("and", (("not", ("q", "every", (x,))), quant(y)))
    return ("and", (q2(x, y), at_least()))


# -- panel editing -------------------------------------------------------------------------------


def _cells(objs: Sequence[Sequence[int]], skip: Sequence[int] = ()) -> set[int]:
    return {o[ROW] * 3 + o[COL] for k, o in enumerate(objs) if o[INSIDE] < 0 and k not in skip}


def _sync(objs: list[list[int]], ctx: _Ctx) -> None:
    """Keep nested objects in their container's cell; un-nest where the nesting broke."""
    for k, o in enumerate(objs):
        c = o[INSIDE]
        if c < 0:
            continue
        host = objs[c] if 0 <= c < len(objs) else None
        if host is None or c == k or host[INSIDE] >= 0 or host[SIZE] <= o[SIZE]:
            o[INSIDE] = -1
            _place(objs, k, ctx)
        else:
            o[ROW], o[COL] = host[ROW], host[COL]


def _place(
    objs: list[list[int]], k: int, ctx: _Ctx, row: int | None = None, col: int | None = None
) -> None:
    """Move object ``k`` (un-nested) to a free cell, optionally in a given row/column."""
    o = objs[k]
    o[INSIDE] = -1
    used = _cells(objs, skip=(k,))
    free = [
        c
        for c in range(9)
        if c not in used and (row is None or c // 3 == row) and (col is None or c % 3 == col)
    ]
    if not free:
        raise _Fail("no free cell")
    c = ctx.pick(free)
    o[ROW], o[COL] = c // 3, c % 3
    for inner in objs:
        if inner[INSIDE] == k:
            inner[ROW], inner[COL] = o[ROW], o[COL]


def _set_atom(objs: list[list[int]], k: int, atom: int, ctx: _Ctx) -> None:
    attr, val = ATOMS[atom]
    o = objs[k]
    if o[attr] == val:
        return
    if attr == ROW:
        _place(
            objs,
            k,
            ctx,
            row=val,
            col=o[COL] if (val * 3 + o[COL]) not in _cells(objs, skip=(k,)) else None,
        )
    elif attr == COL:
        _place(
            objs,
            k,
            ctx,
            col=val,
            row=o[ROW] if (o[ROW] * 3 + val) not in _cells(objs, skip=(k,)) else None,
        )
    else:
        if val not in ctx.allowed[attr]:
            raise _Fail("value held constant")
        o[attr] = val


def _break_atom(objs: list[list[int]], k: int, atom: int, ctx: _Ctx) -> None:
    attr, val = ATOMS[atom]
    o = objs[k]
    if o[attr] != val:
        return
    if attr in (ROW, COL):
        others = [v for v in range(3) if v != val]
        if attr == ROW:
            _place(objs, k, ctx, row=ctx.pick(others))
        else:
            _place(objs, k, ctx, col=ctx.pick(others))
        return
    opts = [v for v in ctx.allowed[attr] if v != val]
    if not opts:
        raise _Fail("value held constant")
    o[attr] = ctx.pick(opts)


def _new_object(ctx: _Ctx) -> list[int]:
    o = ctx.new_values()
    o += (0, 0, -1)
    return o


def _add(objs: list[list[int]], ctx: _Ctx) -> None:
    if len(objs) >= ctx.hi:
        raise _Fail("too many objects")
    objs.append(_new_object(ctx))
    _place(objs, len(objs) - 1, ctx)


def _remove(objs: list[list[int]], ctx: _Ctx) -> None:
    hosts = {o[INSIDE] for o in objs}
    opts = [k for k in range(len(objs)) if k not in hosts]
    k = ctx.pick(opts)
    del objs[k]
    for o in objs:
        if o[INSIDE] > k:
            o[INSIDE] -= 1


def _set_count(objs: list[list[int]], n: int, ctx: _Ctx) -> None:
    if not 1 <= n <= ctx.hi:
        raise _Fail("count out of range")
    while len(objs) < n:
        _add(objs, ctx)
    while len(objs) > n:
        _remove(objs, ctx)


_CELL_RC = tuple(divmod(c, 3) for c in range(9))


def _random_panel(ctx: _Ctx) -> list[list[int]]:
    rng = ctx.rng
    n = ctx.lo + int(ctx.rnd() * (ctx.hi - ctx.lo + 1))
    objs = []
    for c in ctx.new_cells()[:n]:
        o = _new_object(ctx)
        o[ROW], o[COL] = _CELL_RC[c]
        objs.append(o)
    if ctx.nest and n >= 2 and rng.random() < 0.3:
        i, j = (int(v) for v in rng.choice(n, 2, replace=False))
        if objs[i][SIZE] < objs[j][SIZE]:
            objs[i][INSIDE] = j
            objs[i][ROW], objs[i][COL] = objs[j][ROW], objs[j][COL]
    return objs


def _force_rel(rule: Rule, objs: list[list[int]], want: bool, ctx: _Ctx) -> None:
    _, rel, a, b = rule
    if not want:
        for _ in range(4):
            pairs = _pairs(rule, objs)
            if not pairs:
                return
            for i, j in pairs:
                opts = (
                    (["move"] if rel == "inside" else [])
                    + (["a"] if a is not None else [])
                    + (["b"] if b is not None else [])
                )
                if not opts:
                    raise _Fail("cannot break a relation between any objects")
                how = ctx.pick(opts)
                if how == "move":
                    if objs[i][INSIDE] == j:
                        _place(objs, i, ctx)
                elif how == "a":
                    _break_atom(objs, i, a, ctx)  # type: ignore[arg-type]
                else:
                    _break_atom(objs, j, b, ctx)  # type: ignore[arg-type]
        return
    if _pairs(rule, objs):
        return
    if len(objs) < 2:
        _add(objs, ctx)
    n = len(objs)
    i = int(ctx.rnd() * n)
    j = int(ctx.rnd() * (n - 1))
    j += j >= i
    if a is not None:
        _set_atom(objs, i, a, ctx)
    if b is not None:
        _set_atom(objs, j, b, ctx)

    def fixed(atom: int | None, attr: int) -> int | None:
        return ATOMS[atom][1] if atom is not None and ATOMS[atom][0] == attr else None

    if rel in ("above", "leftof"):
        for k in (i, j):
            if objs[k][INSIDE] >= 0:
                _place(objs, k, ctx)
        used = _cells(objs, skip=(i, j))
        free = [c for c in range(9) if c not in used]
        ra, ca, rb, cb = fixed(a, ROW), fixed(a, COL), fixed(b, ROW), fixed(b, COL)
        cells: list[tuple[int, int]] = []
        for ci in free:
            if (ra is not None and ci // 3 != ra) or (ca is not None and ci % 3 != ca):
                continue
            for cj in free:
                if (
                    cj == ci
                    or (rb is not None and cj // 3 != rb)
                    or (cb is not None and cj % 3 != cb)
                ):
                    continue
                if (ci // 3 < cj // 3) if rel == "above" else (ci % 3 < cj % 3):
                    cells.append((ci, cj))
        if not cells:
            raise _Fail("no cells for the relation")
        ci, cj = ctx.pick(cells)
        for k, c in ((i, ci), (j, cj)):
            objs[k][ROW], objs[k][COL] = c // 3, c % 3
            for inner in objs:
                if inner[INSIDE] == k:
                    inner[ROW], inner[COL] = c // 3, c % 3
        return
    sa, sb = fixed(a, SIZE), fixed(b, SIZE)
    sizes = ctx.allowed[SIZE]
    pairs = [
        (x, y)
        for x in sizes
        for y in sizes
        if (sa is None or x == sa)
        and (sb is None or y == sb)
        and ((x > y) if rel == "bigger" else (x < y))
    ]
    if not pairs:
        raise _Fail("no sizes for the relation")
    objs[i][SIZE], objs[j][SIZE] = ctx.pick(pairs)
    if rel == "bigger":
        _sync(objs, ctx)
        return
    # i inside j: j must be un-nested, i must hold nothing
    if objs[j][INSIDE] >= 0:
        _place(objs, j, ctx)
    for k, o in enumerate(objs):
        if o[INSIDE] == i:
            _place(objs, k, ctx)
    objs[i][INSIDE] = j
    objs[i][ROW], objs[i][COL] = objs[j][ROW], objs[j][COL]
    _sync(objs, ctx)


def _force(rule: Rule, objs: list[list[int]], want: bool, ctx: _Ctx) -> None:
    """Edit a panel in place so that ``rule`` is ``want`` on it (best effort; verified later)."""
    if _ev(rule, objs) == want:
        return
    kind = rule[0]
    rng = ctx.rng
    if kind == "not":
        _force(rule[1], objs, not want, ctx)
    elif kind == "and":
        if want:
            for _ in range(3):
                for x in rule[1]:
                    _force(x, objs, True, ctx)
                if _ev(rule, objs):
                    return
        else:
            _force(ctx.pick(rule[1]), objs, False, ctx)
    elif kind == "n":
        k, n = rule[2], len(objs)
        if rule[1] == "=":
            target = (
                k
                if want
                else ctx.pick([v for v in range(max(1, ctx.lo - 1), ctx.hi + 1) if v != k] or [0])
            )
        elif want:
            target = int(rng.integers(k, max(k, ctx.hi) + 1))
        else:
            target = int(rng.integers(max(1, min(ctx.lo, k - 1)), k)) if k > 1 else 0
        if target != n:
            _set_count(objs, target, ctx)
    elif kind == "q":
        q, d = rule[1], rule[2]
        if (q == "every") == want:  # make every object fit / one object fit
            ks = range(len(objs)) if q == "every" else [ctx.pick(range(len(objs)))]
            for k in ks:
                for a in d:
                    _set_atom(objs, k, a, ctx)
        elif q == "every":  # break one object
            k = ctx.pick(range(len(objs)))
            _break_atom(objs, k, ctx.pick(d), ctx)
        else:  # no object may fit
            for k in range(len(objs)):
                if _has(objs[k], d):
                    _break_atom(objs, k, ctx.pick(d), ctx)
        _sync(objs, ctx)
    elif kind == "#":
        a, k = rule[1], rule[2]
        having = [i for i, o in enumerate(objs) if _has(o, (a,))]
        target = k
        if not want:
            target = k + 1 if (k == 0 or not having or rng.random() < 0.5) else k - 1
        while len(having) > target:
            i = having.pop(int(rng.integers(len(having))))
            _break_atom(objs, i, a, ctx)
        while len(having) < target:
            rest = [i for i, o in enumerate(objs) if not _has(o, (a,))]
            if not rest:
                _add(objs, ctx)
            else:
                _set_atom(objs, ctx.pick(rest), a, ctx)
            having = [i for i, o in enumerate(objs) if _has(o, (a,))]
        _sync(objs, ctx)
    else:
        _force_rel(rule, objs, want, ctx)


def _build_panel(
    rule: Rule, want: bool, ctx: _Ctx, *, base: list[list[int]] | None = None
) -> list[list[int]]:
    for _ in range(6):
        objs = [list(o) for o in base] if base is not None else _random_panel(ctx)
        try:
            _force(rule, objs, want, ctx)
            _sync(objs, ctx)
        except _Fail:
            continue
        if objs and _ev(rule, objs) == want:
            return objs
    raise Rejected("could not build a panel")


def _near_miss(rule: Rule, ctx: _Ctx) -> list[list[int]]:
    """A panel close to one that follows the rule, edited so that it does not."""
    return _build_panel(rule, False, ctx, base=_build_panel(rule, True, ctx))


# ------------------------------------------------------------------------------------------------
# Validity, related rules and labels
# ------------------------------------------------------------------------------------------------


def _masks(n_a: int, n_b: int, n_test: int) -> tuple[int, int, int]:
    a = (1 << n_a) - 1
    b = ((1 << n_b) - 1) << n_a
    t = ((1 << n_test) - 1) << (n_a + n_b)
    return a, b, t


def _labels(vec: int, n_a: int, n_b: int, n_test: int) -> str:
    off = n_a + n_b
    return "".join("A" if vec >> (off + k) & 1 else "B" for k in range(n_test))


def _validity(
    panels: list[list[list[int]]],
    rule: Rule,
    n_a: int,
    n_b: int,
    *,
    minimal: bool,
    length: int | None = None,
    truth: int | None = None,
    vec: np.ndarray | None = None,
) -> tuple[str | None, list[Rule], dict[str, np.ndarray]]:
    """Reason to reject (or None), up to three offending rules and the separating rules.

    Valid means: the hidden rule separates the training sets, and no enumerated rule of equal or
    shorter description length (``length``, default the hidden rule's) separates them but
    classifies a test panel differently (with ``minimal``, no strictly shorter rule separates
    them at all). ``vec``: the panels' leaf vectors when already known.
    """
    n_test = len(panels) - n_a - n_b
    am, bm, tm = _masks(n_a, n_b, n_test)
    length = rule_length(rule) if length is None else length
    if vec is None:
        vec = leaf_vectors(panels)
    sep = separating(vec, a_mask=am, b_mask=bm, max_length=length)
    h = rule_vector(rule, panels) if truth is None else truth  # truth: known by construction
    if (h & (am | bm)) != am:
        return "hidden rule does not separate the sets", [], sep
    vv, ll = _all_sep(sep)
    bad = (vv & np.uint64(tm)) != np.uint64(h & tm)
    reason = None
    if np.any(bad):
        reason = "another rule as short separates the sets but classifies a test panel otherwise"
    if minimal:
        short = ll < length
        if reason is None and np.any(short):
            reason = "a shorter rule separates the sets"
        bad |= short
    if reason is None:
        return None, [], sep
    return reason, _offenders(sep, bad, 3), sep


def _offenders(sep: Mapping[str, np.ndarray], bad: np.ndarray, most: int) -> list[Rule]:
    """Up to ``most`` offending rules with distinct truth vectors."""
    vv, _ = _all_sep(sep)
    idx = np.flatnonzero(bad)
    _, first = np.unique(vv[idx], return_index=True)
    return [_rule_at(sep, int(idx[k])) for k in sorted(first)[:most]]


def _rule_at(sep: Mapping[str, np.ndarray], k: int) -> Rule:
    n1, n2 = len(sep["single"]), len(sep["pair_i"])
    if k < n1:
        return _lit_rule(sep["single"][k])
    if k < n1 + n2:
        return ("and", (_lit_rule(sep["pair_i"][k - n1]), _lit_rule(sep["pair_j"][k - n1])))
    k -= n1 + n2
    return ("not", ("and", (_lit_rule(sep["neg_i"][k]), _lit_rule(sep["neg_j"][k]))))


def _discriminating(rule: Rule, other: Rule, ctx: _Ctx) -> tuple[bool, list[list[int]]] | None:
    """A panel on which ``rule`` and ``other`` disagree, and the truth of ``rule`` on it."""
    for want in (True, False) if ctx.rnd() < 0.5 else (False, True):
        for _ in range(3):
            objs = _random_panel(ctx)
            try:
                _force(other, objs, not want, ctx)
                _force(rule, objs, want, ctx)
            except _Fail:
                continue
            try:
                _sync(objs, ctx)
            except _Fail:
                continue
            if objs and _ev(rule, objs) == want and _ev(other, objs) != want:
                return want, objs
    return None


def _check_length(rule: Rule, operator: str | None) -> int:
    """Length up to which validity is checked: the rule's, or for swapped sets the shorter of
    the rule and its negation (which set is called A is arbitrary; the negation sign is free)."""
    if operator == "swap-sets":
        return min(rule_length(rule), rule_length(_negate(rule)))
    return rule_length(rule)
