"""The operation grammar of the ``grids`` family: grid operations, programs (compositions
of operations) and their descriptions in words."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
from scipy import ndimage

#: Largest side an operation produces (outputs of scale/tile included) and a response may have.
#: Version 1 items reach it; version 2 items stay within the screen-derived cap
#: (:data:`~twofold.study.families.grids.scene.SIDE_CAP`).
MAX_SIDE = 30

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


#: name -> ``(kind, function(grid, *args) -> grid or None when not applicable)``
OPS: dict[str, tuple[str, Callable[..., Grid | None]]] = {
    "flip-lr": ("geometric", lambda g: g[:, ::-1]),
    "flip-ud": ("geometric", lambda g: g[::-1, :]),
    "rot90": ("geometric", lambda g: np.rot90(g, 1)),
    "rot180": ("geometric", lambda g: g[::-1, ::-1]),
    "rot270": ("geometric", lambda g: np.rot90(g, 3)),
    "transpose": ("geometric", lambda g: g.T),
    "translate": ("geometric", _translate),
    "recolour": ("colour", _recolour),
    "swap": ("colour", _swap),
    "fill": ("colour", _fill),
    "keep-largest": ("object", lambda g: _keep(g, True)),
    "keep-smallest": ("object", lambda g: _keep(g, False)),
    "gravity": ("object", _gravity),
    "count-row": ("object", _count_row),
    "crop": ("size", _crop),
    "scale": ("size", _scale),
    "tile": ("size", _tile),
}
#: The operation kinds, in the order used by the ``kinds`` parameter.
KINDS = ("geometric", "colour", "object", "size")
_DIHEDRAL = ("flip-lr", "flip-ud", "rot90", "rot180", "rot270", "transpose")
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
    "flip-lr": "mirror left-right",
    "flip-ud": "mirror top-bottom",
    "rot90": "rotate a quarter turn anticlockwise",
    "rot180": "rotate a half turn",
    "rot270": "rotate a quarter turn clockwise",
    "transpose": "reflect across the main diagonal",
    "keep-largest": "keep only the largest object",
    "keep-smallest": "keep only the smallest object",
    "count-row": "count the objects and draw one cell per object in a row",
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
