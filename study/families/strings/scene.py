"""What a ``strings`` item looks like: one :class:`~twofold.study.scene.Scene` per item and mode.

Layout (ours), top to bottom: the symbol order as a key strip (it wraps round), the example (the
source, an arrow, the changed source), the new string with an arrow pointing at the place of the
answer, then the numbered choices (``select``) or the box where the typed answer appears
(``generate``). Every string is a row of equal cells, one symbol per cell in a monospaced font, so
symbols are evenly spaced in every symbol order. When the example does not fit on one row at a
legible cell size, its two strings (and the new string and its answer) go on rows of their own.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from ...item import Item
from ...scene import DESIGN_BOX, Element, Line, Response, Scene, Shape, Slot, Text, rect
from .._base import Family

__all__ = ["MAX_CELL", "MIN_STRING_CELL", "is_typeable"]

#: the largest and the smallest cell of a string (the smallest still holds an 18-unit symbol)
MAX_CELL = 46.0
MIN_STRING_CELL = 24.0
_M = 14.0  # margin
_CAPTION = 18.0  # caption letter height
_CAP_H = 26.0  # a caption line
_ARROW = 56.0  # room for an arrow between two strings
_GAP = 12.0
_ROW_GAP = 6.0  # between the two rows of a stacked pair
_BADGE = 34.0  # room left of a choice box for its number
_PAD = 5.0  # inside a choice box
_INK = "#1f2430"
_CELL_FILL = "#ffffff"
_CELL_EDGE = "#77736a"
_ACCENT = "#2b5d7a"
_KEY_FILL = "#eef1f4"


def is_typeable(symbols: str) -> bool:
    """Whether a symbol order can be typed on a keyboard (ASCII letters and digits)."""
    return symbols.isascii() and symbols.isalnum()


def _glyph_size(cell: float) -> float:
    return max(18.0, min(0.62 * cell, 30.0))


def _string_cells(
    text: str, x: float, y: float, cell: float, *, fill: str = _CELL_FILL, role: str = "cell"
) -> list[Element]:
    """``text`` as a row of cells whose lower-left corner is ``(x, y)``."""
    out: list[Element] = []
    size = _glyph_size(cell)
    for k, ch in enumerate(text):
        x0 = x + k * cell
        out.append(Shape(rect(x0, y, x0 + cell, y + cell), fill, _CELL_EDGE, 1.0, role=role))
        out.append(
            Text(x0 + cell / 2, y + cell / 2, ch, size, colour=_INK, font="mono", role="symbol")
        )
    return out


def _wrapped_cells(text: str, x: float, y_top: float, cell: float, per_line: int) -> list[Element]:
    """``text`` as rows of at most ``per_line`` cells, the first row's top at ``y_top``."""
    out: list[Element] = []
    for r, k in enumerate(range(0, max(len(text), 1), per_line)):
        out += _string_cells(text[k : k + per_line], x, y_top - (r + 1) * cell, cell)
    return out


def _arrow(x0: float, x1: float, y: float) -> list[Element]:
    head = 10.0
    return [
        Line(((x0, y), (x1 - head, y)), _ACCENT, 3.0, role="arrow"),
        Shape(((x1 - head, y - 7), (x1, y), (x1 - head, y + 7)), _ACCENT, None, 0.0, role="arrow"),
    ]


