"""Grids as text: formatting a grid and reading grids out of a reply."""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Any

import numpy as np

from .operations import MAX_SIDE, Grid


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
            isinstance(v, int) and not isinstance(v, bool) and 0 <= v <= 9 for r in val for v in r
        )
    )


def _arr(grid: Sequence[Sequence[int]]) -> Grid:
    return np.asarray(grid, dtype=np.int8)


def _lst(g: Grid) -> list[list[int]]:
    return [[int(v) for v in row] for row in g]
