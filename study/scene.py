"""Scenes: what to draw for an item, as plain primitives that any painter can draw.

A family describes an item once, as a :class:`Scene`; painters draw that scene: matplotlib for
pictures (:func:`twofold.study.render.render_picture`), PsychoPy for participant screens
(``twofold.experiments.human.screens``). Because both paint the same primitives, a person and a
picture-reading machine see the same stimulus. No drawing library is imported here.

Coordinates
-----------
Scene units, origin at the bottom left, ``y`` upwards. A painter scales a scene uniformly to fit
its box (keeping the aspect ratio) and centres it. Scenes are laid out for a box of about
:data:`DESIGN_BOX` units so that one unit is about one pixel on a 1024x768 window; the legibility
floors below are stated in those units (a painter at a larger window only scales up).

Geometry that painters could draw differently (dashes, hatches, circles, wrapped text) is resolved
here into points and segments, so every painter draws exactly the same lines.
"""

from __future__ import annotations

import dataclasses
import math
import textwrap
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Literal

__all__ = [
    "DESIGN_BOX",
    "FONTS",
    "MIN_CELL",
    "MIN_OBJECT",
    "MIN_TEXT",
    "Grid",
    "Line",
    "Response",
    "Scene",
    "Shape",
    "Slot",
    "Text",
    "circle",
    "dash",
    "hatch_segments",
    "polygon",
    "rect",
    "scene_problems",
    "text_width",
    "wrap",
]

#: the box (width, height) in scene units a family lays an item out for
DESIGN_BOX = (960.0, 560.0)
#: legibility floors in scene units at the design box (1 unit ~ 1 px at 1024x768)
MIN_TEXT = 18.0  #: letter height of any text
MIN_OBJECT = 18.0  #: the smaller side of the bounding box of a figure object
MIN_CELL = 12.0  #: the side of a grid cell

Point = tuple[float, float]
Colour = str  # "#rrggbb"
DashStyle = Literal["solid", "dashed", "dotted"]
#: the hatch patterns painters know (each a few segments in the unit square, see hatch_segments)
HATCHES = ("rising", "falling", "level", "upright", "crossed", "dots", "ring", "bar", "plus")
#: the typefaces a scene's ``font`` names: every painter draws text in these
FONTS = {"sans": "DejaVu Sans", "mono": "DejaVu Sans Mono"}
#: average advance of a glyph as a fraction of the letter height (DejaVu Sans / Sans Mono)
_ADVANCE = {"sans": 0.62, "mono": 0.61}


@dataclasses.dataclass(frozen=True)
class Shape:
    """A closed outline, filled and/or edged.

    Attributes
    ----------
    points : tuple of (x, y)
        The outline in scene units (circles come as polygons, see :func:`circle`).
    fill, edge : str or None
        ``#rrggbb`` colours; None draws no fill or no edge.
    edge_width : float
        Edge thickness in scene units. Dashed edges are not a style here: use :func:`dash`.
    role : str
        What the shape is (``object``, ``panel``, ``frame``, ``cell``, ``badge`` ...); painters
        may ignore it, tests and layouts use it.
    """

    points: tuple[Point, ...]
    fill: Colour | None = None
    edge: Colour | None = None
    edge_width: float = 1.0
    role: str = "object"

    def bbox(self) -> tuple[float, float, float, float]:
        return _bbox(self.points)


@dataclasses.dataclass(frozen=True)
class Line:
    """An open polyline (or, with ``segments``, many separate two-point segments)."""

    points: tuple[Point, ...]
    colour: Colour
    width: float = 1.0
    role: str = "line"
    segments: bool = False  #: True: points pair up as separate segments (dashes, hatches)

    def bbox(self) -> tuple[float, float, float, float]:
        return _bbox(self.points)


