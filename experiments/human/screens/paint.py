"""Paint a :class:`~twofold.study.scene.Scene` into a box of the window with PsychoPy stimuli.

The screen counterpart of :func:`twofold.study.render.paint_scene`: the same primitives, the
same order, one uniform scale. Static content is drawn once into an image (a
``BufferImageStim``), so a frame costs one textured quad however busy the scene is.

Units: window pixels with the origin at the window centre (PsychoPy ``pix``); ``box`` is
``(x0, y0, x1, y1)`` in those units. The scene is scaled by ``min(box w / scene w, box h /
scene h)`` (never above ``cap``) and centred in the box.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from twofold.study.scene import FONTS, Grid, Line, Scene, Shape, Text, hatch_segments

__all__ = ["FONTS", "ScenePainter", "hex_of", "segment_bars"]

#: scene fonts as PsychoPy font names (the same faces pictures use)
_ANCHOR = {"left": "left", "centre": "center", "right": "right"}
_VALIGN = {"top": "top", "middle": "center", "bottom": "bottom"}
#: the thinnest line drawn on screen (px): thinner quads drop out in software rendering
MIN_LINE_PX = 1.0


def hex_of(value: Any, space: str = "rgb") -> str | None:
    """``#rrggbb`` of a PsychoPy colour value (None stays None)."""
    if value is None:
        return None
    if isinstance(value, str):
        if value.startswith("#"):
            return value.lower()
        from psychopy.colors import Color

        return "#" + str(Color(value).hex).lstrip("#").lower()
    vals = [float(v) for v in list(value)[:3]]
    if space == "rgb255":
        ints = [round(v) for v in vals]
    else:
        ints = [round((v + 1.0) / 2.0 * 255.0) for v in vals]
    return "#" + "".join(f"{max(0, min(255, v)):02x}" for v in ints)


def _rgb(colour: str) -> list[float]:
    """``#rrggbb`` as PsychoPy rgb (-1..1)."""
    c = colour.lstrip("#")
    return [int(c[k : k + 2], 16) / 255.0 * 2.0 - 1.0 for k in (0, 2, 4)]


