"""Enumerative search for the programs consistent with demonstration pairs (the validity
check and the reference solver share it)."""

from __future__ import annotations

import itertools
from collections.abc import Iterator, Sequence

import numpy as np

from .operations import _DIHEDRAL, _DIRS, _TILES, Grid, Op, apply_op


# -- the search engine ----------------------------------------------------------------------------
def _key(grids: Sequence[Grid]) -> bytes:
    return b"|".join(bytes(g.shape) + g.tobytes() for g in grids)


def _colours(grids: Sequence[Grid]) -> list[int]:
    present = np.zeros(10, bool)
    for g in grids:
        present[np.unique(g)] = True
    return [int(c) for c in np.flatnonzero(present) if c]


def _expansions(grids: Sequence[Grid], targets: list[int]) -> list[Op]:
    """Operations worth applying to an intermediate state (parameters from the grids)."""
    here = _colours(grids)
    ops: list[Op] = [(n,) for n in _DIHEDRAL]
    ops += [("translate", d) for d in _DIRS]
    ops += [("recolour", a, b) for a in here for b in [0, *targets] if b != a]
    ops += [("swap", a, b) for a, b in itertools.combinations(here, 2)]
    ops += [("fill", c) for c in targets]
    ops += [("keep-largest",), ("keep-smallest",)]
    ops += [("gravity", d) for d in _DIRS]
    ops += [("crop",), ("scale", 2), ("scale", 3)]
    ops += [("tile", r, c) for r, c in _TILES]
    return ops


def _final_ops(gl: Sequence[Grid], yl: Sequence[Grid]) -> list[Op]:
    """Last operations that could turn each ``gl[i]`` into ``yl[i]``.

    A cheap filter: shapes and colour counts of the first pair, and the cell-wise colour change
    over all pairs (which must be a function for a colour operation).
    """
    g, y = gl[0], yl[0]
    gs, ys = g.shape, y.shape
    hg = np.bincount(g.ravel(), minlength=10)
    hy = np.bincount(y.ravel(), minlength=10)
    same_hist = bool((hg == hy).all())
    ops: list[Op] = []
    if ys == gs:
        if same_hist:
            ops += [("flip-lr",), ("flip-ud",), ("rot180",)]
            if gs[0] == gs[1]:
                ops += [("rot90",), ("rot270",), ("transpose",)]
            ops += [("gravity", d) for d in _DIRS]
        if (hy[1:] <= hg[1:]).all():
            ops += [("translate", d) for d in _DIRS]
            if hy[0] >= hg[0]:
                ops += [("keep-largest",), ("keep-smallest",)]
        # colour operations: the cell-wise colour change must be a function
        if all(a.shape == b.shape for a, b in zip(gl, yl, strict=True)):
            codes = [
                a.astype(np.int16).ravel() * 10 + b.ravel() for a, b in zip(gl, yl, strict=True)
            ]
            pairs = np.unique(np.concatenate(codes))
        else:
            pairs = np.zeros(1, np.int16)
        src, dst = pairs // 10, pairs % 10
        changed = src != dst
        if changed.any() and np.unique(src).size == src.size:
            mapping = dict(zip(src[changed].tolist(), dst[changed].tolist(), strict=True))
            if len(mapping) == 1:
                ((a, b),) = mapping.items()
                ops.append(("fill", b) if a == 0 else ("recolour", a, b))
            elif len(mapping) == 2:
                (a, b), (c, d) = sorted(mapping.items())
                if a == d and b == c and a != 0:
                    ops.append(("swap", a, b))
        elif changed.any():
            # fill leaves some background as it is, so 0 may map to 0 and to c
            s0 = src == 0
            rest_same = (src[~s0] == dst[~s0]).all()
            if rest_same and s0.sum() == 2 and 0 in dst[s0]:
                c = int(dst[s0][dst[s0] != 0][0])
                ops.append(("fill", c))
    elif ys == gs[::-1] and same_hist:
        ops += [("rot90",), ("rot270",), ("transpose",)]
    if ys[0] <= gs[0] and ys[1] <= gs[1] and ys != gs and (hy[1:] == hg[1:]).all():
        ops.append(("crop",))
    for k in (2, 3):
        if ys == (gs[0] * k, gs[1] * k) and (hy == hg * k * k).all():
            ops.append(("scale", k))
    for r, c in _TILES:
        if ys == (gs[0] * r, gs[1] * c) and (hy == hg * r * c).all():
            ops.append(("tile", r, c))
    if ys[0] == 1:
        ops.append(("count-row",))
    return ops


class SearchResult:
    """Counts kept while :func:`search` runs (read ``tried`` after the generator ends)."""

    def __init__(self) -> None:
        self.tried = 0
        self.exhausted = False


def search(
    pairs: Sequence[tuple[Grid, Grid]],
    test: Grid,
    *,
    max_depth: int = 2,
    budget: int = 100_000,
    order_seed: int | None = None,
    stats: SearchResult | None = None,
) -> Iterator[tuple[tuple[Op, ...], Grid]]:
    """Enumerate compositions consistent with the demonstrations, shortest first.

    Breadth-first over program prefixes applied to every demonstration input and the test input at
    once; states already reached are not expanded again. The last operation of a candidate is
    chosen among those whose shape and colour change can map the state to the first demonstration
    output, then checked on all demonstrations.

    Parameters
    ----------
    pairs : sequence of (input, output) int8 arrays
        The demonstrations.
    test : int8 array
        The test input.
    max_depth : int
        Longest composition tried.
    budget : int
        Most programs tried (prefixes expanded plus complete candidates checked).
    order_seed : int, optional
        Shuffle the order of operations at every step (for solvers that break ties by seed).
    stats : SearchResult, optional
        Receives the number of programs tried and whether the budget ran out.

    Yields
    ------
    (program, test_output)
        Each consistent program (a tuple of operation tuples) and its output on the test input.
    """
    st = stats if stats is not None else SearchResult()
    rng = np.random.default_rng(order_seed) if order_seed is not None else None
    xs = [p[0] for p in pairs]
    ys = [p[1] for p in pairs]
    targets = _colours(ys)
    n = len(xs)
    frontier: list[tuple[tuple[Op, ...], list[Grid]]] = [((), [*xs, test])]
    seen = {_key(frontier[0][1])}
    for depth in range(1, max_depth + 1):
        nxt: list[tuple[tuple[Op, ...], list[Grid]]] = []
        for prog, grids in frontier:
            finals = _final_ops(grids[:n], ys)
            if rng is not None:
                finals = [finals[i] for i in rng.permutation(len(finals))]
            for op in finals:
                if st.tried >= budget:
                    st.exhausted = True
                    return
                st.tried += 1
                ok = True
                for i in range(n):
                    out = apply_op(grids[i], op)
                    if out is None or out.shape != ys[i].shape or not np.array_equal(out, ys[i]):
                        ok = False
                        break
                if not ok:
                    continue
                t = apply_op(grids[n], op)
                if t is not None:
                    yield (*prog, op), t
            if depth == max_depth:
                continue
            exps = _expansions(grids, targets)
            if rng is not None:
                exps = [exps[i] for i in rng.permutation(len(exps))]
            for op in exps:
                if op[0] == "count-row":
                    continue
                if st.tried >= budget:
                    st.exhausted = True
                    return
                st.tried += 1
                new = []
                for g in grids:
                    out = apply_op(g, op)
                    if out is None:
                        break
                    new.append(out)
                else:
                    k = _key(new)
                    if k not in seen:
                        seen.add(k)
                        nxt.append(((*prog, op), new))
        frontier = nxt
        if not frontier:
            return