@dataclasses.dataclass(frozen=True)
class Text:
    """One block of text, already wrapped (``\\n`` separates lines).

    ``size`` is the letter height in scene units; ``anchor`` places ``(x, y)`` at the block's
    left, centre or right, and ``valign`` at its top, middle or bottom.
    """

    x: float
    y: float
    text: str
    size: float
    colour: Colour = "#1a1a1a"
    anchor: Literal["left", "centre", "right"] = "centre"
    valign: Literal["top", "middle", "bottom"] = "middle"
    bold: bool = False
    font: Literal["sans", "mono"] = "sans"
    role: str = "text"

    def bbox(self) -> tuple[float, float, float, float]:
        lines = self.text.split("\n")
        w = max(text_width(line, self.size, self.font) for line in lines)
        h = self.size * (1.0 + 1.25 * (len(lines) - 1)) * 1.2
        x0 = {"left": self.x, "centre": self.x - w / 2, "right": self.x - w}[self.anchor]
        y0 = {"bottom": self.y, "middle": self.y - h / 2, "top": self.y - h}[self.valign]
        return (x0, y0, x0 + w, y0 + h)


@dataclasses.dataclass(frozen=True)
class Grid:
    """A grid of coloured cells; ``(x, y)`` is its top-left corner, every cell ``cell`` square.

    ``cells`` holds palette indices; ``palette`` their colours; ``hatches`` an optional pattern
    name (see :data:`HATCHES`) per index, drawn over the fill in ``mark`` colour so colours are
    told apart without hue; ``marks`` optionally gives the hatch colour per index (else
    ``mark``), so hatches stay visible on dark and light colours alike; ``line`` is the colour
    of the cell borders.
    """

    x: float
    y: float
    cells: tuple[tuple[int, ...], ...]
    cell: float
    palette: tuple[Colour, ...]
    hatches: tuple[str | None, ...] = ()
    mark: Colour = "#202020"
    line: Colour = "#7a7a7a"
    marks: tuple[Colour, ...] = ()
    role: str = "grid"

    @property
    def shape(self) -> tuple[int, int]:
        return (len(self.cells), len(self.cells[0]) if self.cells else 0)

    def bbox(self) -> tuple[float, float, float, float]:
        r, c = self.shape
        return (self.x, self.y - r * self.cell, self.x + c * self.cell, self.y)

    def mark_of(self, v: int) -> Colour:
        """The hatch colour of palette index ``v``."""
        return self.marks[v] if v < len(self.marks) else self.mark

    def cell_box(self, r: int, c: int) -> tuple[float, float, float, float]:
        """(x0, y0, x1, y1) of cell ``(r, c)`` (row 0 at the top)."""
        x0 = self.x + c * self.cell
        y1 = self.y - r * self.cell
        return (x0, y1 - self.cell, x0 + self.cell, y1)


@dataclasses.dataclass(frozen=True)
class Slot:
    """A place a respondent can act on: ``key`` names it (``choice:3``, ``test:2`` ...).

    Painters of pictures draw nothing for a slot (its frame and badge are ordinary primitives);
    screens turn slots into click targets.
    """

    key: str
    x: float  #: centre
    y: float
    w: float
    h: float

    def bbox(self) -> tuple[float, float, float, float]:
        return (self.x - self.w / 2, self.y - self.h / 2, self.x + self.w / 2, self.y + self.h / 2)


@dataclasses.dataclass(frozen=True)
class Response:
    """How a respondent answers on a screen.

    ``kind`` is one of ``choose`` (click or press the number of a choice slot), ``type``
    (a typed answer; ``options["symbols"]`` lists symbols offered as on-screen keys), ``paint``
    (edit a grid: ``options`` has ``start`` rows, ``palette``, ``hatches``, ``cell``,
    ``max_size``), ``label`` (give each ``test:k`` slot one of ``options["labels"]``; with
    ``options["rule"]`` a typed rule follows) or ``build`` (pick a value per attribute in
    ``options["attributes"]``; the family paints the built answer, see
    :meth:`Family.answer_scene <twofold.study.families.Family.answer_scene>`).
    """

    kind: Literal["choose", "type", "paint", "label", "build"]
    options: Mapping[str, Any] = dataclasses.field(default_factory=dict)


Element = Shape | Line | Text | Grid


