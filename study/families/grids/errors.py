"""Error types of the ``grids`` family: classification of wrong answers and sampling of
plausible wrong ones."""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from typing import Any

import numpy as np

from ...item import Item
from .legacy import native
from .operations import _DIHEDRAL, _DIRS, _TILES, Grid, _recolour, apply_program
from .search import _colours
from .text import _arr


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
    if name == "keep-largest":
        return [["keep-smallest"]]
    if name == "keep-smallest":
        return [["keep-largest"]]
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
    st = native(item.stimulus)
    test = _arr(st["probe"])
    answer = _arr(item.answer)
    if r.shape == test.shape and np.array_equal(r, test):
        return "copy-of-probe"
    program = st["program"]
    for j in range(1, len(program)):
        for part in itertools.combinations(program, j):
            out = apply_program(test, list(part))
            if out is not None and out.shape == r.shape and np.array_equal(out, r):
                return "part-of-rule"
    if r.shape != answer.shape:
        return "wrong-size"
    if np.array_equal(r != 0, answer != 0):
        return "wrong-colours"
    if (r == answer).mean() >= 0.5:
        return "wrong-cells"
    return "other"
