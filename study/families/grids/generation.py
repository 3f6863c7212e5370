"""Generation of ``grids`` items: sampling programs and inputs, the validity check, variant
helpers and near-miss choices."""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from .._base import Rejected
from .errors import _credit, _perturb, _siblings
from .operations import _DIHEDRAL, _DIRS, _STEP, _TILES, MAX_SIDE, Grid, Op, apply_op, apply_program
from .search import SearchResult, _colours, _key, search
from .text import _lst

#: Most programs the uniqueness check may try per item (it rejects the item beyond that).
_CHECK_BUDGET = 50_000


# -- generation helpers ---------------------------------------------------------------------------
def _sample_op(kind: str, rng: np.random.Generator) -> Op:
    def colour() -> int:
        return int(rng.integers(1, 10))

    if kind == "geometric":
        if rng.random() < 0.25:
            return ("translate", _DIRS[int(rng.integers(4))])
        return (_DIHEDRAL[int(rng.integers(len(_DIHEDRAL)))],)
    if kind == "colour":
        r = rng.random()
        if r < 0.5:
            a = colour()
            b = int(rng.integers(0, 10)) if rng.random() < 0.2 else colour()
            if b == a:
                b = a % 9 + 1
            return ("recolour", a, b)
        if r < 0.75:
            a, b = sorted(int(c) for c in rng.choice(np.arange(1, 10), 2, replace=False))
            return ("swap", a, b)
        return ("fill", colour())
    if kind == "object":
        r = rng.random()
        if r < 0.3:
            return ("keep-largest",) if rng.random() < 0.5 else ("keep-smallest",)
        if r < 0.85:
            return ("gravity", _DIRS[int(rng.integers(4))])
        return ("count-row",)
    r = rng.random()
    if r < 0.4:
        return ("crop",)
    if r < 0.7:
        return ("scale", int(rng.integers(2, 4)))
    return ("tile", *_TILES[int(rng.integers(len(_TILES)))])


_FAMILY_OF = {n: "dihedral" for n in _DIHEDRAL} | {
    "keep-largest": "keep",
    "keep-smallest": "keep",
}
_OPPOSITE = {"down": "up", "up": "down", "left": "right", "right": "left"}


def _sample_program(p: Mapping[str, Any], rng: np.random.Generator) -> list[Op]:
    kinds = p["kinds"]
    for _ in range(50):
        prog: list[Op] = []
        for _j in range(p["depth"]):
            prog.append(_sample_op(kinds[int(rng.integers(len(kinds)))], rng))
        fams = [_FAMILY_OF.get(op[0], op[0]) for op in prog]
        if any(op[0] == "count-row" for op in prog[:-1]):
            continue
        repeated = {f for f in fams if fams.count(f) > 1} - {"recolour", "swap", "translate"}
        if repeated:
            continue
        # two shifts make a diagonal one; the same or opposite shifts would be reducible
        shifts = [op[1] for op in prog if op[0] == "translate"]
        if len(shifts) > 2 or (len(shifts) == 2 and shifts[1] in (shifts[0], _OPPOSITE[shifts[0]])):
            continue
        sizey = any(op[0] in ("crop", "scale", "tile", "count-row") for op in prog)
        if p["resize"] == "same" and sizey:
            continue
        if p["resize"] == "different" and not sizey:
            continue
        # colour operations touching the same colour would collapse into one mapping
        touched = [c for op in prog if op[0] in ("recolour", "swap") for c in op[1:]]
        if len(touched) != len(set(touched)):
            continue
        return prog
    raise Rejected("no program for these kinds")


def _growth(program: Sequence[Sequence[Any]]) -> int:
    g = 1
    for op in program:
        if op[0] == "scale":
            g *= op[1]
        elif op[0] == "tile":
            g *= max(op[1], op[2])
    return g


def _required_colours(program: Sequence[Sequence[Any]]) -> list[int]:
    need: list[int] = []
    for op in program:
        if op[0] == "recolour":
            need.append(op[1])
        elif op[0] == "swap":
            need += [op[1], op[2]]
    return list(dict.fromkeys(need))


def _palette(rng: np.random.Generator, need: list[int]) -> list[int]:
    k = int(rng.integers(2, 5))
    others = [c for c in rng.permutation(9) + 1 if int(c) not in need]
    return list(dict.fromkeys([*need, *(int(c) for c in others)]))[: max(k, len(need))]