@dataclasses.dataclass(frozen=True)
class Scene:
    """Everything to draw for one item in one mode.

    Attributes
    ----------
    width, height : float
        The scene's extent in scene units (origin bottom left).
    elements : tuple
        :class:`Shape`, :class:`Line`, :class:`Text` and :class:`Grid` primitives, painted in
        order (later on top).
    slots : tuple of Slot
        Places to act on.
    response : Response or None
        How a participant answers (None for a scene that only shows something).
    background : str
        Colour behind the scene.
    answer_box : (x0, y0, x1, y1) or None
        Where an answer built or typed on screen is shown, at the scale of the stimulus.
    """

    width: float
    height: float
    elements: tuple[Element, ...]
    slots: tuple[Slot, ...] = ()
    response: Response | None = None
    background: Colour = "#fbfaf6"
    answer_box: tuple[float, float, float, float] | None = None

    def slot(self, key: str) -> Slot:
        for s in self.slots:
            if s.key == key:
                return s
        raise KeyError(key)

    def of_role(self, role: str) -> list[Element]:
        return [e for e in self.elements if e.role == role]


# -- geometry helpers (shared by every family, so painters never improvise) --------------------
def _bbox(points: Iterable[Point]) -> tuple[float, float, float, float]:
    xs, ys = zip(*points, strict=True)
    return (min(xs), min(ys), max(xs), max(ys))


def polygon(
    unit: Sequence[Point], cx: float, cy: float, r: float, rotation: float = 0.0
) -> tuple[Point, ...]:
    """``unit`` outline points (within [-1, 1]) scaled by ``r``, turned by ``rotation`` degrees
    anticlockwise and moved to ``(cx, cy)``."""
    a = math.radians(rotation)
    ca, sa = math.cos(a), math.sin(a)
    return tuple(
        (round(cx + r * (px * ca - py * sa), 4), round(cy + r * (px * sa + py * ca), 4))
        for px, py in unit
    )


def circle(cx: float, cy: float, r: float, n: int = 48) -> tuple[Point, ...]:
    """A circle as an ``n``-gon."""
    unit = [(math.cos(2 * math.pi * k / n), math.sin(2 * math.pi * k / n)) for k in range(n)]
    return polygon(unit, cx, cy, r)


def rect(x0: float, y0: float, x1: float, y1: float) -> tuple[Point, ...]:
    """The outline of an axis-aligned rectangle."""
    return ((x0, y0), (x1, y0), (x1, y1), (x0, y1))


def dash(
    points: Sequence[Point], on: float, off: float, *, closed: bool = True
) -> tuple[Point, ...]:
    """A dashed version of an outline: pairs of points, one pair per dash (for ``Line(segments=
    True)``). ``on`` and ``off`` are lengths in scene units."""
    pts = list(points) + ([points[0]] if closed else [])
    out: list[Point] = []
    phase, drawing = 0.0, True  # distance into the current on/off run
    for (x0, y0), (x1, y1) in zip(pts, pts[1:], strict=False):
        seg = math.hypot(x1 - x0, y1 - y0)
        t = 0.0
        while t < seg - 1e-9:
            run = (on if drawing else off) - phase
            step = min(run, seg - t)
            if drawing:
                a, b = t / seg, (t + step) / seg
                out += [
                    (round(x0 + a * (x1 - x0), 4), round(y0 + a * (y1 - y0), 4)),
                    (round(x0 + b * (x1 - x0), 4), round(y0 + b * (y1 - y0), 4)),
                ]
            t += step
            phase += step
            if phase >= (on if drawing else off) - 1e-9:
                phase, drawing = 0.0, not drawing
    return tuple(out)


def hatch_segments(pattern: str, x0: float, y0: float, side: float) -> tuple[Point, ...]:
    """The marks of hatch ``pattern`` in the square cell at ``(x0, y0)`` (bottom left), as point
    pairs. Marks keep a margin of 18 % of the side so neighbouring cells stay apart."""
    m = 0.18
    lo, hi = m, 1 - m
    unit: list[tuple[float, float, float, float]]
    if pattern == "rising":
        unit = [(lo, lo, hi, hi)]
    elif pattern == "falling":
        unit = [(lo, hi, hi, lo)]
    elif pattern == "level":
        unit = [(lo, 0.5, hi, 0.5)]
    elif pattern == "upright":
        unit = [(0.5, lo, 0.5, hi)]
    elif pattern == "crossed":
        unit = [(lo, lo, hi, hi), (lo, hi, hi, lo)]
    elif pattern == "bar":
        unit = [(lo, 0.38, hi, 0.38), (lo, 0.62, hi, 0.62)]
    elif pattern == "plus":
        unit = [(0.3, 0.5, 0.7, 0.5), (0.5, 0.3, 0.5, 0.7)]
    elif pattern == "dots":
        d = 0.06
        unit = [(cx - d, cy, cx + d, cy) for cx, cy in ((0.32, 0.32), (0.68, 0.68))]
        unit += [(cx, cy - d, cx, cy + d) for cx, cy in ((0.32, 0.32), (0.68, 0.68))]
    elif pattern == "ring":
        n = 10
        ring = [
            (0.5 + 0.22 * math.cos(2 * math.pi * k / n), 0.5 + 0.22 * math.sin(2 * math.pi * k / n))
            for k in range(n + 1)
        ]
        unit = [(a[0], a[1], b[0], b[1]) for a, b in zip(ring, ring[1:], strict=False)]
    else:
        raise ValueError(f"unknown hatch pattern {pattern!r}; known: {', '.join(HATCHES)}")
    out: list[Point] = []
    for ax, ay, bx, by in unit:
        out += [
            (round(x0 + ax * side, 4), round(y0 + ay * side, 4)),
            (round(x0 + bx * side, 4), round(y0 + by * side, 4)),
        ]
    return tuple(out)


