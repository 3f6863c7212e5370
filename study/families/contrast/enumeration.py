"""The enumerated rule space of the ``contrast`` family: leaves, their lengths and their
truth over many panels as bit vectors, and the rules that separate two sets."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from functools import lru_cache

import numpy as np

from .evaluation import _ev
from .notation import (
    ATOM_ATTR,
    ATOM_VAL,
    ATOMS,
    COL,
    INSIDE,
    MAX_OBJECTS,
    N_ATOMS,
    QUANTS,
    RELATIONS,
    ROW,
    SIZE,
    Rule,
    _canon,
    rule_length,
)

# ------------------------------------------------------------------------------------------------
# The enumerated grammar: leaves, their lengths and vectorised truth over many panels
# ------------------------------------------------------------------------------------------------


class Grammar:
    """The enumerated leaf rules, built once; see :func:`grammar`."""

    def __init__(self) -> None:
        leaves: list[Rule] = []
        for k in range(1, MAX_OBJECTS + 1):
            leaves.append(("n", "=", k))
        for k in range(2, MAX_OBJECTS + 1):
            leaves.append(("n", ">=", k))
        self.n_count = len(leaves)
        for q in QUANTS:
            for a in range(N_ATOMS):
                leaves.append(("q", q, (a,)))
        for k in (1, 2, 3):
            for a in range(N_ATOMS):
                leaves.append(("#", a, k))
        pairs = [
            (a, b)
            for a in range(N_ATOMS)
            for b in range(a + 1, N_ATOMS)
            if ATOMS[a][0] != ATOMS[b][0]
        ]
        self.pair_a = np.array([p[0] for p in pairs])
        self.pair_b = np.array([p[1] for p in pairs])
        for q in QUANTS:
            for a, b in pairs:
                leaves.append(("q", q, (a, b)))
        for rel in RELATIONS:
            for a in [*range(N_ATOMS), None]:
                for b in [*range(N_ATOMS), None]:
                    leaves.append(("r", rel, a, b))
        self.leaves = leaves
        self.index = {leaf: k for k, leaf in enumerate(leaves)}
        self.lengths = np.array([rule_length(x) for x in leaves], dtype=np.int64)
        # literals: the leaves, then their negations
        self.lit_lengths = np.concatenate([self.lengths, self.lengths + 1])
        self.n_leaves = len(leaves)
        self._upto: dict[int, tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = {}

    def upto(self, length: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Literals of length <= ``length``: indices, their leaves, negation masks, lengths."""
        key = max(length, 0)
        if key not in self._upto:
            idx = np.flatnonzero(self.lit_lengths <= key)
            flip = np.where(idx >= self.n_leaves, np.uint64((1 << 64) - 1), np.uint64(0))
            self._upto[key] = (idx, idx % self.n_leaves, flip, self.lit_lengths[idx])
        return self._upto[key]

    def literal(self, k: int) -> Rule:
        """The literal with index ``k`` (leaves first, then negated leaves)."""
        if k < self.n_leaves:
            return self.leaves[k]
        return ("not", self.leaves[k - self.n_leaves])

    def count_up_to(self, length: int) -> int:
        """How many rules of the enumerated space have description length <= ``length``."""
        hist = np.bincount(self.lit_lengths, minlength=length + 1)[: length + 1]
        n = int(hist.sum())
        # conjunctions of two literals (unordered) and their negations
        for la in range(1, length + 1):
            for lb in range(la, length + 1):
                c = (
                    int(hist[la]) * int(hist[lb])
                    if la != lb
                    else int(hist[la]) * (int(hist[la]) - 1) // 2
                )
                if la + lb + 1 <= length:
                    n += c
                if la + lb + 2 <= length:
                    n += c
        return n


@lru_cache(maxsize=1)
def grammar() -> Grammar:
    """The enumerated grammar (cached)."""
    return Grammar()


_PAD = (-1,) * 8


