"""What a ``contrast`` item looks like: one :class:`~twofold.study.scene.Scene` per item and mode.

Layout (ours): a full-width band "Set A" above a full-width band "Set B", each holding its panels
in rows; in ``select`` mode a band of test panels follows, each with its number and a free box
under it where the chosen label appears. In ``generate`` mode only the two bands are shown, with a
line saying what to type and the box where the typed rule appears.

Every panel is drawn at the same size (sizes are compared across panels), as a 3x3 grid of cells
with faint guides. An object is scaled by the radius of the circle around it, so it stays inside
its cell at any rotation (tilted objects included) and an upright and a tilted object of one size
are the same size. Nested objects sit in the circle inscribed in their container. Fills come from
a light / mid / dark ramp (:data:`SHADES`); edges, solid or dashed, are drawn in whichever of two
inks contrasts more with what lies behind the object (the panel, or the container's fill).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from ...colour import contrast_ratio
from ...item import Item
from ...scene import (
    DESIGN_BOX,
    Element,
    Line,
    Response,
    Scene,
    Shape,
    Slot,
    Text,
    dash,
    polygon,
    rect,
    wrap,
)
from .._base import Family
from .evaluation import _obj_dict
from .notation import VALUES

__all__ = [
    "INKS",
    "PANEL",
    "SHADES",
    "SIZE_SCALE",
    "TILT_DEGREES",
    "object_outline",
]

#: the one tilt of a ``tilted`` object, in degrees clockwise (pictures and screens alike)
TILT_DEGREES = 30.0
#: fills of the shades light, mid and dark: a warm grey ramp of our own whose neighbouring steps
#: differ by a contrast ratio of at least 2.2 (tested)
SHADES: dict[str, str] = {"light": "#e4dccb", "mid": "#9c8f78", "dark": "#3b3631"}
#: the two edge inks: an edge is drawn in the one that contrasts more with what lies behind it
INKS = ("#1b1d24", "#ffffff")
#: panel background
PANEL = "#ffffff"
#: object radius (of the circle around it) as a fraction of the largest that fits the cell
SIZE_SCALE: dict[str, float] = {"small": 0.55, "medium": 0.77, "large": 1.0}

_BAND = {"A": "#e6efe8", "B": "#f1e6ec", "T": "#ecebe6"}  # band tints
_SET_INK = {"A": "#2d6a3e", "B": "#7b3b62", "T": "#3d3d3d"}  # band labels and panel frames
_GUIDE = "#e6e2d9"
_MARGIN = 10.0
_LABEL_COL = 104.0  # the column holding the band names
_GAP = 8.0  # between panels
_BAND_PAD = 6.0  # inside a band, around its panels
_BAND_GAP = 8.0  # between bands
_LABEL_AREA = 34.0  # under a test panel: its number and the box for the chosen label
_PANEL_PAD = 4.0  # inside a panel frame, around the 3x3 cells
_CELL_PAD = 1.5  # inside a cell, around its object
_EDGE = 2.0  # solid edge width
_DASH = (5.0, 3.5)  # dashed edge: on, off
_HALO = 3.5  # how far a dashed edge runs outside its object
_LABEL_SIZE = 22.0  # band names
_SMALL = 18.0  # test numbers, prompts

# unit outlines, each centred on the centre of the circle around it
_SQUARE = ((-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0))
_TRIANGLE = tuple(
    (math.cos(math.radians(90 + 120 * k)), math.sin(math.radians(90 + 120 * k))) for k in range(3)
)
_ARM = 0.42
_CROSS = (
    (-_ARM, 1.0),
    (_ARM, 1.0),
    (_ARM, _ARM),
    (1.0, _ARM),
    (1.0, -_ARM),
    (_ARM, -_ARM),
    (_ARM, -1.0),
    (-_ARM, -1.0),
    (-_ARM, -_ARM),
    (-1.0, -_ARM),
    (-1.0, _ARM),
    (-_ARM, _ARM),
)
# dome: an arch (a semicircle on a square base)
_DOME = ((-1.0, -1.0), (1.0, -1.0)) + tuple(
    (math.cos(math.pi * k / 16), math.sin(math.pi * k / 16)) for k in range(17)
)
_OUTLINES = {"square": _SQUARE, "triangle": _TRIANGLE, "cross": _CROSS, "dome": _DOME}
#: radius of the circle around each outline and of the circle inside it (a nested object's room)
_OUTER = {k: max(math.hypot(x, y) for x, y in v) for k, v in _OUTLINES.items()}
_INNER = {"square": 1.0, "triangle": 0.5, "cross": math.sqrt(2) * _ARM, "dome": 1.0}


def _ink(behind: str) -> str:
    return max(INKS, key=lambda c: contrast_ratio(c, behind))


def object_outline(obj: Mapping[str, Any], cx: float, cy: float, radius: float) -> tuple:
    """The outline of an object (a dict as in the structured view) whose surrounding circle has
    ``radius`` and centre ``(cx, cy)``, tilted by :data:`TILT_DEGREES` when ``tilted``."""
    shape = str(obj["shape"])
    rot = -TILT_DEGREES if obj["tilt"] == "tilted" else 0.0
    return polygon(_OUTLINES[shape], cx, cy, radius / _OUTER[shape], rot)


def _panel_elements(
    objs: Sequence[Any], x0: float, y0: float, side: float, frame: str, frame_width: float
) -> list[Element]:
    """A panel with its lower-left corner at ``(x0, y0)``: frame, guides and objects."""
    out: list[Element] = [
        Shape(rect(x0, y0, x0 + side, y0 + side), PANEL, frame, frame_width, role="panel")
    ]
    cell = (side - 2 * _PANEL_PAD) / 3
    gx, gy = x0 + _PANEL_PAD, y0 + _PANEL_PAD
    guides: list[tuple[float, float]] = []
    for k in (1, 2):
        guides += [(gx + k * cell, gy), (gx + k * cell, gy + 3 * cell)]
        guides += [(gx, gy + k * cell), (gx + 3 * cell, gy + k * cell)]
    out.append(Line(tuple(guides), _GUIDE, 1.0, role="guide", segments=True))
    dicts = [_obj_dict(o) for o in objs]
    room = cell / 2 - _CELL_PAD - _HALO - _EDGE / 2
    placed: dict[int, tuple[float, float, float]] = {}  # index -> (cx, cy, radius)
    order = sorted(range(len(dicts)), key=lambda k: dicts[k]["inside"] is not None)
    for k in order:
        o = dicts[k]
        radius = SIZE_SCALE[str(o["size"])] * room
        behind = PANEL
        if o["inside"] is None:
            ci, ri = VALUES["col"].index(o["col"]), VALUES["row"].index(o["row"])
            cx, cy = gx + (ci + 0.5) * cell, gy + (2.5 - ri) * cell
        else:
            host = dicts[int(o["inside"])]
            hx, hy, hr = placed[int(o["inside"])]
            # the circle inside the container (its centre is the outline's centre), less an edge
            space = hr * _INNER[str(host["shape"])] / _OUTER[str(host["shape"])] - _EDGE / 2
            radius = min(radius, space - _EDGE)
            cx, cy = hx, hy
            behind = SHADES[str(host["shade"])]
        placed[k] = (cx, cy, radius)
        pts = object_outline(o, cx, cy, radius)
        ink = _ink(behind)
        fill = SHADES[str(o["shade"])]
        if o["edge"] == "dashed":
            # the dashes run round a free-standing object a little apart from it, so they lie on
            # the panel (and read on light and dark fills alike); round a nested object (no
            # room for that) they run on its outline, in the ink that contrasts with the
            # container's fill
            out.append(Shape(pts, fill, None, 0.0))
            halo = _HALO if o["inside"] is None else 0.0
            ring = object_outline(o, cx, cy, radius + halo)
            out.append(Line(dash(ring, *_DASH), ink, _EDGE, role="edge", segments=True))
        else:
            out.append(Shape(pts, fill, ink, _EDGE))
    return out


class _Layout:
    """Panel size and rows for an item and mode (every panel the same size)."""

    def __init__(self, n_set: int, n_test: int, top: float, bottom: float):
        w, h = DESIGN_BOX
        width = w - 2 * _MARGIN - _LABEL_COL - 2 * _BAND_PAD
        best: tuple[float, int, int] = (0.0, 1, 1)
        for cs in range(1, n_set + 1):
            for ct in range(1, max(n_test, 1) + 1):
                rs, rt = -(-n_set // cs), (-(-n_test // ct) if n_test else 0)
                s_w = min(width / cs, width / ct if n_test else width) - _GAP
                bands = 2 + (1 if n_test else 0)
                fixed = (
                    top
                    + bottom
                    + 2 * _MARGIN
                    + bands * 2 * _BAND_PAD
                    + (bands - 1) * _BAND_GAP
                    + rt * _LABEL_AREA
                    + (2 * rs + rt) * _GAP
                )
                s_h = (h - fixed) / (2 * rs + rt)
                s = min(s_w, s_h)
                if s > best[0] + 1e-9:
                    best = (s, cs, ct)
        self.side, self.cols_set, self.cols_test = best
        self.side = math.floor(self.side)


class ContrastScene(Family):
    """Scenes of contrast items (a part of :class:`ContrastFamily`)."""

    def scene(self, item: Item, mode: str) -> Scene:
        st = item.stimulus
        w, h = DESIGN_BOX
        sets = {s: list(st["sets"][s]) for s in "AB"}
        tests = list(st["test"]) if mode == "select" else []
        n_set = max(len(sets["A"]), len(sets["B"]))
        els: list[Element] = []
        slots: list[Slot] = []
        top = bottom = 0.0
        prompt = None
        if mode == "generate":
            words = (
                "Every panel in set A follows one rule that no panel in set B follows. "
                "Type the rule."
            )
            text = wrap(words, _SMALL, w - 2 * _MARGIN)
            lines = text.count("\n") + 1
            top = _SMALL * (1 + 1.25 * (lines - 1)) * 1.2 + 6
            prompt = Text(
                _MARGIN, h - _MARGIN, text, _SMALL, anchor="left", valign="top", role="prompt"
            )
            bottom = 44.0
        lay = _Layout(n_set, len(tests), top, bottom)
        side, step = lay.side, lay.side + _GAP
        if prompt is not None:
            els.append(prompt)
        rows_set = -(-n_set // lay.cols_set)
        rows_test = -(-len(tests) // lay.cols_test) if tests else 0
        used = (2 * rows_set + rows_test) * step + rows_test * _LABEL_AREA
        bands = 2 + (1 if tests else 0)
        used += bands * 2 * _BAND_PAD + (bands - 1) * _BAND_GAP
        slack = max(0.0, h - 2 * _MARGIN - top - bottom - used)
        y = h - _MARGIN - top - slack / 2
        x_panels = _MARGIN + _LABEL_COL + _BAND_PAD
        groups: list[tuple[str, list[Any], int]] = [("A", sets["A"], lay.cols_set)]
        groups.append(("B", sets["B"], lay.cols_set))
        if tests:
            groups.append(("T", tests, lay.cols_test))
        for name, pnls, cols in groups:
            rows = -(-len(pnls) // cols)
            row_h = step + (_LABEL_AREA if name == "T" else 0.0)
            band_h = rows * row_h + 2 * _BAND_PAD
            y0 = y - band_h
            els.append(Shape(rect(_MARGIN, y0, w - _MARGIN, y), _BAND[name], None, 0, role="band"))
            title = {"A": "Set A", "B": "Set B", "T": "Test\nA or B?"}[name]
            size = _LABEL_SIZE if name != "T" else _SMALL
            els.append(
                Text(
                    _MARGIN + 10,
                    y - band_h / 2,
                    title,
                    size,
                    colour=_SET_INK[name],
                    anchor="left",
                    bold=True,
                    role="band-label",
                )
            )
            for k, objs in enumerate(pnls):
                r, c = divmod(k, cols)
                px = x_panels + c * step + _GAP / 2
                py = y - _BAND_PAD - r * row_h - _GAP / 2 - side
                els += _panel_elements(objs, px, py, side, _SET_INK[name], 2.0)
                if name == "T":
                    ly = py - _LABEL_AREA
                    els.append(
                        Text(
                            px,
                            ly + _LABEL_AREA / 2,
                            f"T{k + 1}",
                            _SMALL,
                            anchor="left",
                            bold=True,
                            role="test-number",
                        )
                    )
                    bx = px + 44
                    els.append(
                        Shape(
                            rect(bx, ly + 3, px + side, ly + _LABEL_AREA - 3),
                            PANEL,
                            _SET_INK["T"],
                            1.0,
                            role="label-box",
                        )
                    )
                    top_y = py + side
                    slots.append(
                        Slot(f"test:{k + 1}", px + side / 2, (ly + top_y) / 2, side, top_y - ly)
                    )
            y = y0 - _BAND_GAP
        if mode == "select":
            response = Response("label", {"labels": ["A", "B"], "rule": False})
            return Scene(w, h, tuple(els), tuple(slots), response)
        box = (_MARGIN + _LABEL_COL, _MARGIN, w - _MARGIN, _MARGIN + bottom - 8)
        els.append(
            Text(
                _MARGIN + 10,
                (box[1] + box[3]) / 2,
                "Rule:",
                _SMALL,
                anchor="left",
                bold=True,
                role="answer-label",
            )
        )
        els.append(Shape(rect(*box), PANEL, _SET_INK["T"], 1.0, role="answer-frame"))
        return Scene(w, h, tuple(els), (), Response("type", {}), answer_box=box)

    def answer_scene(self, item: Item, mode: str, answer: Any) -> Scene:
        """Select mode: small copies of the test panels with the given labels under them (any
        labels, e.g. a participant's); generate mode: the rule, written out."""
        if mode != "select":
            rule = answer.get("rule", "") if isinstance(answer, Mapping) else str(answer)
            size = _SMALL
            text = wrap(rule, size, 900, font="mono")
            lines = text.count("\n") + 1
            height = size * (1 + 1.25 * (lines - 1)) * 1.2 + 16
            width = 920.0
            el = Text(10, height / 2, text, size, anchor="left", font="mono", role="answer")
            return Scene(width, height, (el,))
        labels = self.normalize(item, answer, mode)
        tests = list(item.stimulus["test"])
        n = len(tests)
        side = min(120.0, (DESIGN_BOX[0] - 20) / n - _GAP)
        width = n * (side + _GAP) + 20 - _GAP
        height = side + _LABEL_AREA + 20
        els: list[Element] = []
        for k, objs in enumerate(tests):
            px = 10 + k * (side + _GAP)
            py = 10 + _LABEL_AREA
            els += _panel_elements(objs, px, py, side, _SET_INK["T"], 2.0)
            els.append(
                Text(
                    px + side / 2,
                    10 + _LABEL_AREA / 2,
                    f"T{k + 1}: {labels[k]}",
                    _SMALL,
                    bold=True,
                    colour=_SET_INK.get(labels[k], "#1a1a1a"),
                    role="answer",
                )
            )
        return Scene(width, height, tuple(els))