def text_width(line: str, size: float, font: str = "sans") -> float:
    """An estimate of the drawn width of one line (an average glyph advance per character)."""
    return len(line) * size * _ADVANCE.get(font, 0.62)


def wrap(text: str, size: float, width: float, font: str = "sans") -> str:
    """``text`` wrapped to lines no wider than ``width`` at letter height ``size`` (paragraphs,
    separated by blank lines, are kept)."""
    per_line = max(8, int(width / (size * _ADVANCE.get(font, 0.62))))
    paras = [p for p in text.split("\n")]
    return "\n".join(textwrap.fill(p, per_line) if p.strip() else "" for p in paras)


def _overlap(a: tuple[float, float, float, float], b: tuple[float, float, float, float]) -> bool:
    return a[0] < b[2] - 0.5 and b[0] < a[2] - 0.5 and a[1] < b[3] - 0.5 and b[1] < a[3] - 0.5


def scene_problems(scene: Scene, *, min_object: float | None = None) -> list[str]:
    """What is wrong with a scene's layout, in words (empty when it is fine).

    Checks that every element and slot lies inside the scene, that texts are at least
    :data:`MIN_TEXT` high and overlap no other text, that grid cells are at least
    :data:`MIN_CELL`, that texts do not cross slots they are not inside, and, with
    ``min_object``, that every ``object`` shape is at least that large. Estimated text extents
    (see :func:`text_width`) are used, so a painter's exact glyph boxes are checked on screen.
    """
    out: list[str] = []
    inside = (-0.5, -0.5, scene.width + 0.5, scene.height + 0.5)

    def within(b: tuple[float, float, float, float]) -> bool:
        return b[0] >= inside[0] and b[1] >= inside[1] and b[2] <= inside[2] and b[3] <= inside[3]

    texts: list[tuple[str, tuple[float, float, float, float]]] = []
    for el in scene.elements:
        b = el.bbox()
        name = el.text[:30] if isinstance(el, Text) else el.role
        if not within(b):
            out.append(
                f"{type(el).__name__} {name!r} leaves the scene: {tuple(round(v) for v in b)}"
            )
        if isinstance(el, Text):
            if el.size < MIN_TEXT - 1e-9:
                out.append(f"text {name!r} is {el.size:.1f} high (at least {MIN_TEXT:g})")
            texts.append((name, b))
        elif isinstance(el, Grid) and el.cells and el.cell < MIN_CELL - 1e-9:
            out.append(f"grid cells are {el.cell:.1f} wide (at least {MIN_CELL:g})")
        elif isinstance(el, Shape) and el.role == "object" and min_object is not None:
            x0, y0, x1, y1 = b
            if min(x1 - x0, y1 - y0) < min_object - 1e-9:
                out.append(
                    f"an object is {min(x1 - x0, y1 - y0):.1f} across (at least {min_object:g})"
                )
    for k, (na, a) in enumerate(texts):
        for nb, b in texts[k + 1 :]:
            if _overlap(a, b):
                out.append(f"texts {na!r} and {nb!r} overlap")
    for s in scene.slots:
        if not within(s.bbox()):
            out.append(f"slot {s.key} leaves the scene")
    return out