def _panel_array(panels: Sequence[Sequence[Sequence[int]]], m: int = MAX_OBJECTS) -> np.ndarray:
    """Panels as an int array (panel, object slot, attribute); ``m`` slots, padding rows -1."""
    flat: list[int] = []
    for objs in panels:
        for o in objs:
            flat.extend(o)
        flat.extend(_PAD * (m - len(objs)))
    return np.array(flat, dtype=np.int64).reshape(len(panels), m, 8)


_WEIGHTS = 2.0 ** np.arange(53)


_K1 = np.arange(1, MAX_OBJECTS + 1)
_K2 = np.arange(2, MAX_OBJECTS + 1)
_OBJ = np.arange(MAX_OBJECTS)


def leaf_vectors(panels: Sequence[Sequence[Sequence[int]]]) -> np.ndarray:
    """Truth of every enumerated leaf on every panel, as uint64 bit masks (bit p = panel p).

    One pass over all panels: an object-by-value indicator ``M`` (with a last column marking real
    objects) gives value counts and co-occurrence counts as ``M^T M``, and relation leaves as
    ``M^T R M`` for each relation matrix ``R`` (padding rows of ``M`` are zero).
    """
    if len(panels) > len(_WEIGHTS):
        raise ValueError("at most 53 panels per item")
    return _pack(_leaf_truth(panels))


def _pack(truth: np.ndarray) -> np.ndarray:
    """Bit masks (bit p = row p) of a panels-by-leaves truth table (at most 53 rows)."""
    return (_WEIGHTS[: len(truth)] @ truth).astype(np.uint64)


def _leaf_truth(panels: Sequence[Sequence[Sequence[int]]]) -> np.ndarray:
    """Truth of every enumerated leaf (columns) on every panel (rows), as booleans."""
    g = grammar()
    p = len(panels)
    m = max([1, *map(len, panels)])  # object slots; empty slots would add nothing
    x = _panel_array(panels, m)
    na = N_ATOMS
    maug = np.empty((p, m, na + 1), dtype=np.float32)
    np.equal(x[:, :, ATOM_ATTR], ATOM_VAL, out=maug[:, :, :na], casting="unsafe")
    np.greater_equal(x[:, :, 0], 0, out=maug[:, :, na], casting="unsafe")
    mt = maug.transpose(0, 2, 1)
    c2 = mt @ maug  # co-occurrence counts; the last row holds value counts, the corner n
    n = c2[:, na, na]
    c1 = c2[:, na, :na]
    cp = c2[:, g.pair_a, g.pair_b]
    row, col, size, ins = x[:, :, ROW], x[:, :, COL], x[:, :, SIZE], x[:, :, INSIDE]
    rel = np.empty((p, 4, m, m), dtype=np.float32)
    np.less(row[:, :, None], row[:, None, :], out=rel[:, 0], casting="unsafe")
    np.less(col[:, :, None], col[:, None, :], out=rel[:, 1], casting="unsafe")
    np.greater(size[:, :, None], size[:, None, :], out=rel[:, 2], casting="unsafe")
    np.equal(ins[:, :, None], _OBJ[:m], out=rel[:, 3], casting="unsafe")
    res = mt[:, None] @ (rel @ maug[:, None])  # (P, 4, A+1, A+1); the last index is "*"
    truth = np.empty((p, g.n_leaves), dtype=bool)
    nn = n[:, None]
    k = 0
    for arr in (
        nn == _K1,
        nn >= _K2,
        c1 == nn,
        c1 > 0,
        c1 == 0,
        c1 == 1,
        c1 == 2,
        c1 == 3,
        cp == nn,
        cp > 0,
        cp == 0,
    ):
        truth[:, k : k + arr.shape[1]] = arr
        k += arr.shape[1]
    np.greater(res.reshape(p, -1), 0, out=truth[:, k:])
    return truth


def rule_vector(rule: Rule, panels: Sequence[Sequence[Sequence[int]]]) -> int:
    """Truth of ``rule`` on the panels as an int bit mask."""
    v = 0
    for p, objs in enumerate(panels):
        if _ev(rule, objs):
            v |= 1 << p
    return v


