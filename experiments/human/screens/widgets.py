"""Screen widgets shared by every response screen: buttons, a highlight frame, label badges, the
on-screen symbol keypad, the palette row, the grid editor view and the help line.

Everything is in window pixels with the origin at the window centre. Sizes come from measured
text extents (``TextStim.boundingBox``), so labels never leave their buttons; no text is drawn
smaller than :data:`MIN_TEXT_PX`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from twofold.study.colour import contrast_ratio, ink_for
from twofold.study.scene import hatch_segments

from .paint import FONTS, segment_bars, text_box

__all__ = [
    "ACCENT",
    "entry_frame",
    "ink_on_light",
    "DIM",
    "MIN_TEXT_PX",
    "PANEL",
    "SELECT",
    "TEXT",
    "Badge",
    "Button",
    "GridEditorView",
    "Highlight",
    "contrast_ratio",
    "ink_for",
    "key_char",
    "make_text",
]

#: key names PsychoPy reports for the punctuation a typed answer may hold
_KEY_CHARS = {"space": " ", "minus": "-", "comma": ",", "period": ".", "slash": "/"}


def key_char(name: str) -> str:
    """The character a key name stands for (``space`` -> " ", ``num_4`` -> "4", ``a`` -> "a");
    a name longer than one character that is not listed comes back unchanged."""
    return _KEY_CHARS.get(name, name.replace("num_", ""))


TEXT = "#e8e4da"  #: warm off-white text on the dark window
DIM = "#aab0b8"  #: secondary text (help line, captions)
ACCENT = "#d9a441"  #: amber: what can be acted on
SELECT = "#4fb0a8"  #: teal: what is selected
PANEL = "#343a44"  #: button faces
PANEL_EDGE = "#5b6370"
SANS, MONO = FONTS["sans"], FONTS["mono"]
#: letter height floor of any text on screen (px)
MIN_TEXT_PX = 18.0

Box = tuple[float, float, float, float]


def make_text(
    ctx: Any,
    text: str,
    pos: tuple[float, float],
    *,
    height: float = 20,
    color: str = TEXT,
    font: str = SANS,
    wrap: float | None = None,
    anchor: str = "center",
    valign: str = "center",
    bold: bool = False,
) -> Any:
    """A ``TextStim`` in pixels (``wrap`` None: one line, never wrapped)."""
    return ctx.visual.TextStim(
        ctx.win,
        text=text,
        pos=pos,
        height=height,
        color=color,
        font=font,
        wrapWidth=wrap if wrap is not None else max(ctx.size) * 4,
        anchorHoriz=anchor,
        alignText=anchor,
        anchorVert=valign,
        bold=bold,
        units="pix",
        autoLog=False,
    )


#: typed text on a light background: a deep blue of our own (contrast >= 7:1 on white)
TYPED_DARK = "#17406b"


def ink_on_light(background: str) -> str:
    """The colour of typed text on a light ``background``: our deep blue, or black or white
    when that does not reach 4.5:1."""
    return TYPED_DARK if contrast_ratio(TYPED_DARK, background) >= 4.5 else ink_for(background)


def entry_frame(ctx: Any, box: Box, edge: str = ACCENT) -> Any:
    """The frame of a typed-entry box ``(x0, y0, x1, y1)``."""
    x0, y0, x1, y1 = box
    return ctx.visual.Rect(
        ctx.win,
        width=x1 - x0,
        height=y1 - y0,
        pos=((x0 + x1) / 2, (y0 + y1) / 2),
        fillColor=PANEL,
        lineColor=edge,
        lineWidth=2,
        units="pix",
        autoLog=False,
    )


def text_width(stim: Any) -> float:
    return float(stim.boundingBox[0])


# -- buttons ------------------------------------------------------------------------------------
class Button:
    """A labelled rectangle that can be clicked.

    The label starts at ``height`` and shrinks to fit the width (never below
    :data:`MIN_TEXT_PX`); with ``size`` None (or width 0) the button is as wide as its label.
    """

    def __init__(
        self,
        ctx: Any,
        label: str,
        pos: tuple[float, float],
        size: tuple[float, float] | None = None,
        *,
        height: float = 20,
        fill: str | None = PANEL,
        edge: str = ACCENT,
        colour: str = TEXT,
        font: str = SANS,
        pad: float = 12,
    ):
        self.ctx = ctx
        self.text = make_text(ctx, label, pos, height=height, color=colour, font=font)
        w, h = size if size is not None else (0.0, height + 18)
        if label and w:
            tw = text_width(self.text)
            if tw > w - 2 * pad:  # shrink to fit, down to the floor
                self.text.height = max(MIN_TEXT_PX, height * (w - 2 * pad) / max(tw, 1e-9))
        if label:
            w = max(w, text_width(self.text) + 2 * pad)
        self.pos, self.size = pos, (w, h)
        self.rect = ctx.visual.Rect(
            ctx.win,
            width=w,
            height=h,
            pos=pos,
            fillColor=fill,
            lineColor=edge,
            lineWidth=2,
            units="pix",
            autoLog=False,
        )
        self.has_label = bool(label)

    @staticmethod
    def measure(ctx: Any, label: str, height: float = 20, pad: float = 12) -> float:
        """The width a button needs for ``label`` at letter height ``height``."""
        return text_width(make_text(ctx, label, (0, 0), height=height)) + 2 * pad

    def move(self, pos: tuple[float, float]) -> None:
        self.pos = pos
        self.rect.pos = pos
        self.text.pos = pos

    def contains(self, p: Sequence[float]) -> bool:
        return (
            abs(p[0] - self.pos[0]) <= self.size[0] / 2
            and abs(p[1] - self.pos[1]) <= self.size[1] / 2
        )

    def box(self) -> Box:
        (x, y), (w, h) = self.pos, self.size
        return (x - w / 2, y - h / 2, x + w / 2, y + h / 2)

    def stims(self) -> list[Any]:
        return [self.rect] + ([self.text] if self.has_label else [])

    def draw(self) -> None:
        for s in self.stims():
            s.draw()


class Highlight:
    """A frame drawn around a box (a selected button, the current slot)."""

    def __init__(self, ctx: Any, colour: str = SELECT, width: float = 4, gap: float = 5):
        self.rect = ctx.visual.Rect(
            ctx.win,
            width=10,
            height=10,
            fillColor=None,
            lineColor=colour,
            lineWidth=width,
            units="pix",
            autoLog=False,
        )
        self.gap = gap
        self.on: Box | None = None

    def draw(self, box: Box | None) -> None:
        if box is None:
            return
        if box != self.on:  # changing a stimulus costs time: only on a change
            self.on = box
            self.rect.pos = ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2)
            self.rect.width = box[2] - box[0] + 2 * self.gap
            self.rect.height = box[3] - box[1] + 2 * self.gap
        self.rect.draw()


class Badge:
    """A short label on a filled tab (e.g. the set label given to a test panel)."""

    def __init__(self, ctx: Any, pos: tuple[float, float], *, height: float = 22):
        self.ctx, self.pos, self.height = ctx, pos, height
        self.text = make_text(ctx, "", pos, height=height, bold=True)
        self.rect = ctx.visual.Rect(
            ctx.win, width=10, height=height + 10, pos=pos, lineWidth=0, units="pix", autoLog=False
        )
        self.value = ""

    def set(self, value: str, fill: str) -> None:
        self.value = value
        self.text.text = value
        self.text.color = ink_for(fill)
        self.rect.fillColor = fill
        self.rect.width = text_width(self.text) + 16 if value else 10

    def box(self) -> Box:
        w, h = float(self.rect.width), float(self.rect.height)
        return (self.pos[0] - w / 2, self.pos[1] - h / 2, self.pos[0] + w / 2, self.pos[1] + h / 2)

    def draw(self) -> None:
        if self.value:
            self.rect.draw()
            self.text.draw()


# -- the grid editor view ------------------------------------------------------------------
class GridEditorView:
    """An editable colour grid with its top-left corner at ``top_left`` and cells of ``pitch``
    pixels; hatches per colour index drawn over the fills, as pictures draw them."""

    def __init__(
        self,
        ctx: Any,
        grid: Sequence[Sequence[int]],
        palette: Sequence[str],
        hatches: Sequence[str | None],
        top_left: tuple[float, float],
        pitch: float,
        *,
        mark: str = "#202020",
        line: str = "#7a7a7a",
        marks: Sequence[str] = (),
    ):
        self.ctx, self.palette, self.hatches = ctx, list(palette), list(hatches)
        self.top_left, self.pitch, self.mark, self.line = top_left, pitch, mark, line
        self.marks = list(marks)
        self.stims: list[Any] = []
        self.set(grid)

    def set(self, grid: Sequence[Sequence[int]]) -> None:
        import numpy as np

        v = self.ctx.visual
        self.grid = [[int(x) for x in r] for r in grid]
        self.rows = len(self.grid)
        self.cols = len(self.grid[0]) if self.rows else 0
        self.stims = []
        if not self.rows or not self.cols:
            return
        x0, y1 = self.top_left
        w, h = self.cols * self.pitch, self.rows * self.pitch
        self.back = v.Rect(
            self.ctx.win,
            width=w + 1,
            height=h + 1,
            pos=(x0 + w / 2, y1 - h / 2),
            fillColor=self.line,
            lineWidth=0,
            units="pix",
            autoLog=False,
        )
        self.cells = v.ElementArrayStim(
            self.ctx.win,
            units="pix",
            autoLog=False,
            nElements=self.rows * self.cols,
            xys=np.array(
                [self.cell_pos(r, c) for r in range(self.rows) for c in range(self.cols)],
                dtype=float,
            ),
            sizes=max(self.pitch - 1.0, 1.0),
            elementTex=np.ones((4, 4)),
            elementMask=None,
            colors=np.array([self._rgb(x) for r in self.grid for x in r], dtype=float),
            colorSpace="rgb",
            sfs=0,
            interpolate=False,
        )
        self.stims = [self.back, self.cells]
        self._hatch()

    def _rgb(self, idx: int) -> list[float]:
        c = self.palette[idx % len(self.palette)].lstrip("#")
        return [int(c[k : k + 2], 16) / 255.0 * 2 - 1 for k in (0, 2, 4)]

    def _hatch(self) -> None:

        pts: list[tuple[float, float]] = []
        inks: list[str] = []
        for r in range(self.rows):
            for c in range(self.cols):
                idx = self.grid[r][c]
                pattern = self.hatches[idx] if idx < len(self.hatches) else None
                if not pattern:
                    continue
                cx, cy = self.cell_pos(r, c)
                seg = hatch_segments(pattern, cx - self.pitch / 2, cy - self.pitch / 2, self.pitch)
                pts += seg
                inks += [self.mark_of(idx)] * (len(seg) // 2)
        self.hatch = segment_bars(self.ctx, pts, inks, max(1.2, self.pitch / 18))

    def mark_of(self, idx: int) -> str:
        """The hatch colour of palette index ``idx``."""
        return self.marks[idx] if idx < len(self.marks) else self.mark

    def cell_pos(self, r: int, c: int) -> tuple[float, float]:
        x0, y1 = self.top_left
        return (x0 + (c + 0.5) * self.pitch, y1 - (r + 0.5) * self.pitch)

    def cell_at(self, p: Sequence[float]) -> tuple[int, int] | None:
        x0, y1 = self.top_left
        c = math.floor((p[0] - x0) / self.pitch)
        r = math.floor((y1 - p[1]) / self.pitch)
        if 0 <= r < self.rows and 0 <= c < self.cols:
            return r, c
        return None

    def box(self) -> Box:
        x0, y1 = self.top_left
        return (x0, y1 - self.rows * self.pitch, x0 + self.cols * self.pitch, y1)

    def paint(self, r: int, c: int, colour: int) -> bool:
        """Set one cell; True when it changed."""
        import numpy as np

        if self.grid[r][c] == colour:
            return False
        self.grid[r][c] = colour
        cols = np.array(self.cells.colors, dtype=float)
        cols[r * self.cols + c] = self._rgb(colour)
        self.cells.colors = cols
        self._dirty_hatch = True
        return True

    def refresh(self) -> None:
        """Rebuild the hatch marks after painting (once per frame, not per cell)."""
        if getattr(self, "_dirty_hatch", False):
            self._hatch()
            self._dirty_hatch = False

    def draw(self) -> None:
        self.refresh()
        for s in self.stims:
            s.draw()
        if self.rows and self.hatch is not None:
            self.hatch.draw()


def help_line(ctx: Any, text: str, width: float, bottom: float) -> Any:
    """The help line: dim text wrapped to ``width``, its bottom edge at ``bottom``."""
    return make_text(
        ctx, text, (0, bottom), height=MIN_TEXT_PX, color=DIM, wrap=width, valign="bottom"
    )


def text_box_of(stim: Any) -> Box:
    return text_box(stim)


# -- on-screen symbol keypad ---------------------------------------------------------------------
class Keypad:
    """Layout of on-screen symbol keys: as many per row as fit ``width`` (at most ``most``),
    each ``key`` pixels wide, rows ``pitch`` apart."""

    def __init__(
        self,
        symbols: Sequence[str],
        width: float,
        *,
        key: float = 48,
        gap: float = 8,
        most: int = 16,
    ):
        self.symbols = list(symbols)
        self.key, self.gap = key, gap
        fit = max(1, int((width + gap) // (key + gap)))
        self.per_row = max(1, min(len(self.symbols) or 1, fit, most))
        self.n_rows = math.ceil(len(self.symbols) / self.per_row) if self.symbols else 0
        self.pitch = key + gap

    def positions(self, top: float, centre: float = 0.0) -> list[tuple[str, tuple[float, float]]]:
        """(symbol, centre) of every key, the first row's top edge at ``top``."""
        out = []
        for k, sym in enumerate(self.symbols):
            rr, cc = divmod(k, self.per_row)
            in_row = min(self.per_row, len(self.symbols) - rr * self.per_row)
            x = centre + (cc - (in_row - 1) / 2) * self.pitch
            out.append((sym, (x, top - self.key / 2 - rr * self.pitch)))
        return out

    @property
    def height(self) -> float:
        return self.n_rows * self.pitch - self.gap if self.n_rows else 0.0