class _Plan:
    """Cell sizes and row layout of an item in a mode."""

    def __init__(self, st: dict[str, Any], choices: Sequence[str], mode: str):
        w, h = DESIGN_BOX
        width = w - 2 * _M
        ls, lc, lt = len(st["source"]), len(st["changed"]), len(st["target"])
        self.n_key = len(st["symbols"])
        self.key = min(36.0, width / self.n_key)
        side = min(MAX_CELL, (width - _ARROW) / (ls + lc), (width - _ARROW) / (2 * lt + 3))
        self.side_by_side = side >= 30.0
        top = _M + _CAP_H + self.key + _GAP
        n = len(choices)
        self.cols = 1 if n <= 2 else (2 if n <= 8 else 3)
        col_w = (width - (self.cols - 1) * _GAP) / self.cols
        inner = col_w - _BADGE - 2 * _PAD
        cell = side if self.side_by_side else min(MAX_CELL, width / max(ls, lc, lt + 3))
        cell = max(math.floor(cell), MIN_STRING_CELL)
        while True:
            if self.side_by_side:
                rows_h = 2 * (_CAP_H + cell) + _GAP
            else:
                rows_h = 2 * (_CAP_H + 2 * cell + _ROW_GAP) + _GAP
            if mode == "select":
                cc = min(cell, max(MIN_STRING_CELL, inner / max(len(c) for c in choices)))
                per_line = max(1, int(inner // cc))
                lines = [max(1, -(-len(c) // per_line)) for c in choices]
                box_h = [ln * cc + 2 * _PAD for ln in lines]
                n_rows = -(-n // self.cols)
                grid_h = _CAP_H + sum(
                    max(box_h[r * self.cols : (r + 1) * self.cols]) + 8 for r in range(n_rows)
                )
            else:
                cc, per_line, box_h, grid_h = cell, 1, [], _CAP_H
            if top + rows_h + grid_h + _M <= h or cell <= MIN_STRING_CELL:
                break
            cell -= 2.0
        self.cell, self.choice_cell, self.per_line, self.box_h = cell, cc, per_line, box_h
        self.col_w, self.top = col_w, top


class StringsScene(Family):
    """Scenes of strings items (a part of :class:`StringsFamily`)."""

    def _plan(self, item: Item, mode: str) -> _Plan:
        choices = [str(c) for c in item.choices or ()] if mode == "select" else []
        return _Plan(item.stimulus, choices, mode)

    def scene(self, item: Item, mode: str) -> Scene:
        st = item.stimulus
        w, h = DESIGN_BOX
        p = self._plan(item, mode)
        els: list[Element] = []
        y = h - _M
        els.append(
            Text(
                _M,
                y - _CAP_H / 2,
                "Symbol order (it wraps round: after the last comes the first)",
                _CAPTION,
                anchor="left",
                role="caption",
            )
        )
        y -= _CAP_H
        els += _string_cells(st["symbols"], _M, y - p.key, p.key, fill=_KEY_FILL, role="key")
        y -= p.key + _GAP
        c = p.cell
        ask = "type what it becomes" if mode == "generate" else "which choice does it become?"

        def caption(text: str) -> None:
            els.append(
                Text(_M, y - _CAP_H / 2, text, _CAPTION, anchor="left", bold=True, role="caption")
            )

        def pair(first: str, second: str | None) -> float:
            """``first`` -> ``second`` on one row (``second`` None: an arrow to the answer place)
            at the current height; returns the x where the row's right-hand string starts."""
            els.extend(_string_cells(first, _M, y, c))
            x = _M + len(first) * c
            els.extend(_arrow(x + 8, x + _ARROW - 8, y + c / 2))
            if second is not None:
                els.extend(_string_cells(second, x + _ARROW, y, c))
            return x + _ARROW

        if p.side_by_side:
            caption("Example")
            y -= _CAP_H + c
            pair(st["source"], st["changed"])
            y -= _GAP
            caption(f"New string: {ask}")
            y -= _CAP_H + c
            ax = pair(st["target"], None)
        else:
            # the example's two strings one above the other, and the new string above its answer
            caption("Example: the upper row becomes the lower row")
            y -= _CAP_H + c
            els += _string_cells(st["source"], _M, y, c)
            y -= _ROW_GAP + c
            els += _string_cells(st["changed"], _M, y, c)
            y -= _GAP
            caption(f"New string (upper row): {ask}")
            y -= _CAP_H + c
            els += _string_cells(st["target"], _M, y, c)
            y -= _ROW_GAP + c
            ax = _M
        box = (ax, y, w - _M, y + c)
        slots: list[Slot] = []
        if mode == "select":
            els.append(
                Shape(rect(ax, y, ax + c, y + c), _CELL_FILL, _ACCENT, 2.0, role="answer-place")
            )
            els.append(
                Text(
                    ax + c / 2,
                    y + c / 2,
                    "?",
                    _glyph_size(c),
                    colour=_ACCENT,
                    bold=True,
                    role="answer-place",
                )
            )
            y -= _GAP
            els.append(
                Text(
                    _M,
                    y - _CAP_H / 2,
                    "Choices",
                    _CAPTION,
                    anchor="left",
                    bold=True,
                    role="caption",
                )
            )
            y -= _CAP_H
            choices = [str(ch) for ch in item.choices or ()]
            cc = p.choice_cell
            for r in range(0, len(choices), p.cols):
                row_h = max(p.box_h[r : r + p.cols])
                for k in range(r, min(r + p.cols, len(choices))):
                    x0 = _M + (k - r) * (p.col_w + _GAP) + _BADGE
                    x1 = _M + (k - r) * (p.col_w + _GAP) + p.col_w
                    y1, y0 = y, y - p.box_h[k]
                    els.append(
                        Text(
                            x0 - 8,
                            (y0 + y1) / 2,
                            str(k + 1),
                            22.0,
                            anchor="right",
                            bold=True,
                            colour=_ACCENT,
                            role="badge",
                        )
                    )
                    els.append(Shape(rect(x0, y0, x1, y1), "#f6f4ee", _ACCENT, 1.5, role="frame"))
                    els += _wrapped_cells(choices[k], x0 + _PAD, y1 - _PAD, cc, p.per_line)
                    slots.append(
                        Slot(f"choice:{k + 1}", (x0 + x1) / 2, (y0 + y1) / 2, x1 - x0, y1 - y0)
                    )
                y -= row_h + 8
            return Scene(w, h, tuple(els), tuple(slots), Response("choose", {"n": len(choices)}))
        els.append(Shape(rect(*box), _CELL_FILL, _ACCENT, 2.0, role="answer-frame"))
        symbols = st["symbols"]
        keys = [] if is_typeable(symbols) else list(symbols)
        return Scene(w, h, tuple(els), (), Response("type", {"symbols": keys}), answer_box=box)

    def answer_scene(self, item: Item, mode: str, answer: Any) -> Scene:
        """The answer as a row of cells at the item's cell size (a choice number in select mode
        draws that choice, with its number); any string of symbols is drawn."""
        p = self._plan(item, mode)
        if mode == "select" and isinstance(answer, int) and not isinstance(answer, bool):
            text = str((item.choices or ())[answer - 1])
            c = p.choice_cell
            width = _BADGE + len(text) * c + 2 * _PAD
            els: list[Element] = [
                Text(
                    _BADGE - 8,
                    _PAD + c / 2,
                    str(answer),
                    22.0,
                    anchor="right",
                    bold=True,
                    colour=_ACCENT,
                    role="badge",
                )
            ]
            els += _string_cells(text, _BADGE + _PAD, _PAD, c)
            return Scene(width, c + 2 * _PAD, tuple(els))
        text = "".join(answer) if isinstance(answer, list | tuple) else str(answer)
        c = p.cell
        return Scene(max(len(text), 1) * c, c, tuple(_string_cells(text, 0.0, 0.0, c)))