def _popcount(x: np.ndarray) -> np.ndarray:
    return (
        np.bitwise_count(x)
        if hasattr(np, "bitwise_count")
        else np.array([bin(int(v)).count("1") for v in x])
    )


def separating(
    vec: np.ndarray, *, a_mask: int, b_mask: int, max_length: int
) -> dict[str, np.ndarray]:
    """Every enumerated rule up to ``max_length`` that is true on all A and no B panels.

    Parameters
    ----------
    vec : ndarray of uint64
        Leaf truth vectors from :func:`leaf_vectors`.
    a_mask, b_mask : int
        Bits of the set-A and set-B (training) panels.

    Returns
    -------
    dict
        ``single`` (literal indices), ``pair_i``/``pair_j`` (literal indices of conjunctions),
        ``neg_i``/``neg_j`` (negated conjunctions), each with ``*_vec`` truth vectors and
        ``*_len`` lengths. Pairs are unordered (i <= j by vector group representative).
    """
    g = grammar()
    full = np.uint64((1 << 64) - 1)
    am, bm = np.uint64(a_mask), np.uint64(b_mask)
    train = am | bm
    out: dict[str, np.ndarray] = {}
    idx, leaf, flip, lens = g.upto(max_length)
    lits = vec[leaf] ^ flip
    ok = (lits & train) == am
    out["single"], out["single_vec"], out["single_len"] = idx[ok], lits[ok], lens[ok]
    for name, pos, neg, extra in (("pair", am, bm, 1), ("neg", bm, am, 2)):
        empty = np.zeros(0, dtype=np.int64)
        sub, leaf, flip, lens = g.upto(max_length - extra - 1)
        ci = np.zeros(0, dtype=np.int64)
        if sub.size:
            lits = vec[leaf] ^ flip
            cand = ((lits & pos) == pos) & ((lits & neg) != neg)
            ci = np.flatnonzero(cand)
            lits, lens, sub = lits[ci], lens[ci], sub[ci]
        if ci.size == 0:
            out[f"{name}_i"] = out[f"{name}_j"] = empty
            out[f"{name}_vec"] = np.zeros(0, dtype=np.uint64)
            out[f"{name}_len"] = empty
            continue
        # one representative (shortest) per distinct vector keeps the pair step small
        order = np.lexsort((lens, lits))
        v = lits[order]
        first = np.ones(len(v), dtype=bool)
        first[1:] = v[1:] != v[:-1]
        keep = order[first]
        ci, v, ln = sub[keep], lits[keep], lens[keep]
        conj = v[:, None] & v[None, :]
        total = ln[:, None] + ln[None, :] + extra
        good = ((conj & neg) == 0) & (total <= max_length)
        good &= np.triu(np.ones_like(good), 1)
        ii, jj = np.nonzero(good)
        vv = conj[ii, jj]
        if name == "neg":
            vv = ~vv & full
        out[f"{name}_i"], out[f"{name}_j"] = ci[ii], ci[jj]
        out[f"{name}_vec"], out[f"{name}_len"] = vv, total[ii, jj]
    return out


def _lit_rule(k: int) -> Rule:
    return grammar().literal(int(k))


def separating_rules(sep: Mapping[str, np.ndarray], which: np.ndarray | None = None) -> list[Rule]:
    """Syntax trees of the rules in a :func:`separating` result (optionally a boolean subset)."""
    rules: list[Rule] = [_lit_rule(k) for k in sep["single"]]
    rules += [
        _canon(("and", (_lit_rule(i), _lit_rule(j))))
        for i, j in zip(sep["pair_i"], sep["pair_j"], strict=True)
    ]
    rules += [
        _canon(("not", ("and", (_lit_rule(i), _lit_rule(j)))))
        for i, j in zip(sep["neg_i"], sep["neg_j"], strict=True)
    ]
    if which is not None:
        rules = [r for r, w in zip(rules, which, strict=True) if w]
    return rules


def _all_sep(sep: Mapping[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    return (
        np.concatenate([sep["single_vec"], sep["pair_vec"], sep["neg_vec"]]),
        np.concatenate([sep["single_len"], sep["pair_len"], sep["neg_len"]]),
    )
