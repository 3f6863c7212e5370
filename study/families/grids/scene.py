"""What a ``grids`` item looks like: one :class:`~twofold.study.scene.Scene` for pictures and
screens alike.

Layout (scene units, about :data:`~twofold.study.scene.DESIGN_BOX`): the worked examples run in a
strip across the top, each a column with its ``before`` grid above a downward arrow and its
``after`` grid; below a rule, the probe sits on the left with an arrow to the answer space on its
right (generate mode: an empty frame the size of the largest answer; select mode: the choices in
a row, each in a frame with its number badge above the frame). Every grid of an item has the same
cell size, so sizes can be compared across grids; the cell is the largest (up to
:data:`MAX_CELL`) at which the whole item fits.

The size cap
------------
:data:`SIDE_CAP` is the largest side at which a whole item with four examples and four choices
(or the answer frame) fits the design box at the smallest legible cell (``MIN_CELL`` = 12):

- height: margin 12 + label 22 + before N*12 + arrow 28 + after N*12 + rule gap 16 + label 22 +
  probe/answer N*12 + margin 12 = 112 + 36 N <= 560, so N <= 12.4;
- width (examples): 4 columns N*12 + 3 gaps 16 + 2 margins 12 = 72 + 48 N <= 960, so N <= 18.5;
- width (choices): probe N*12 + arrow 40 + 4 frames (N*12 + 12) + 3 gaps 16 + 2 margins 12 =
  160 + 60 N <= 960, so N <= 13.3.

Hence ``SIDE_CAP = 12``; :func:`side_cap` computes the same for other numbers of examples and
choices, and the generator keeps every grid of an item within it.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from ...item import Item
from ...scene import (
    DESIGN_BOX,
    MIN_CELL,
    Element,
    Grid,
    Line,
    Response,
    Scene,
    Shape,
    Slot,
    Text,
    rect,
)
from .legacy import colours_of, native

MARGIN = 12.0
LABEL = 22.0  #: the band above a grid for its label or badge
ARROW = 28.0  #: the gap between a before grid and its after grid (holds the arrow)
GAP = 16.0  #: between example columns, between choices, and around the rule
SIDE_ARROW = 40.0  #: between the probe and the answer space
PAD = 6.0  #: inside a choice frame, around the choice grid
MAX_CELL = 28.0  #: largest cell size (small grids stop growing here)
LABEL_SIZE = 18.0
BADGE_SIZE = 18.0  #: its box (1.2 x size) fits the label band
INK = "#1a1a1a"
FRAME = "#4d4d4d"

Shape2 = tuple[int, int]


def _shape(g: Sequence[Sequence[int]]) -> Shape2:
    return (len(g), len(g[0]) if g else 0)


@dataclasses.dataclass
class _Plan:
    examples: list[tuple[Shape2, Shape2]]
    probe: Shape2
    answer: Shape2 | None  # generate: the answer frame (rows, cols)
    choices: list[Shape2]

    def extent(self, c: float) -> tuple[float, float]:
        """(width, height) of the whole layout at cell size ``c``."""
        cols = [max(b[1], a[1]) * c for b, a in self.examples]
        cols = [max(w, _label_w(f"Example {k}")) for k, w in enumerate(cols, start=1)]
        top_w = sum(cols) + GAP * (len(cols) - 1)
        hb = max(b[0] for b, _ in self.examples) * c
        ha = max(a[0] for _, a in self.examples) * c
        top_h = LABEL + hb + ARROW + ha
        probe_w = max(self.probe[1] * c, _label_w("Your grid"))
        if self.answer is not None:
            right_w = max(self.answer[1] * c, _label_w("Your answer"))
            low_h = max(self.probe[0], self.answer[0]) * c
        else:
            fw, fh = self.frame(c)
            right_w = len(self.choices) * fw + GAP * (len(self.choices) - 1)
            low_h = max(self.probe[0] * c, fh)
        bottom_w = probe_w + SIDE_ARROW + right_w
        width = 2 * MARGIN + max(top_w, bottom_w)
        height = 2 * MARGIN + top_h + GAP + LABEL + low_h
        return width, height

    def frame(self, c: float) -> tuple[float, float]:
        rows = max(s[0] for s in self.choices)
        cols = max(s[1] for s in self.choices)
        return (cols * c + 2 * PAD, rows * c + 2 * PAD)

    def cell(self, box: tuple[float, float] = DESIGN_BOX) -> float:
        """The largest cell size (in steps of 0.5, at most :data:`MAX_CELL`) that fits ``box``;
        below ``MIN_CELL`` only for grids larger than the cap (version 1 items)."""
        c = MAX_CELL
        while c > 1.0:
            w, h = self.extent(c)
            if w <= box[0] + 1e-9 and h <= box[1] + 1e-9:
                return c
            c -= 0.5
        return 1.0


def _label_w(text: str) -> float:
    return len(text) * LABEL_SIZE * 0.62


def side_cap(n_examples: int, n_choices: int, box: tuple[float, float] = DESIGN_BOX) -> int:
    """The largest side N such that an item whose every grid is N x N (``n_examples`` examples;
    ``n_choices`` choices, or the N x N answer frame when 0) fits ``box`` at ``MIN_CELL``."""
    n = 1
    while True:
        s = (n + 1, n + 1)
        plan = _Plan([(s, s)] * n_examples, s, None if n_choices else s, [s] * n_choices)
        w, h = plan.extent(MIN_CELL)
        if w > box[0] + 1e-9 or h > box[1] + 1e-9:
            return n
        n += 1


#: the largest side of any grid of a version 2 item (see the module notes for the arithmetic)
SIDE_CAP = side_cap(4, 4)


def max_size(item: Item) -> tuple[int, int]:
    """The largest answer a person can paint for ``item``: [rows, cols]."""
    st = native(item.stimulus)
    grids = [st["probe"], *(g for p in st["examples"] for g in (p["before"], p["after"]))]
    biggest = max(max(_shape(g)) for g in grids)
    return (max(SIDE_CAP, biggest), max(SIDE_CAP, biggest))


def _plan(item: Item, mode: str) -> _Plan:
    st = native(item.stimulus)
    ex = [(_shape(p["before"]), _shape(p["after"])) for p in st["examples"]]
    if mode == "select":
        return _Plan(ex, _shape(st["probe"]), None, [_shape(g) for g in item.choices or ()])
    return _Plan(ex, _shape(st["probe"]), max_size(item), [])


def cell_size(item: Item, mode: str) -> float:
    """The one cell size of every grid of ``item``'s scene in ``mode``."""
    return _plan(item, mode).cell()