# -- the palette row ------------------------------------------------------------------------
class PaletteRow:
    """Colour swatches side by side (``colour:<index>``): each shows its colour, its hatch
    pattern (as the grid cells show it) and its label in black or white, whichever contrasts
    more with the swatch (WCAG 2.x ratio at least 4.5:1 for our palettes)."""

    def __init__(
        self,
        ctx: Any,
        palette: Sequence[str],
        hatches: Sequence[str | None],
        labels: Sequence[str],
        marks: Sequence[str],
        centre: tuple[float, float],
        *,
        swatch: tuple[float, float] = (46.0, 58.0),
        gap: float = 8.0,
        inks: Sequence[str] = (),
    ):

        self.ctx, self.swatch = ctx, swatch
        self.fills = list(palette)
        n = len(palette)
        sw, sh = swatch
        total = n * sw + (n - 1) * gap
        x0 = centre[0] - total / 2
        self.centres = [(x0 + sw / 2 + k * (sw + gap), centre[1]) for k in range(n)]
        self.stims: list[Any] = []
        self.labels: list[Any] = []
        pts: list[tuple[float, float]] = []
        cols: list[str] = []
        side = min(sw, sh * 0.5) - 6  # the hatch square at the top of the swatch
        for k, (colour, (cx, cy)) in enumerate(zip(palette, self.centres, strict=True)):
            self.stims.append(
                ctx.visual.Rect(
                    ctx.win,
                    width=sw,
                    height=sh,
                    pos=(cx, cy),
                    fillColor=colour,
                    lineColor=PANEL_EDGE,
                    lineWidth=2,
                    units="pix",
                    autoLog=False,
                )
            )
            pattern = hatches[k] if k < len(hatches) else None
            if pattern:
                mark = marks[k] if k < len(marks) else "#202020"
                seg = hatch_segments(pattern, cx - side / 2, cy + sh / 2 - 3 - side, side)
                pts += seg
                cols += [mark] * (len(seg) // 2)
            label = labels[k] if k < len(labels) else str(k)
            ink = inks[k] if k < len(inks) else ink_for(colour)
            if contrast_ratio(ink, colour) < 4.5:  # a palette helper that cannot be met
                ink = ink_for(colour)
            t = make_text(ctx, label, (cx, cy - sh / 4), height=20, color=ink, bold=True)
            self.labels.append(t)
            self.stims.append(t)
        bars = segment_bars(ctx, pts, cols, 2.0)
        if bars is not None:
            self.stims.append(bars)

    def box(self, k: int) -> Box:
        (cx, cy), (sw, sh) = self.centres[k], self.swatch
        return (cx - sw / 2, cy - sh / 2, cx + sw / 2, cy + sh / 2)

    def at(self, p: Sequence[float]) -> int | None:
        for k in range(len(self.centres)):
            x0, y0, x1, y1 = self.box(k)
            if x0 <= p[0] <= x1 and y0 <= p[1] <= y1:
                return k
        return None