class ScenePainter:
    """Paint ``scene`` into ``box`` (window pixels, centre origin) of ``ctx``'s window.

    Parameters
    ----------
    ctx : Ctx
        The window and PsychoPy's ``visual`` module.
    scene : Scene
        What to paint.
    box : (x0, y0, x1, y1)
        Where, in window pixels (origin at the window centre, y up).
    cap : float
        The largest scale (pixels per scene unit) used however large the box is.
    scale : float, optional
        A fixed scale instead of fitting the box (e.g. an answer painted to the scale of its
        stimulus); the scene is still centred in the box.
    capture : bool
        Draw the static stimuli once into an image now (the default). A screen that captures
        several painters and widgets into one image passes False and captures :attr:`stims`.
    background : bool
        Fill the scene's extent with its background colour first.
    """

    def __init__(
        self,
        ctx: Any,
        scene: Scene,
        box: Sequence[float],
        *,
        cap: float = 1.6,
        scale: float | None = None,
        capture: bool = True,
        background: bool = True,
    ):
        self.ctx, self.scene = ctx, scene
        x0, y0, x1, y1 = (float(v) for v in box)
        self.box = (x0, y0, x1, y1)
        sw, sh = max(scene.width, 1e-9), max(scene.height, 1e-9)
        self.scale = float(scale) if scale else min((x1 - x0) / sw, (y1 - y0) / sh, cap)
        s = self.scale
        self.ox = (x0 + x1) / 2 - sw * s / 2
        self.oy = (y0 + y1) / 2 - sh * s / 2
        self.stims: list[Any] = []
        # (kind, stim, extra): what each record is read back from, in painting order
        self._plan: list[tuple[str, Any, Any]] = []
        self._texts: list[tuple[Any, Text]] = []
        self._objects: list[tuple[str, tuple[float, float, float, float]]] = []
        self._grids: list[tuple[float, tuple[float, float, float, float]]] = []
        if background:
            bx0, by0 = self.to_px(0, 0)
            bx1, by1 = self.to_px(scene.width, scene.height)
            self.stims.append(
                ctx.visual.Rect(
                    ctx.win,
                    width=bx1 - bx0,
                    height=by1 - by0,
                    pos=((bx0 + bx1) / 2, (by0 + by1) / 2),
                    fillColor=scene.background,
                    lineColor=None,
                    lineWidth=0,
                    units="pix",
                    autoLog=False,
                )
            )
        for el in scene.elements:
            if isinstance(el, Shape):
                self._shape(el)
            elif isinstance(el, Line):
                self._line(el)
            elif isinstance(el, Text):
                self._text(el)
            elif isinstance(el, Grid):
                self._grid(el)
            else:  # pragma: no cover - the Scene type admits nothing else
                raise TypeError(f"cannot paint {type(el).__name__}")
        self.image: Any = self.capture(ctx, self.stims, self.extent()) if capture else None

    # -- coordinates -----------------------------------------------------------------------
    def to_px(self, x: float, y: float) -> tuple[float, float]:
        """Window pixels (centre origin) of scene point ``(x, y)``."""
        return (self.ox + x * self.scale, self.oy + y * self.scale)

    def from_px(self, px: float, py: float) -> tuple[float, float]:
        """The scene point at window pixel ``(px, py)``."""
        return ((px - self.ox) / self.scale, (py - self.oy) / self.scale)

    def box_px(self, box: Sequence[float]) -> tuple[float, float, float, float]:
        """A scene box ``(x0, y0, x1, y1)`` in window pixels."""
        a = self.to_px(box[0], box[1])
        b = self.to_px(box[2], box[3])
        return (a[0], a[1], b[0], b[1])

    def slot_px(self, key: str) -> tuple[float, float, float, float]:
        """The box of slot ``key`` in window pixels (x0, y0, x1, y1)."""
        return self.box_px(self.scene.slot(key).bbox())

    def extent(self) -> tuple[float, float, float, float]:
        """The painted scene's box in window pixels."""
        return self.box_px((0.0, 0.0, self.scene.width, self.scene.height))

    # -- painting ----------------------------------------------------------------------------
    def _px_points(self, points: Sequence[tuple[float, float]]) -> list[tuple[float, float]]:
        return [self.to_px(x, y) for x, y in points]

    def _shape(self, el: Shape) -> None:
        # convex outlines need no tesselation (3x faster to make); concave ones do
        cls = self.ctx.visual.BaseShapeStim if _convex(el.points) else self.ctx.visual.ShapeStim
        stim = cls(
            self.ctx.win,
            vertices=self._px_points(el.points),
            closeShape=True,
            fillColor=el.fill,
            lineColor=el.edge,
            lineWidth=max(el.edge_width * self.scale, MIN_LINE_PX) if el.edge else 0,
            units="pix",
            autoLog=False,
            interpolate=True,
        )
        self.stims.append(stim)
        self._plan.append(("shape", stim, None))
        self._objects.append((f"shape:{el.role}", self.box_px(el.bbox())))

    def _segments(
        self,
        pts: Sequence[tuple[float, float]],
        colour: str | Sequence[str],
        width: float,
    ) -> Any:
        """Separate segments (point pairs, scene units) as one element array of thin bars;
        ``colour`` is one colour or one per segment."""
        px = [self.to_px(x, y) for x, y in pts]
        colours = [colour] * (len(pts) // 2) if isinstance(colour, str) else list(colour)
        return segment_bars(self.ctx, px, colours, max(width * self.scale, MIN_LINE_PX))

    def _line(self, el: Line) -> None:
        if el.segments:
            stim = self._segments(el.points, el.colour, el.width)
            if stim is not None:
                self.stims.append(stim)
            self._plan.append(("segments", stim, (0, len(el.points) // 2, el.colour)))
        else:
            stim = self.ctx.visual.ShapeStim(
                self.ctx.win,
                vertices=self._px_points(el.points),
                closeShape=False,
                fillColor=None,
                lineColor=el.colour,
                lineWidth=max(el.width * self.scale, MIN_LINE_PX),
                units="pix",
                autoLog=False,
                interpolate=True,
            )
            self.stims.append(stim)
            self._plan.append(("polyline", stim, None))
        self._objects.append((f"line:{el.role}", self.box_px(el.bbox())))

    def _text(self, el: Text) -> None:
        x, y = self.to_px(el.x, el.y)
        w = max(self.ctx.size) * 4  # scene text comes wrapped: never wrap again
        stim = self.ctx.visual.TextStim(
            self.ctx.win,
            text=el.text,
            pos=(x, y),
            height=el.size * self.scale,
            color=el.colour,
            font=FONTS.get(el.font, FONTS["sans"]),
            bold=el.bold,
            anchorHoriz=_ANCHOR[el.anchor],
            alignText=_ANCHOR[el.anchor],
            anchorVert=_VALIGN[el.valign],
            wrapWidth=w,
            units="pix",
            autoLog=False,
        )
        self.stims.append(stim)
        self._plan.append(("text", stim, None))
        self._texts.append((stim, el))

    def _grid(self, el: Grid) -> None:
        import numpy as np

        rows, cols = el.shape
        if not rows or not cols:
            return
        v = self.ctx.visual
        gx0, gy0, gx1, gy1 = self.box_px(el.bbox())
        pitch = el.cell * self.scale
        border = max(self.scale, MIN_LINE_PX)  # the cell outline, 1 scene unit as in pictures
        back = v.Rect(
            self.ctx.win,
            width=gx1 - gx0 + border,
            height=gy1 - gy0 + border,
            pos=((gx0 + gx1) / 2, (gy0 + gy1) / 2),
            fillColor=el.line,
            lineColor=None,
            lineWidth=0,
            units="pix",
            autoLog=False,
        )
        xys: list[tuple[float, float]] = []
        cols_rgb: list[list[float]] = []
        hatch_pts: list[tuple[float, float]] = []
        ranges: list[tuple[int, int, int, str]] = []
        marks: list[str] = []  # the hatch colour of each segment
        for r in range(rows):
            for c in range(cols):
                x0, y0, x1, y1 = el.cell_box(r, c)
                xys.append(self.to_px((x0 + x1) / 2, (y0 + y1) / 2))
                idx = el.cells[r][c]
                cols_rgb.append(_rgb(el.palette[idx]))
                pattern = el.hatches[idx] if idx < len(el.hatches) else None
                if pattern:
                    seg = hatch_segments(pattern, x0, y0, el.cell)
                    start = len(hatch_pts) // 2
                    hatch_pts += list(seg)
                    mark_of = getattr(el, "mark_of", None)  # per-index marks, when given
                    mark = mark_of(idx) if mark_of is not None else el.mark
                    marks += [mark] * (len(seg) // 2)
                    ranges.append((r * cols + c, start, len(hatch_pts) // 2, mark))
        cells = v.ElementArrayStim(
            self.ctx.win,
            units="pix",
            autoLog=False,
            nElements=len(xys),
            xys=np.array(xys, dtype=float),
            sizes=max(pitch - border, 1.0),
            elementTex=np.ones((4, 4)),
            elementMask=None,
            colors=np.array(cols_rgb, dtype=float),
            colorSpace="rgb",
            sfs=0,
            interpolate=False,
        )
        hatch = self._segments(hatch_pts, marks, 1.2) if hatch_pts else None
        self.stims += [back, cells] + ([hatch] if hatch is not None else [])
        by_cell = {k: (a, b, m) for k, a, b, m in ranges}
        for k in range(rows * cols):
            self._plan.append(("cell", cells, (k, pitch, back)))
            if k in by_cell:
                self._plan.append(("segments", hatch, by_cell[k]))
        self._grids.append((pitch, (gx0, gy0, gx1, gy1)))

    @staticmethod
    def capture(ctx: Any, stims: Sequence[Any], rect: Sequence[float] | None = None) -> Any:
        """Draw ``stims`` once into an image of ``rect`` (window pixels; None: the window).

        Capturing clears the back buffer: do it before drawing a frame, not in the middle.
        """
        if not stims:
            return None
        w, h = ctx.size
        if rect is None:
            x0, y0, x1, y1 = -w / 2, -h / 2, w / 2, h / 2
        else:  # whole pixels inside the window, so the image lands 1:1
            x0 = max(math.floor(rect[0]), -w // 2)
            y0 = max(math.floor(rect[1]), -h // 2)
            x1 = min(math.ceil(rect[2]), w - w // 2)
            y1 = min(math.ceil(rect[3]), h - h // 2)
        norm = [x0 / (w / 2), y1 / (h / 2), x1 / (w / 2), y0 / (h / 2)]
        # no interpolation: the image is drawn 1:1, and linear filtering is slow in software GL
        buf = ctx.visual.BufferImageStim(
            ctx.win,
            stim=list(stims),
            rect=norm,
            autoLog=False,
            pos=((x0 + x1) / 2, (y0 + y1) / 2),
            interpolate=False,
        )
        if rect is None:
            return buf
        # a part of the window: BufferImageStim draws nothing here (measured, PsychoPy
        # 2026.2.5), an ImageStim of the captured region does
        return ctx.visual.ImageStim(
            ctx.win,
            image=buf.image,
            units="pix",
            autoLog=False,
            pos=((x0 + x1) / 2, (y0 + y1) / 2),
            size=(x1 - x0, y1 - y0),
            interpolate=False,
        )

    def draw(self) -> None:
        """Draw the painted scene (its captured image, or the stimuli one by one)."""
        if self.image is not None:
            self.image.draw()
            return
        for s in self.stims:
            s.draw()

    # -- what was drawn ------------------------------------------------------------------------
    def records(self) -> list[dict[str, Any]]:
        """What was drawn, in scene units, read back from the stimuli (the record format of
        :func:`twofold.study.render.paint_scene`)."""
        out: list[dict[str, Any]] = []
        for kind, stim, extra in self._plan:
            if kind == "shape":
                space = stim.colorSpace
                out.append(
                    {
                        "kind": "shape",
                        "points": [self.from_px(*map(float, p)) for p in stim.vertices],
                        # PsychoPy keeps "no colour" as a transparent colour
                        "fill": hex_of(stim.fillColor, space) if _opaque(stim, "fill") else None,
                        "edge": (
                            hex_of(stim.lineColor, space)
                            if stim.lineWidth and _opaque(stim, "border")
                            else None
                        ),
                    }
                )
            elif kind == "polyline":
                out.append(
                    {
                        "kind": "line",
                        "points": [self.from_px(*map(float, p)) for p in stim.vertices],
                        "colour": hex_of(stim.lineColor, stim.colorSpace),
                    }
                )
            elif kind == "segments":
                a, b, colour = extra
                pts: list[tuple[float, float]] = []
                if stim is not None:
                    for k in range(a, b):
                        (cx, cy), (ln, _), ori = stim.xys[k], stim.sizes[k], stim.oris[k]
                        th = -math.radians(float(ori))
                        dx, dy = math.cos(th) * ln / 2, math.sin(th) * ln / 2
                        pts.append(self.from_px(cx - dx, cy - dy))
                        pts.append(self.from_px(cx + dx, cy + dy))
                    colour = hex_of(stim.colors[a if b > a else 0], stim.colorSpace)
                out.append({"kind": "line", "points": pts, "colour": colour})
            elif kind == "text":
                out.append(
                    {
                        "kind": "text",
                        "text": stim.text,
                        "xy": self.from_px(*map(float, stim.pos)),
                        "size": float(stim.height) / self.scale,
                        "colour": hex_of(stim.color, stim.colorSpace),
                    }
                )
            elif kind == "cell":
                k, pitch, back = extra
                cx, cy = (float(v) for v in stim.xys[k])
                h = pitch / 2
                corners = ((cx - h, cy - h), (cx + h, cy - h), (cx + h, cy + h), (cx - h, cy + h))
                out.append(
                    {
                        "kind": "shape",
                        "points": [self.from_px(*p) for p in corners],
                        "fill": hex_of(stim.colors[k], stim.colorSpace),
                        "edge": hex_of(back.fillColor, back.colorSpace),
                    }
                )
        return out

    def boxes(self) -> list[tuple[str, float, float, float, float, float | None]]:
        """What the scene put on screen, as ``(name, x0, y0, x1, y1, letter_px)`` in window
        pixels (centre origin): texts with their real glyph extents, figure objects, grids and
        one cell of each grid (``letter_px`` is the text's letter height, else None)."""
        out: list[tuple[str, float, float, float, float, float | None]] = []
        for stim, el in self._texts:
            out.append(("text:" + el.text[:40], *text_box(stim), float(stim.height)))
        for name, b in self._objects:
            out.append((name, *b, None))
        for pitch, b in self._grids:
            out.append(("grid", *b, None))
            out.append(("cell", b[0], b[3] - pitch, b[0] + pitch, b[3], None))
        return out


def segment_bars(
    ctx: Any, pts: Sequence[tuple[float, float]], colours: Sequence[str], width: float
) -> Any:
    """Separate segments (point pairs in window pixels, one colour each) as one element
    array of bars ``width`` pixels thick: one stimulus however many segments (None for none)."""
    import numpy as np

    xys, sizes, oris = [], [], []
    for k in range(0, len(pts) - 1, 2):
        (ax, ay), (bx, by) = pts[k], pts[k + 1]
        xys.append(((ax + bx) / 2, (ay + by) / 2))
        sizes.append((math.hypot(bx - ax, by - ay), width))
        oris.append(-math.degrees(math.atan2(by - ay, bx - ax)))  # PsychoPy: clockwise
    if not xys:
        return None
    return ctx.visual.ElementArrayStim(
        ctx.win,
        units="pix",
        autoLog=False,
        nElements=len(xys),
        xys=np.array(xys, dtype=float),
        sizes=np.array(sizes, dtype=float),
        oris=np.array(oris, dtype=float),
        elementTex=np.ones((4, 4)),
        elementMask=None,
        colors=np.array([_rgb(c) for c in colours[: len(xys)]], dtype=float),
        colorSpace="rgb",
        sfs=0,
        interpolate=False,
    )


def _convex(points: Sequence[tuple[float, float]]) -> bool:
    """Whether a closed outline is convex (every turn the same way)."""
    n = len(points)
    if n < 4:
        return n == 3
    sign = 0.0
    for k in range(n):
        (ax, ay), (bx, by), (cx, cy) = points[k], points[(k + 1) % n], points[(k + 2) % n]
        cross = (bx - ax) * (cy - by) - (by - ay) * (cx - bx)
        if abs(cross) < 1e-9:
            continue
        if sign and (cross > 0) != (sign > 0):
            return False
        sign = cross
    return True


def _opaque(stim: Any, which: str) -> bool:
    """Whether a ShapeStim's fill (``fill``) or edge (``border``) colour is drawn."""
    colour = getattr(stim, f"_{which}Color", None)
    return colour is not None and float(getattr(colour, "alpha", 1.0) or 0.0) > 0.0


def text_box(stim: Any) -> tuple[float, float, float, float]:
    """The glyph box of a ``TextStim`` (window pixels, centre origin) from its bounding box
    and anchors."""
    w, h = (float(v) for v in stim.boundingBox)
    x, y = (float(v) for v in stim.pos)
    ah = getattr(stim, "anchorHoriz", "center")
    av = getattr(stim, "anchorVert", "center")
    x0 = {"left": x, "right": x - w}.get(ah, x - w / 2)
    y0 = {"bottom": y, "top": y - h}.get(av, y - h / 2)
    return (x0, y0, x0 + w, y0 + h)
