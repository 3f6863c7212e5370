"""The ``grids`` family: few-shot colour-grid transformations.

Each item shows two to four demonstration pairs (input grid -> output grid) and a test input; the
answer is the test output grid. Grids are lists of lists of ints 0-9 (0 is the background). The
hidden transformation is a composition (depth 1-3) of operations from our own grammar:

geometric
    ``flip_lr``, ``flip_ud``, ``rot90`` (a quarter turn anticlockwise), ``rot180``, ``rot270``,
    ``transpose``, ``translate(direction)`` (one cell, background fills in)
colour
    ``recolour(a, b)``, ``swap(a, b)``, ``fill(c)`` (background cells enclosed by content)
object (objects are 4-connected groups of non-background cells)
    ``keep_largest``, ``keep_smallest``, ``gravity(direction)`` (every object slides as a rigid
    body until it touches the edge or another object), ``count_row`` (a one-row grid with one cell
    per object, in reading order, in the object's colour)
size
    ``crop`` (to the bounding box of the content), ``scale(k)``, ``tile(rows, cols)``

A program is stored on the item (``stimulus["program"]``, never shown) as a list of
``[name, *args]`` lists. Validity: every demonstration changes, every step of the program changes
at least one demonstration, the test output differs from the test input, and an enumerative search
over all programs of depth 1 and all depth-2 programs (bounded, see :func:`search`) finds no
consistent program that gives another test output, nor a consistent program shorter than the
intended one. The same search engine drives the reference solver ``grids-ref``.
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
from scipy import ndimage

from ..exceptions import ResponseError
from ..item import Item, canonical_json
from . import register
from ._base import Family, ParamSpec, Rejected

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = [
    "KINDS",
    "OPS",
    "PALETTE",
    "GridsFamily",
    "SearchResult",
    "apply_op",
    "apply_program",
    "describe_program",
    "format_grid",
    "parse_grids",
    "search",
]

#: Largest side of any grid (outputs of scale/tile included).
MAX_SIDE = 30
#: Most programs the uniqueness check may try per item (it rejects the item beyond that).
_CHECK_BUDGET = 50_000

#: Our own colour-blind-conscious palette: colour 0 (background) to 9. The colours differ in
#: lightness as well as hue, and every colour also has its own hatch, so cells stay distinguishable
#: without colour vision.
PALETTE: tuple[str, ...] = (
    "#f4f1ea",  # 0 background, warm off-white
    "#1d3557",  # 1 ink blue
    "#e07a1f",  # 2 pumpkin
    "#7fc4e8",  # 3 pale sky
    "#7b2d5b",  # 4 mulberry
    "#f3d34a",  # 5 straw
    "#2a8c7a",  # 6 pine teal
    "#9a9a9a",  # 7 pewter
    "#5a3b1c",  # 8 walnut
    "#e2a0c4",  # 9 blossom
)
_HATCHES: tuple[str, ...] = ("", "", "//", "..", "\\\\", "++", "xx", "--", "||", "oo")

#: Draw digit labels in every cell of pictures (module-level option; ``draw`` reads it).
DIGIT_LABELS = False

_DIRS = ("down", "up", "left", "right")
# quarter turns (np.rot90, anticlockwise) that bring a direction to "down"
_TURNS = {"down": 0, "up": 2, "left": 1, "right": 3}
_STEP = {"down": (1, 0), "up": (-1, 0), "left": (0, -1), "right": (0, 1)}

Grid = np.ndarray
Op = tuple  # (name, *args)


# -- operations ---------------------------------------------------------------------------------
_CROSS = ndimage.generate_binary_structure(2, 1)
_LABELS: dict[bytes, tuple[np.ndarray, int]] = {}


def _label(g: Grid) -> tuple[np.ndarray, int]:
    """4-connected objects of non-background cells (cached: the search labels grids often)."""
    key = bytes(g.shape) + g.tobytes()
    hit = _LABELS.get(key)
    if hit is None:
        if len(_LABELS) > 5_000:
            _LABELS.clear()
        hit = ndimage.label(g != 0, structure=_CROSS)
        _LABELS[key] = hit
    return hit


def _translate(g: Grid, d: str) -> Grid:
    dy, dx = _STEP[d]
    out = np.zeros_like(g)
    h, w = g.shape
    out[max(dy, 0) : h + min(dy, 0), max(dx, 0) : w + min(dx, 0)] = g[
        max(-dy, 0) : h + min(-dy, 0), max(-dx, 0) : w + min(-dx, 0)
    ]
    return out


def _recolour(g: Grid, a: int, b: int) -> Grid:
    return np.where(g == a, np.int8(b), g)


def _swap(g: Grid, a: int, b: int) -> Grid:
    out = g.copy()
    out[g == a] = b
    out[g == b] = a
    return out


def _fill(g: Grid, c: int) -> Grid:
    lab, n = ndimage.label(g == 0, structure=_CROSS)
    if n == 0:
        return g
    table = np.ones(n + 1, bool)
    table[0] = False
    table[lab[0]] = table[lab[-1]] = table[lab[:, 0]] = table[lab[:, -1]] = False
    enclosed = table[lab]
    return np.where(enclosed, np.int8(c), g)


def _keep(g: Grid, largest: bool) -> Grid | None:
    lab, n = _label(g)
    if n == 0:
        return None
    sizes = np.bincount(lab.ravel())[1:]
    target = sizes.max() if largest else sizes.min()
    table = np.concatenate([[False], sizes == target])
    return np.where(table[lab], g, np.int8(0))


def _gravity(g: Grid, d: str) -> Grid:
    lab, n = _label(g)
    if n == 0:
        return g
    h, w = g.shape
    dy, dx = _STEP[d]
    rr, cc = np.nonzero(lab)
    rows, cols = rr.tolist(), cc.tolist()
    cells: list[list[tuple[int, int]]] = [[] for _ in range(n)]
    for r, c, lbl in zip(rows, cols, lab[rr, cc].tolist(), strict=True):
        cells[lbl - 1].append((r, c))
    occ = set(zip(rows, cols, strict=True))
    # the objects furthest along the direction move first, so the others land on them
    order = sorted(range(n), key=lambda i: -max(r * dy + c * dx for r, c in cells[i]))
    start = [list(cs) for cs in cells]
    moving = True
    while moving:  # another pass when an object moved out of the way of one already tried
        moving = False
        for i in order:
            cs = cells[i]
            occ.difference_update(cs)
            own = set(cs)
            # only the cells on the leading side can bump into something
            front = [(r, c) for r, c in cs if (r + dy, c + dx) not in own]
            k = 0
            while all(
                0 <= r + (k + 1) * dy < h
                and 0 <= c + (k + 1) * dx < w
                and (r + (k + 1) * dy, c + (k + 1) * dx) not in occ
                for r, c in front
            ):
                k += 1
            if k:
                moving = True
                cs = cells[i] = [(r + k * dy, c + k * dx) for r, c in cs]
            occ.update(cs)
    old_r = [r for cs in start for r, _ in cs]
    old_c = [c for cs in start for _, c in cs]
    new_r = [r for cs in cells for r, _ in cs]
    new_c = [c for cs in cells for _, c in cs]
    out = np.zeros_like(g)
    out[new_r, new_c] = g[old_r, old_c]
    return out


def _count_row(g: Grid) -> Grid | None:
    lab, n = _label(g)
    if n == 0:
        return None
    labels, first = np.unique(lab.ravel(), return_index=True)
    first = first[labels > 0]  # label numbers follow reading order
    return g.ravel()[first].reshape(1, n).astype(np.int8)


def _crop(g: Grid) -> Grid | None:
    rows = np.flatnonzero(g.any(axis=1))
    if rows.size == 0:
        return None
    cols = np.flatnonzero(g.any(axis=0))
    return g[rows[0] : rows[-1] + 1, cols[0] : cols[-1] + 1]


def _scale(g: Grid, k: int) -> Grid | None:
    if g.shape[0] * k > MAX_SIDE or g.shape[1] * k > MAX_SIDE:
        return None
    return g.repeat(k, axis=0).repeat(k, axis=1)


def _tile(g: Grid, r: int, c: int) -> Grid | None:
    if g.shape[0] * r > MAX_SIDE or g.shape[1] * c > MAX_SIDE:
        return None
    return np.tile(g, (r, c))


#: name -> (kind, function(grid, *args) -> grid or None when not applicable)
OPS: dict[str, tuple[str, Callable[..., Grid | None]]] = {
    "flip_lr": ("geometric", lambda g: g[:, ::-1]),
    "flip_ud": ("geometric", lambda g: g[::-1, :]),
    "rot90": ("geometric", lambda g: np.rot90(g, 1)),
    "rot180": ("geometric", lambda g: g[::-1, ::-1]),
    "rot270": ("geometric", lambda g: np.rot90(g, 3)),
    "transpose": ("geometric", lambda g: g.T),
    "translate": ("geometric", _translate),
    "recolour": ("colour", _recolour),
    "swap": ("colour", _swap),
    "fill": ("colour", _fill),
    "keep_largest": ("object", lambda g: _keep(g, True)),
    "keep_smallest": ("object", lambda g: _keep(g, False)),
    "gravity": ("object", _gravity),
    "count_row": ("object", _count_row),
    "crop": ("size", _crop),
    "scale": ("size", _scale),
    "tile": ("size", _tile),
}
#: The operation kinds, in the order used by the ``kinds`` parameter.
KINDS = ("geometric", "colour", "object", "size")
_DIHEDRAL = ("flip_lr", "flip_ud", "rot90", "rot180", "rot270", "transpose")
_TILES = ((1, 2), (2, 1), (2, 2))


def apply_op(g: Grid, op: Sequence[Any]) -> Grid | None:
    """Apply one operation ``[name, *args]`` to a grid; ``None`` when it does not apply."""
    out = OPS[op[0]][1](g, *op[1:])
    if out is None or out.size == 0:
        return None
    return out


def apply_program(g: Grid, program: Sequence[Sequence[Any]]) -> Grid | None:
    """Apply a composition (first operation first); ``None`` when a step does not apply."""
    out: Grid | None = g
    for op in program:
        out = apply_op(out, op)  # type: ignore[arg-type]
        if out is None:
            return None
    return out


_WORDS = {
    "flip_lr": "mirror left-right",
    "flip_ud": "mirror top-bottom",
    "rot90": "rotate a quarter turn anticlockwise",
    "rot180": "rotate a half turn",
    "rot270": "rotate a quarter turn clockwise",
    "transpose": "reflect across the main diagonal",
    "keep_largest": "keep only the largest object",
    "keep_smallest": "keep only the smallest object",
    "count_row": "count the objects and draw one cell per object in a row",
    "crop": "crop to the content",
}


def _op_words(op: Sequence[Any]) -> str:
    name = op[0]
    if name in _WORDS:
        return _WORDS[name]
    if name == "translate":
        return f"shift everything one cell {op[1]}"
    if name == "recolour":
        return f"recolour {op[1]} to {op[2]}"
    if name == "swap":
        return f"swap colours {op[1]} and {op[2]}"
    if name == "fill":
        return f"fill enclosed background with colour {op[1]}"
    if name == "gravity":
        return f"slide every object {op[1]} until it touches something"
    if name == "scale":
        return f"scale up by {op[1]}"
    if name == "tile":
        return f"tile {op[1]} by {op[2]}"
    return " ".join(map(str, op))


def describe_program(program: Sequence[Sequence[Any]]) -> str:
    """The program in words, e.g. ``"rotate a half turn, then recolour 3 to 5"``."""
    if not program:
        return "leave the grid unchanged"
    return ", then ".join(_op_words(op) for op in program)


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
    ops += [("keep_largest",), ("keep_smallest",)]
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
            ops += [("flip_lr",), ("flip_ud",), ("rot180",)]
            if gs[0] == gs[1]:
                ops += [("rot90",), ("rot270",), ("transpose",)]
            ops += [("gravity", d) for d in _DIRS]
        if (hy[1:] <= hg[1:]).all():
            ops += [("translate", d) for d in _DIRS]
            if hy[0] >= hg[0]:
                ops += [("keep_largest",), ("keep_smallest",)]
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
        ops.append(("count_row",))
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
                if op[0] == "count_row":
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


# -- text format --------------------------------------------------------------------------------
def format_grid(grid: Sequence[Sequence[int]]) -> str:
    """The compact text form: one row per line, one digit per cell."""
    return "\n".join("".join(str(int(v)) for v in row) for row in grid)


_ROW = re.compile(r"^[\s>*`'\"|(\[]*(\d(?:[\s,;|]*\d)*)[\s,;|\])'\"`]*$")
_ROW_LABEL = re.compile(r"^(?:row|line)\s*\d+\s*[:.)-]\s*", re.I)
_CHOICE = re.compile(
    r"\b(?:choice|option|answer)\s*(?:number|no\.?|is)?\s*[:#]?\s*(\d{1,2})\b", re.I
)
_MARK = re.compile(r"(answer|output|result|solution|choice)\b[^\n]*", re.IGNORECASE)


def _blocks(text: str) -> list[tuple[int, list[list[int]]]]:
    """Runs of consecutive digit-row lines with equal length, with their start offset."""
    out: list[tuple[int, list[list[int]]]] = []
    cur: list[list[int]] = []
    start = 0
    pos = 0
    for line in text.splitlines(keepends=True):
        m = _ROW.match(_ROW_LABEL.sub("", line.strip()))
        row = [int(ch) for ch in m.group(1) if ch.isdigit()] if m else None
        if row is not None and (not cur or len(row) == len(cur[0])):
            if not cur:
                start = pos
            cur.append(row)
        else:
            if cur:
                out.append((start, cur))
            cur = []
            if row is not None:
                start = pos
                cur = [row]
        pos += len(line)
    if cur:
        out.append((start, cur))
    return out


def parse_grids(text: str) -> list[list[list[int]]]:
    """Every grid found in ``text`` (text rows or JSON-style nested lists), in order."""
    import json

    found: list[tuple[int, list[list[int]]]] = []
    for m in re.finditer(r"\[\s*\[[\d\s,\[\]]*\]\s*\]", text):
        try:
            val = json.loads(m.group(0))
        except ValueError:
            continue
        if _is_grid(val):
            found.append((m.start(), val))
    if not found:
        found = _blocks(text)
    return [g for _, g in sorted(found, key=lambda t: t[0])]


def _is_grid(val: Any) -> bool:
    if not isinstance(val, list) or not val or not all(isinstance(r, list) for r in val):
        return False
    w = len(val[0])
    return (
        0 < w <= MAX_SIDE
        and len(val) <= MAX_SIDE
        and all(len(r) == w for r in val)
        and all(
            isinstance(v, int) and not isinstance(v, bool) and 0 <= v <= 9
            for r in val
            for v in r
        )
    )


def _arr(grid: Sequence[Sequence[int]]) -> Grid:
    return np.asarray(grid, dtype=np.int8)


def _lst(g: Grid) -> list[list[int]]:
    return [[int(v) for v in row] for row in g]


# -- the family ---------------------------------------------------------------------------------
class GridsFamily(Family):
    """Few-shot colour-grid transformations from a small grammar of grid operations.

    Parameters (generation spec)
    ----------------------------
    depth : int, 1-3, default 2
        Operations composed.
    kinds : list of {"geometric", "colour", "object", "size"}, default all
        Kinds the operations are drawn from.
    size : int, 3-15, default 8
        Largest side of an input grid; sides are drawn from ``size - 3`` to ``size`` (smaller
        when a scale or tile step would make the output wider than 30).
    objects : int, 1-8, default 3
        Objects per input grid vary from ``objects - 1`` to ``objects + 1``.
    demos : int, 2-4, default 3
        Demonstration pairs.
    resize : {"any", "same", "different"}, default "any"
        Whether outputs must keep or must change the input size.

    Notes
    -----
    Factors stored on every item: ``depth``, ``kinds`` (the kinds used, joined by ``+``),
    ``size`` (largest side of the test input), ``n_objects`` (objects in the test input),
    ``n_demos`` and ``size_change`` (some demonstration output differs in shape from its input).
    The stimulus holds ``train`` (list of ``{"input", "output"}``), ``test`` and ``program``
    (never shown). In select mode the choices come from the ``near-miss`` scheme.
    """

    name = "grids"
    prefix = "grd"
    version = "1"
    modes = ("generate", "select")
    params = (
        ParamSpec("depth", "int", 2, "number of operations composed", 1, 3),
        ParamSpec(
            "kinds",
            "multi",
            list(KINDS),
            "operation kinds the composition draws from",
            options=KINDS,
        ),
        ParamSpec("size", "int", 8, "largest side of an input grid (sides vary below it)", 3, 15),
        ParamSpec("objects", "int", 3, "typical number of objects in an input grid", 1, 8),
        ParamSpec("demos", "int", 3, "number of demonstration pairs", 2, 4),
        ParamSpec(
            "resize",
            "choice",
            "any",
            "whether outputs keep the input size: same, different or any",
            options=("any", "same", "different"),
        ),
    )
    factors = ("depth", "kinds", "size", "n_objects", "n_demos", "size_change")
    distractor_schemes = {
        "near-miss": "outputs of related programs: a prefix of the composition (the first is "
        "the test input itself), one or two operations swapped for siblings, the operations "
        "reversed; padded with a few recoloured cells when these run out; the set is drawn so "
        "that the choices alone favour the answer only at chance"
    }
    variant_operators = {
        "permute_colours": "relabel the colours 1-9 by one permutation across the whole item",
        "rotate_flip": "rotate or mirror every grid of the item the same way "
        "(the program is conjugated)",
        "translate_content": "move the content of every input grid to another place on its "
        "canvas (each grid by its own offset; outputs recomputed)",
        "resize_canvas": "add background rows and columns to every input grid",
    }
    error_types = {
        "identity_copy": "the test input copied unchanged",
        "partial": "the output of part of the composition (e.g. its first steps)",
        "wrong_size": "a grid of another shape than the answer",
        "wrong_colours": "the right shape and layout of content but other colours",
        "wrong_content": "the right shape, at least half the cells right, other content",
        "other": "any other wrong response (the right shape, mostly wrong)",
    }
    default_choices = 4
    answer_format = (
        "the output grid: one row per line, one digit 0-9 per cell (0 = background), "
        "no spaces or other characters"
    )

    # -- generation ---------------------------------------------------------------------------
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
        p = self._params(params)
        program = _sample_program(p, rng)
        growth = _growth(program)
        hi = min(p["size"], MAX_SIDE // growth)
        lo = max(3, min(hi, p["size"] - 3))
        if hi < 3:
            raise Rejected("grid too small for growth")
        need = _required_colours(program)
        palette = _palette(rng, need)
        rings = any(op[0] == "fill" for op in program)
        inputs = [
            _sample_input(rng, lo, hi, p["objects"], palette, need, rings)
            for _ in range(p["demos"] + 1)
        ]
        return self._build(
            program,
            inputs[:-1],
            inputs[-1],
            params=p,
            rng=rng,
            seed=seed,
            modes=modes,
            scheme=distractor_scheme,
            n_choices=n_choices,
        )

    def _params(self, params: Mapping[str, Any]) -> dict[str, Any]:
        out = self.default_params()
        for spec in self.params:
            if spec.name in params:
                out[spec.name] = spec.check_value(params[spec.name], where="grids params")
        out["kinds"] = [k for k in KINDS if k in out["kinds"]]
        return out

    def _build(
        self,
        program: Sequence[Sequence[Any]],
        demo_inputs: Sequence[Grid],
        test_input: Grid,
        *,
        params: Mapping[str, Any],
        rng: np.random.Generator,
        seed: int,
        modes: Sequence[str],
        scheme: str | None,
        n_choices: int,
        variant_of: str | None = None,
        variant_operator: str | None = None,
    ) -> Item:
        program = [list(op) for op in program]
        outs = []
        for x in [*demo_inputs, test_input]:
            y = apply_program(x, program)
            if y is None:
                raise Rejected("program not applicable")
            outs.append(y)
        demo_outputs, answer = outs[:-1], outs[-1]
        change = any(x.shape != y.shape for x, y in zip(demo_inputs, demo_outputs, strict=True))
        if params["resize"] == "same" and (change or answer.shape != test_input.shape):
            raise Rejected("size changes")
        if params["resize"] == "different" and not change:
            raise Rejected("size kept")
        problem = _validity(program, demo_inputs, demo_outputs, test_input, answer)
        if problem:
            raise Rejected(problem)
        stimulus = {
            "train": [
                {"input": _lst(x), "output": _lst(y)}
                for x, y in zip(demo_inputs, demo_outputs, strict=True)
            ],
            "test": _lst(test_input),
            "program": program,
        }
        kinds = sorted({OPS[op[0]][0] for op in program}, key=KINDS.index)
        factors = {
            "depth": len(program),
            "kinds": "+".join(kinds),
            "size": int(max(test_input.shape)),
            "n_objects": int(_label(test_input)[1]),
            "n_demos": len(demo_inputs),
            "size_change": bool(change),
        }
        choices = None
        used_scheme = None
        if "select" in modes:
            used_scheme = scheme or "near-miss"
            if used_scheme not in self.distractor_schemes:
                raise Rejected(f"unknown distractor scheme {used_scheme}")
            choices = _near_miss_choices(program, test_input, answer, n_choices, rng)
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors=factors,
            modes=list(modes),
            stimulus=stimulus,
            answer=_lst(answer),
            accepted=[],
            choices=choices,
            distractor_scheme=used_scheme,
            variant_of=variant_of,
            variant_operator=variant_operator,
            seed=seed,
        )

    def check(self, item: Item) -> list[str]:
        problems = []
        program = item.stimulus["program"]
        xs = [_arr(p["input"]) for p in item.stimulus["train"]]
        ys = [_arr(p["output"]) for p in item.stimulus["train"]]
        test = _arr(item.stimulus["test"])
        for i, (x, y) in enumerate(zip(xs, ys, strict=True)):
            out = apply_program(x, program)
            if out is None or not np.array_equal(out, y) or out.shape != y.shape:
                problems.append(f"demonstration {i + 1} does not follow the program")
        answer = apply_program(test, program)
        if answer is None or _lst(answer) != item.answer:
            problems.append("the answer does not follow the program")
            return problems
        problem = _validity(program, xs, ys, test, answer)
        if problem:
            problems.append(problem)
        if item.choices is not None and item.answer_choice is None:
            problems.append("the answer is not among the choices")
        if item.choices is not None:
            keys = [canonical_json(c) for c in item.choices]
            if len(set(keys)) != len(keys):
                problems.append("choices repeat")
        return problems

    # -- variants -----------------------------------------------------------------------------
    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        if operator not in self.variant_operators:
            raise Rejected(f"unknown operator {operator}")
        program = [list(op) for op in item.stimulus["program"]]
        xs = [_arr(p["input"]) for p in item.stimulus["train"]]
        test = _arr(item.stimulus["test"])
        grids = [*xs, test]
        if operator == "permute_colours":
            perm = np.concatenate([[0], rng.permutation(9) + 1]).astype(np.int8)
            if (perm == np.arange(10)).all():
                perm[1], perm[2] = perm[2], perm[1]
            grids = [perm[g] for g in grids]
            program = [_permute_op(op, perm) for op in program]
        elif operator == "rotate_flip":
            # the mirror images of transpose along the other diagonal are not in the grammar,
            # so take the first map (in random order) under which every step has a counterpart
            for k in rng.permutation(len(_DIHEDRAL)):
                name = _DIHEDRAL[int(k)]
                try:
                    conj = [_conjugate_op(op, name) for op in program]
                except Rejected:
                    continue
                grids = [apply_op(g, (name,)) for g in grids]  # type: ignore[misc]
                program = conj
                break
        elif operator == "translate_content":
            grids = _translate_all(grids, rng)
        else:
            grids = _pad_all(grids, rng, _growth(program))
        scheme = item.distractor_scheme
        return self._build(
            program,
            grids[:-1],
            grids[-1],
            params=item.params,
            rng=rng,
            seed=item.seed,
            modes=item.modes,
            scheme=scheme,
            n_choices=len(item.choices) if item.choices else self.default_choices,
            variant_of=item.id,
            variant_operator=operator,
        )

    # -- responses ----------------------------------------------------------------------------
    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        if isinstance(response, str):
            grids = parse_grids(response)
            if len(grids) != 1:
                raise ResponseError(
                    f"item {item.id}: field 'response': got {len(grids)} grids in the text; "
                    "accepted: one grid, one row per line, one digit per cell.",
                    field="response",
                )
            response = grids[0]
        if isinstance(response, np.ndarray):
            response = response.tolist()
        if isinstance(response, tuple):
            response = [list(r) if isinstance(r, tuple) else r for r in response]
        if not _is_grid(response):
            raise ResponseError(
                f"item {item.id}: field 'response': got {str(response)[:60]!r}; accepted: a "
                f"rectangular list of rows of integers 0-9, at most {MAX_SIDE} by {MAX_SIDE}.",
                field="response",
            )
        return [list(r) for r in response]

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        if mode == "select":
            response = item.choices[response - 1]  # type: ignore[index]
        if canonical_json(response) == canonical_json(item.answer):
            raise ValueError("classify_error called with the correct answer")
        return _classify(item, _arr(response))

    def sample_error(self, item: Item, mode: str, rng: np.random.Generator) -> tuple[Any, str]:
        if mode == "select":
            wrong = [k for k in range(1, len(item.choices or ()) + 1) if k != item.answer_choice]
            k = wrong[int(rng.integers(len(wrong)))]
            return k, self.classify_error(item, k, mode)
        answer = _arr(item.answer)
        test = _arr(item.stimulus["test"])
        program = item.stimulus["program"]
        cands: list[Grid] = [test]
        for j in range(1, len(program)):
            out = apply_program(test, program[:j])
            if out is not None:
                cands.append(out)
        cands.append(_perturb(answer, rng, cells=1))
        cands.append(_recolour_answer(answer, rng))
        h, w = answer.shape
        cands.append(answer[:-1] if h > 1 else np.vstack([answer, answer[:1]]))
        cands.append(rng.integers(0, 10, size=answer.shape).astype(np.int8))
        order = rng.permutation(len(cands))
        for i in order:
            g = cands[i]
            if g is None or (g.shape == answer.shape and np.array_equal(g, answer)):
                continue
            return _lst(g), _classify(item, g)
        raise Rejected("no wrong response")  # pragma: no cover - the test input always differs

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            n = len(item.choices or ())
            named = [
                int(m)
                for m in _CHOICE.findall(text)
                if 1 <= int(m) <= n
            ]
            return named[-1] if named else super().parse_text(item, text, mode)
        marks = list(_MARK.finditer(text))
        grids_after: list[list[list[int]]] = []
        if marks:
            grids_after = parse_grids(text[marks[-1].start() :])
        grids = grids_after or parse_grids(text)
        if not grids:
            raise ResponseError(
                f"item {item.id}: no grid found in reply (expected rows of digits 0-9).",
                field="response",
            )
        return grids[0] if grids_after else grids[-1]

    # -- rendering ----------------------------------------------------------------------------
    def render_text(self, item: Item, mode: str) -> str:
        st = item.stimulus
        lines = [
            "Each example turns an input grid into an output grid by the same hidden rule.",
            "Grids are written one row per line, one digit per cell; digits are colours and "
            "0 is the background.",
            "",
        ]
        for i, pair in enumerate(st["train"], start=1):
            lines += [f"Example {i} input:", format_grid(pair["input"]), ""]
            lines += [f"Example {i} output:", format_grid(pair["output"]), ""]
        lines += ["Test input:", format_grid(st["test"]), ""]
        if mode == "select":
            for k, choice in enumerate(item.choices or (), start=1):
                lines += [f"Choice {k}:", format_grid(choice), ""]
            lines.append(
                "Which choice is the output for the test input? "
                "Reply with the choice number only."
            )
        else:
            lines.append(
                "Give the output grid for the test input: one row per line, one digit 0-9 per "
                "cell, no spaces or other characters."
            )
        return "\n".join(lines)

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        st = item.stimulus
        view: dict[str, Any] = {
            "train": [{"input": p["input"], "output": p["output"]} for p in st["train"]],
            "test_input": st["test"],
            "palette": list(PALETTE),
            "response_format": "grid" if mode == "generate" else "choice number",
        }
        if mode == "select":
            view["choices"] = list(item.choices or ())
        return view

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        _draw(item, mode, fig, labels=DIGIT_LABELS)


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
            return ("keep_largest",) if rng.random() < 0.5 else ("keep_smallest",)
        if r < 0.85:
            return ("gravity", _DIRS[int(rng.integers(4))])
        return ("count_row",)
    r = rng.random()
    if r < 0.4:
        return ("crop",)
    if r < 0.7:
        return ("scale", int(rng.integers(2, 4)))
    return ("tile", *_TILES[int(rng.integers(len(_TILES)))])


_FAMILY_OF = {n: "dihedral" for n in _DIHEDRAL} | {
    "keep_largest": "keep",
    "keep_smallest": "keep",
}
_OPPOSITE = {"down": "up", "up": "down", "left": "right", "right": "left"}


def _sample_program(p: Mapping[str, Any], rng: np.random.Generator) -> list[Op]:
    kinds = p["kinds"]
    for _ in range(50):
        prog: list[Op] = []
        for _j in range(p["depth"]):
            prog.append(_sample_op(kinds[int(rng.integers(len(kinds)))], rng))
        fams = [_FAMILY_OF.get(op[0], op[0]) for op in prog]
        if any(op[0] == "count_row" for op in prog[:-1]):
            continue
        repeated = {f for f in fams if fams.count(f) > 1} - {"recolour", "swap", "translate"}
        if repeated:
            continue
        # two shifts make a diagonal one; the same or opposite shifts would be reducible
        shifts = [op[1] for op in prog if op[0] == "translate"]
        if len(shifts) > 2 or (len(shifts) == 2 and shifts[1] in (shifts[0], _OPPOSITE[shifts[0]])):
            continue
        sizey = any(op[0] in ("crop", "scale", "tile", "count_row") for op in prog)
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


def _pad_all(grids: list[Grid], rng: np.random.Generator, growth: int) -> list[Grid]:
    top, bottom, left, right = (int(v) for v in rng.integers(0, 2, size=4))
    if top + bottom + left + right == 0:
        bottom = right = 1
    out = [np.pad(g, ((top, bottom), (left, right))) for g in grids]
    if any(max(g.shape) * growth > MAX_SIDE or max(g.shape) > 15 for g in out):
        raise Rejected("canvas would be too large")
    return out


def _near_miss_choices(
    program: Sequence[Sequence[Any]],
    test: Grid,
    answer: Grid,
    n: int,
    rng: np.random.Generator,
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
        if out is None or max(out.shape) > MAX_SIDE:
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


def _credit(grids: Sequence[Grid]) -> float:
    """Mean credit of choice 0 under the two choices-only shortcuts of the bank audit.

    Majority vote: per cell position, the choices holding the most common value score a point.
    Centroid: per cell position, each choice scores the number of choices sharing its value.
    A position outside a smaller grid holds the value "absent". A shortcut whose ``t`` tied
    favourites include choice 0 credits ``1/t``.
    """
    h = max(g.shape[0] for g in grids)
    w = max(g.shape[1] for g in grids)
    stack = np.full((len(grids), h, w), -1, np.int8)
    for k, g in enumerate(grids):
        stack[k, : g.shape[0], : g.shape[1]] = g
    flat = stack.reshape(len(grids), -1)
    counts = (flat[:, None, :] == flat[None, :, :]).sum(axis=1)
    majority = (counts == counts.max(axis=0)).sum(axis=1)
    centroid = counts.sum(axis=1)
    credit = 0.0
    for score in (majority, centroid):
        top = score == score.max()
        if top[0]:
            credit += 0.5 / top.sum()
    return credit


def _siblings(op: Sequence[Any]) -> list[list[Any]]:
    name = op[0]
    if name in _DIHEDRAL:
        return [[n] for n in _DIHEDRAL if n != name]
    if name in ("translate", "gravity"):
        return [[name, d] for d in _DIRS if d != op[1]]
    if name == "recolour":
        return [["recolour", op[1], c] for c in range(10) if c not in (op[1], op[2])][:3] + [
            ["swap", *sorted((op[1], op[2]))]
        ] * (op[2] != 0)
    if name == "swap":
        return [["recolour", op[1], op[2]], ["recolour", op[2], op[1]]]
    if name == "fill":
        return [["fill", c] for c in range(1, 10) if c != op[1]][:3]
    if name == "keep_largest":
        return [["keep_smallest"]]
    if name == "keep_smallest":
        return [["keep_largest"]]
    if name == "scale":
        return [["scale", 5 - op[1]]]
    if name == "tile":
        return [["tile", r, c] for r, c in _TILES if [r, c] != list(op[1:])]
    return []


def _perturb(g: Grid, rng: np.random.Generator, *, cells: int) -> Grid:
    out = g.copy()
    for _ in range(cells):
        r, c = int(rng.integers(g.shape[0])), int(rng.integers(g.shape[1]))
        out[r, c] = (int(out[r, c]) + int(rng.integers(1, 10))) % 10
    return out


def _recolour_answer(g: Grid, rng: np.random.Generator) -> Grid:
    present = [c for c in _colours([g])]
    if not present:
        return _perturb(g, rng, cells=1)
    a = present[int(rng.integers(len(present)))]
    b = [c for c in range(1, 10) if c != a][int(rng.integers(8))]
    return _recolour(g, a, b)


def _classify(item: Item, r: Grid) -> str:
    test = _arr(item.stimulus["test"])
    answer = _arr(item.answer)
    if r.shape == test.shape and np.array_equal(r, test):
        return "identity_copy"
    program = item.stimulus["program"]
    for j in range(1, len(program)):
        for part in itertools.combinations(program, j):
            out = apply_program(test, list(part))
            if out is not None and out.shape == r.shape and np.array_equal(out, r):
                return "partial"
    if r.shape != answer.shape:
        return "wrong_size"
    if np.array_equal(r != 0, answer != 0):
        return "wrong_colours"
    if (r == answer).mean() >= 0.5:
        return "wrong_content"
    return "other"


# -- drawing ------------------------------------------------------------------------------------
def _draw_grid(
    ax: Any, grid: Sequence[Sequence[int]], labels: bool, title: str, box: tuple[int, int]
) -> None:
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import Rectangle

    g = np.asarray(grid)
    h, w = g.shape
    bh, bw = box
    ax.set_xlim(0, bw)
    ax.set_ylim(bh, 0)
    ax.set_aspect("equal")
    ax.axis("off")
    ox, oy = (bw - w) / 2, (bh - h) / 2
    fs = max(3.0, 70.0 / max(bh, bw))
    # one collection per colour (with that colour's hatch) keeps drawing fast
    for v in np.unique(g).tolist():
        rows, cols = np.nonzero(g == v)
        cells = [Rectangle((ox + c, oy + r), 1, 1) for r, c in zip(rows, cols, strict=True)]
        ax.add_collection(
            PatchCollection(
                cells,
                facecolor=PALETTE[v],
                edgecolor="#6b6b6b",
                linewidth=0.3,
                hatch=_HATCHES[v] or None,
            )
        )
    if labels:
        for r in range(h):
            for c in range(w):
                v = int(g[r, c])
                ax.text(
                    ox + c + 0.5,
                    oy + r + 0.5,
                    str(v),
                    ha="center",
                    va="center",
                    fontsize=fs,
                    color="white" if v in (1, 4, 6, 8) else "black",
                )
    ax.add_patch(Rectangle((ox, oy), w, h, fill=False, edgecolor="black", linewidth=1.0))
    ax.set_title(title, fontsize=7, pad=2)


def _draw(item: Item, mode: str, fig: Figure, *, labels: bool) -> None:
    st = item.stimulus
    rows: list[tuple[tuple[Any, str], tuple[Any, str] | None]] = [
        ((p["input"], f"example {i} in"), (p["output"], f"example {i} out"))
        for i, p in enumerate(st["train"], start=1)
    ]
    rows.append(((st["test"], "test in"), None))
    choices = list(item.choices or ()) if mode == "select" else []
    # one cell size for the whole picture, so sizes can be compared across grids
    every = [st["test"], *choices, *(p[k] for p in st["train"] for k in ("input", "output"))]
    side = (max(len(g) for g in every), max(len(g[0]) for g in every))
    per_row = min(len(choices), 6) if choices else 1
    choice_rows = -(-len(choices) // per_row)
    n_rows = len(rows) + choice_rows
    cell_h = 0.96 / n_rows
    for i, (left, right) in enumerate(rows):
        y = 1 - (i + 1) * cell_h
        ax = fig.add_axes((0.08, y + 0.01, 0.38, cell_h - 0.03))
        _draw_grid(ax, left[0], labels, left[1], side)
        ax2 = fig.add_axes((0.54, y + 0.01, 0.38, cell_h - 0.03))
        if right is None:
            ax2.axis("off")
            ax2.text(0.5, 0.5, "?", ha="center", va="center", fontsize=28)
        else:
            _draw_grid(ax2, right[0], labels, right[1], side)
        fig.text(0.5, y + cell_h / 2, "\u2192", ha="center", va="center", fontsize=16)
    wdt = 0.96 / per_row
    for k, ch in enumerate(choices):
        r, c = divmod(k, per_row)
        y = 1 - (len(rows) + r + 1) * cell_h
        ax = fig.add_axes((0.02 + c * wdt, y + 0.01, wdt - 0.02, cell_h - 0.03))
        _draw_grid(ax, ch, labels, f"choice {k + 1}", side)


register(GridsFamily())