def _shape_mask(rng: np.random.Generator, ring: bool, cap: int) -> np.ndarray:
    u = iter(rng.random(64).tolist())
    if ring:
        h = 3 + int(next(u) * (min(5, cap) - 2))
        w = 3 + int(next(u) * (min(5, cap) - 2))
        m = np.ones((h, w), bool)
        m[1:-1, 1:-1] = False
        return m
    h = 1 + int(next(u) * min(3, cap))
    w = 1 + int(next(u) * min(3, cap))
    target = 1 + int(next(u) * h * w)
    cells = [(int(next(u) * h), int(next(u) * w))]
    have = set(cells)
    for x in u:  # a random walk that grows the shape cell by cell
        if len(cells) >= target:
            break
        r, c = cells[int(x * len(cells))]
        dr, dc = _STEP[_DIRS[int(next(u, 0.0) * 4)]]
        if 0 <= r + dr < h and 0 <= c + dc < w and (r + dr, c + dc) not in have:
            have.add((r + dr, c + dc))
            cells.append((r + dr, c + dc))
    m = np.zeros((h, w), bool)
    rows, cols = zip(*cells, strict=True)
    m[list(rows), list(cols)] = True
    return m[np.ix_(m.any(axis=1), m.any(axis=0))]


def _sample_input(
    rng: np.random.Generator,
    lo: int,
    hi: int,
    n_objects: int,
    palette: list[int],
    need: list[int],
    rings: bool,
) -> Grid:
    h = int(rng.integers(lo, hi + 1))
    w = int(rng.integers(lo, hi + 1))
    n = int(rng.integers(max(1, n_objects - 1), n_objects + 2))
    g = np.zeros((h, w), np.int8)
    blocked = np.zeros((h, w), bool)
    picks = rng.integers(len(palette), size=n).tolist()
    colours = [*need, *(palette[k] for k in picks)][: max(n, len(need))]
    placed = 0
    for j, col in enumerate(colours):
        ring = rings and j == 0 and min(h, w) >= 3
        for _try in range(20):
            m = _shape_mask(rng, ring, min(h, w))
            mh, mw = m.shape
            if mh > h or mw > w:
                continue
            r = int(rng.integers(h - mh + 1))
            c = int(rng.integers(w - mw + 1))
            if blocked[r : r + mh, c : c + mw].any():
                continue
            g[r : r + mh, c : c + mw][m] = col
            # a one-cell margin around every object's box keeps objects apart
            blocked[max(r - 1, 0) : r + mh + 1, max(c - 1, 0) : c + mw + 1] = True
            placed += 1
            break
    if placed == 0:
        raise Rejected("objects do not fit")
    return g


def _validity(
    program: Sequence[Sequence[Any]],
    xs: Sequence[Grid],
    ys: Sequence[Grid],
    test: Grid,
    answer: Grid,
) -> str | None:
    """The first validity problem of an item, or ``None``."""
    if max(answer.shape) > MAX_SIDE or any(max(y.shape) > MAX_SIDE for y in ys):
        return "grid too large"
    if answer.shape == test.shape and np.array_equal(answer, test):
        return "test output equals test input"
    for x, y in zip(xs, ys, strict=True):
        if x.shape == y.shape and np.array_equal(x, y):
            return "uninformative demonstration"
    # every step must change some demonstration
    cur = list(xs)
    for op in program:
        nxt = [apply_op(g, op) for g in cur]
        if all(
            a is not None and a.shape == b.shape and np.array_equal(a, b)
            for a, b in zip(nxt, cur, strict=True)
        ):
            return "a step changes nothing"
        cur = nxt  # type: ignore[assignment]
    # colours that only live in the middle of the composition are invisible
    visible = set(_colours(ys)) | {0}
    for op in program:
        if op[0] in ("recolour", "fill") and op[-1] not in visible:
            return "hidden colour"
    depth = len(program)
    pairs = list(zip(xs, ys, strict=True))
    stats = SearchResult()
    for prog, out in search(
        pairs, test, max_depth=min(depth, 2), budget=_CHECK_BUDGET, stats=stats
    ):
        if out.shape != answer.shape or not np.array_equal(out, answer):
            return "ambiguous"
        if len(prog) < depth:
            return "reducible"
    if stats.exhausted:
        return "uniqueness search too large"
    return None


def _permute_op(op: list[Any], perm: np.ndarray) -> list[Any]:
    if op[0] in ("recolour", "swap"):
        return [op[0], int(perm[op[1]]), int(perm[op[2]])]
    if op[0] == "fill":
        return [op[0], int(perm[op[1]])]
    return list(op)


_PROBE = np.arange(1, 13, dtype=np.int8).reshape(3, 4) % 10


def _equal(a: Grid, b: Grid) -> bool:
    return a.shape == b.shape and bool(np.array_equal(a, b))


def _conjugate_op(op: list[Any], t: str) -> list[Any]:
    """The operation ``op'`` with ``op'(T(g)) == T(op(g))`` for the dihedral map ``T``."""
    name = op[0]
    if name in _DIHEDRAL or name in ("translate", "gravity", "tile"):
        if name in _DIHEDRAL:
            cands: list[list[Any]] = [[n] for n in _DIHEDRAL]
        elif name == "tile":
            cands = [["tile", r, c] for r, c in _TILES]
        else:
            cands = [[name, d] for d in _DIRS]
        probe = np.zeros((5, 6), np.int8)
        probe[1:4, 1:5] = _PROBE
        probe[1, 1] = 0
        want = apply_program(probe, [op, (t,)])
        src = apply_op(probe, (t,))
        for cand in cands:
            got = apply_op(src, cand)  # type: ignore[arg-type]
            if got is not None and want is not None and _equal(got, want):
                return cand
        raise Rejected("no conjugate operation")
    return list(op)