def _grid(
    item: Item, cells: Sequence[Sequence[int]], x: float, y: float, c: float, role: str
) -> Grid:
    col = colours_of(item)
    return Grid(
        x,
        y,
        tuple(tuple(int(v) for v in row) for row in cells),
        c,
        col["palette"],
        col["hatches"],
        marks=col["inks"],
        line="#8a8a8a",
        role=role,
    )


def _down_arrow(cx: float, y0: float, y1: float) -> list[Element]:
    """An arrow pointing down from ``y0`` to ``y1`` (``y0 > y1``)."""
    head = 7.0
    return [
        Line(((cx, y0), (cx, y1 + head)), INK, 2.0, role="arrow"),
        Shape(((cx - head, y1 + head), (cx + head, y1 + head), (cx, y1)), INK, None, role="arrow"),
    ]


def _right_arrow(x0: float, x1: float, cy: float) -> list[Element]:
    head = 8.0
    return [
        Line(((x0, cy), (x1 - head, cy)), INK, 2.0, role="arrow"),
        Shape(((x1 - head, cy - head), (x1 - head, cy + head), (x1, cy)), INK, None, role="arrow"),
    ]


def scene(item: Item, mode: str) -> Scene:
    """The item in ``mode`` as a scene (never shows the answer)."""
    st = native(item.stimulus)
    plan = _plan(item, mode)
    c = plan.cell()
    width, height = DESIGN_BOX
    used_w, used_h = plan.extent(c)
    x_left = (width - used_w) / 2 + MARGIN
    top = height - (height - used_h) / 2 - MARGIN
    els: list[Element] = []
    # -- the strip of worked examples
    hb = max(b[0] for b, _ in plan.examples) * c
    ha = max(a[0] for _, a in plan.examples) * c
    x = x_left
    for k, pair in enumerate(st["examples"], start=1):
        b, a = _shape(pair["before"]), _shape(pair["after"])
        col_w = max(max(b[1], a[1]) * c, _label_w(f"Example {k}"))
        cx = x + col_w / 2
        els.append(Text(cx, top - LABEL / 2, f"Example {k}", LABEL_SIZE, INK, role="label"))
        y_b = top - LABEL
        els.append(_grid(item, pair["before"], cx - b[1] * c / 2, y_b, c, "before"))
        y_a = y_b - hb - ARROW
        els += _down_arrow(cx, y_b - b[0] * c - 4, y_a + 4)
        els.append(_grid(item, pair["after"], cx - a[1] * c / 2, y_a, c, "after"))
        x += col_w + GAP
    # -- a rule between the examples and the task
    rule_y = top - LABEL - hb - ARROW - ha - GAP / 2
    els.append(Line(((x_left, rule_y), (x_left + used_w - 2 * MARGIN, rule_y)), "#b5b5b5", 1.0))
    low_top = rule_y - GAP / 2
    y_grid = low_top - LABEL
    probe = _shape(st["probe"])
    probe_w = max(probe[1] * c, _label_w("Your grid"))
    pcx = x_left + probe_w / 2
    els.append(Text(pcx, low_top - LABEL / 2, "Your grid", LABEL_SIZE, INK, role="label"))
    els.append(_grid(item, st["probe"], pcx - probe[1] * c / 2, y_grid, c, "probe"))
    x_right = x_left + probe_w + SIDE_ARROW
    slots: list[Slot] = []
    col = colours_of(item)
    if mode == "select":
        fw, fh = plan.frame(c)
        low_h = max(probe[0] * c, fh)
        els += _right_arrow(x_left + probe_w + 8, x_right - 8, y_grid - low_h / 2)
        for k, choice in enumerate(item.choices or (), start=1):
            fx = x_right + (k - 1) * (fw + GAP)
            els.append(Shape(rect(fx, y_grid - fh, fx + fw, y_grid), None, FRAME, 1.5, "frame"))
            els.append(
                Text(fx + 2, y_grid + 0.2, str(k), BADGE_SIZE, INK, anchor="left",
                     valign="bottom", bold=True, role="badge")
            )  # fmt: skip
            s = _shape(choice)
            gx = fx + fw / 2 - s[1] * c / 2
            gy = y_grid - fh / 2 + s[0] * c / 2
            els.append(_grid(item, choice, gx, gy, c, "choice"))
            slots.append(Slot(f"choice:{k}", fx + fw / 2, y_grid - fh / 2, fw, fh))
        response = Response("choose", {"n": len(item.choices or ())})
        answer_box = None
    else:
        rows, cols = max_size(item)
        bw, bh = cols * c, rows * c
        low_h = max(probe[0] * c, bh)
        els += _right_arrow(x_left + probe_w + 8, x_right - 8, y_grid - low_h / 2)
        acx = x_right + max(bw, _label_w("Your answer")) / 2
        els.append(Text(acx, low_top - LABEL / 2, "Your answer", LABEL_SIZE, INK, role="label"))
        answer_box = (acx - bw / 2, y_grid - bh, acx + bw / 2, y_grid)
        els.append(Shape(rect(*answer_box), "#ffffff", FRAME, 1.5, "answer-frame"))
        response = Response(
            "paint",
            {
                "start": [list(r) for r in st["probe"]],
                "palette": list(col["palette"]),
                "hatches": list(col["hatches"]),
                "labels": list(col["labels"]),
                "inks": list(col["inks"]),
                "names": list(col["names"]),
                "empty": 0,
                "cell": c,
                "max_size": [rows, cols],
            },
        )
    return Scene(
        width,
        height,
        tuple(els),
        slots=tuple(slots),
        response=response,
        answer_box=answer_box,
    )


def answer_scene(item: Item, mode: str, answer: Any) -> Scene:
    """``answer`` (a grid, or a choice number in select mode) painted at the item's cell size.

    In generate mode the scene is the size of the answer box and the grid sits at its top left
    (where a painted answer grows from); any rectangular grid of indices 0-9 is accepted.
    """
    c = cell_size(item, mode)
    if mode == "select":
        if isinstance(answer, int) and not isinstance(answer, bool):
            answer = (item.choices or [])[answer - 1]
        s = _shape(answer)
        w, h = s[1] * c + 2 * PAD, s[0] * c + 2 * PAD
        return Scene(w, h, (_grid(item, answer, PAD, h - PAD, c, "answer"),))
    rows, cols = max_size(item)
    w, h = cols * c, rows * c
    return Scene(w, h, (_grid(item, answer, 0.0, h, c, "answer"),))