def _translate_all(grids: list[Grid], rng: np.random.Generator) -> list[Grid]:
    out = []
    for g in grids:
        rows = np.flatnonzero(g.any(axis=1))
        cols = np.flatnonzero(g.any(axis=0))
        if rows.size == 0:
            out.append(g)
            continue
        h, w = g.shape
        # every offset that keeps the content on the canvas, except staying put
        offsets = [
            (dy, dx)
            for dy in range(-int(rows[0]), h - int(rows[-1]))
            for dx in range(-int(cols[0]), w - int(cols[-1]))
            if (dy, dx) != (0, 0)
        ]
        if not offsets:
            out.append(g)
            continue
        dy, dx = offsets[int(rng.integers(len(offsets)))]
        moved = np.zeros_like(g)
        moved[rows[0] + dy : rows[-1] + 1 + dy, cols[0] + dx : cols[-1] + 1 + dx] = g[
            rows[0] : rows[-1] + 1, cols[0] : cols[-1] + 1
        ]
        out.append(moved)
    if all(a is b for a, b in zip(out, grids, strict=True)):
        raise Rejected("content fills every canvas")
    return out


def _pad_all(grids: list[Grid], rng: np.random.Generator, growth: int, cap: int) -> list[Grid]:
    top, bottom, left, right = (int(v) for v in rng.integers(0, 2, size=4))
    if top + bottom + left + right == 0:
        bottom = right = 1
    out = [np.pad(g, ((top, bottom), (left, right))) for g in grids]
    if any(max(g.shape) * growth > cap for g in out):
        raise Rejected("canvas would be too large")
    return out


def _near_miss_choices(
    program: Sequence[Sequence[Any]],
    test: Grid,
    answer: Grid,
    n: int,
    rng: np.random.Generator,
    cap: int = MAX_SIDE,
) -> list[list[list[int]]]:
    """The answer and ``n - 1`` outputs of related programs, in random order.

    Related programs: proper prefixes (the first is the test input itself), one or two steps
    swapped for a sibling operation, the steps reversed. When these run out, recoloured cells of
    pool members pad the pool. Near misses cluster round the answer, so the answer would stand out
    as the choice most like the others; the distractor set is drawn (up to 24 tries) so that the
    answer is the choices-only favourite (by majority vote per cell and by closeness to the
    centroid, as the bank audit scores them) with probability ``1 / n`` only.
    """
    related: list[list[Any]] = [list(program[:j]) for j in range(len(program))]
    sibs = [_siblings(op) for op in program]
    for j in range(len(program)):
        for sib in sibs[j]:
            related.append([*program[:j], sib, *program[j + 1 :]])
    for i, j in itertools.combinations(range(len(program)), 2):
        for si, sj in itertools.product(sibs[i][:2], sibs[j][:2]):
            prog = list(program)
            prog[i], prog[j] = si, sj
            related.append(prog)
    if len(program) > 1:
        related.append(list(program[::-1]))
    seen = {_key([answer])}
    pool: list[Grid] = []
    for prog in related:
        out = apply_program(test, prog)
        if out is None or max(out.shape) > cap:
            continue
        key = _key([out])
        if key not in seen:
            seen.add(key)
            pool.append(out)
    tries = 0
    while len(pool) < max(n + 1, 2 * (n - 1)):
        tries += 1
        base = pool[int(rng.integers(len(pool)))] if pool and rng.random() < 0.7 else answer
        out = _perturb(base, rng, cells=1 + tries % 3)
        key = _key([out])
        if key not in seen:
            seen.add(key)
            pool.append(out)
        if tries > 500:
            raise Rejected("not enough distractors")
    # the audit credits a choices-only solver 1/t when the answer is among t tied favourites;
    # pick the favourite-most or the least-favoured set with the odds that make the expected
    # credit exactly 1/n for this item
    sets = []
    for _ in range(24):
        cand = [pool[i] for i in rng.choice(len(pool), size=n - 1, replace=False)]
        sets.append((_credit([answer, *cand]), cand))
    lo = min(sets, key=lambda t: t[0])
    hi = max(sets, key=lambda t: t[0])
    p_hi = 0.0 if hi[0] <= lo[0] else min(max((1.0 / n - lo[0]) / (hi[0] - lo[0]), 0.0), 1.0)
    best = hi[1] if rng.random() < p_hi else lo[1]
    choices = [_lst(g) for g in [*best, answer]]  # type: ignore[misc]
    return [choices[i] for i in rng.permutation(len(choices))]
