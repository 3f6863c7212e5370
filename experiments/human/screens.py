"""Participant screens drawn with PsychoPy (imported only by the runner, never at package import).

Every response screen is built from the family's structured view
(``twofold.study.render(item, "structured", mode)``), so a person sees the same content a machine
gets. A screen draws itself, takes key presses and mouse presses, and returns an :class:`Answer`
when the respondent submits. Screens register per family in :data:`SCREENS`; a family without
its own screen gets :class:`TextScreen` (the family's text prompt with a typed answer or numbered
choices), so a new family works in the runner at once.

Layout and colours are our own: a dark slate background, warm off-white text, amber for what can
be acted on, teal for what is selected.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from typing import Any

from twofold.study.registry import Registry

__all__ = [
    "Answer",
    "Ctx",
    "SCREENS",
    "Screen",
    "make_screen",
    "register_screen",
]

TEXT = "#e8e4da"
DIM = "#9aa0a8"
ACCENT = "#d9a441"
SELECT = "#4f9a94"
PANEL = "#343a44"
PANEL_EDGE = "#5b6370"
MONO = "DejaVu Sans Mono"
SANS = "DejaVu Sans"

#: shade levels of figure panels, as grey in 0-255 (our own ramp)
SHADE_GREY = {"white": 250, "pale": 210, "light": 165, "medium": 120, "dark": 70, "black": 15}
#: figure positions from top to bottom of a panel, as a fraction of its height
POSITIONS = ("top", "upper", "middle", "lower", "bottom")


@dataclasses.dataclass
class Answer:
    """A submitted response: its value, the event time (core clock, s) and free text detail."""

    value: Any
    t: float
    detail: str | None = None


@dataclasses.dataclass
class Ctx:
    """What screens draw on: the window, PsychoPy's visual module, the window size."""

    win: Any
    visual: Any
    size: tuple[int, int]
    background: str


def _rgb255(colour: str) -> tuple[int, int, int]:
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


class Button:
    """A labelled rectangle that can be clicked."""

    def __init__(
        self,
        ctx: Ctx,
        label: str,
        pos: tuple[float, float],
        size: tuple[float, float],
        *,
        height: float = 22,
        fill: str | None = PANEL,
        edge: str = ACCENT,
    ):
        v = ctx.visual
        self.pos, self.size = pos, size
        self.rect = v.Rect(
            ctx.win,
            width=size[0],
            height=size[1],
            pos=pos,
            fillColor=fill,
            lineColor=edge,
            lineWidth=2,
            units="pix",
        )
        self.text = (
            v.TextStim(
                ctx.win, text=label, pos=pos, height=height, color=TEXT, font=SANS, units="pix"
            )
            if label
            else None
        )
        self.selected = False

    def contains(self, p: Sequence[float]) -> bool:
        return (
            abs(p[0] - self.pos[0]) <= self.size[0] / 2
            and abs(p[1] - self.pos[1]) <= self.size[1] / 2
        )

    def stims(self) -> list[Any]:
        return [self.rect] + ([self.text] if self.text is not None else [])


class Highlight:
    """A frame drawn around the selected button (the buttons themselves are static)."""

    def __init__(self, ctx: Ctx):
        self.rect = ctx.visual.Rect(
            ctx.win, width=10, height=10, fillColor=None, lineColor=SELECT, lineWidth=5, units="pix"
        )
        self.on: Button | None = None

    def draw(self, button: Button | None) -> None:
        if button is None:
            return
        if button is not self.on:  # changing a stimulus costs time: only on a change
            self.on = button
            self.rect.pos = button.pos
            self.rect.width, self.rect.height = button.size[0] + 8, button.size[1] + 8
        self.rect.draw()


class GridView:
    """A colour grid drawn as one element array (fast for large grids)."""

    def __init__(
        self,
        ctx: Ctx,
        grid: Sequence[Sequence[int]],
        palette: Sequence[str],
        centre: tuple[float, float],
        box: float,
        *,
        cell: float | None = None,
    ):
        self.ctx, self.palette = ctx, [_rgb255(c) for c in palette]
        self.centre, self.box, self.fixed_cell = centre, box, cell
        self.stim: Any = None
        self.set(grid)

    def set(self, grid: Sequence[Sequence[int]]) -> None:
        import numpy as np

        self.grid = [list(r) for r in grid]
        self.rows = len(self.grid)
        self.cols = len(self.grid[0]) if self.rows else 0
        n = max(self.rows, self.cols, 1)
        self.cell = self.fixed_cell or self.box / n
        xys, cols = [], []
        for r in range(self.rows):
            for c in range(self.cols):
                xys.append(self.cell_pos(r, c))
                cols.append(self.palette[int(self.grid[r][c]) % len(self.palette)])
        if not xys:
            self.stim = None
            return
        self.stim = self.ctx.visual.ElementArrayStim(
            self.ctx.win,
            units="pix",
            nElements=len(xys),
            xys=np.array(xys, dtype=float),
            sizes=max(self.cell - 1.5, 1.0),
            elementTex=np.ones((4, 4)),
            elementMask=None,
            colors=np.array(cols, dtype=float),
            colorSpace="rgb255",
            sfs=0,
        )

    def cell_pos(self, r: int, c: int) -> tuple[float, float]:
        x0 = self.centre[0] - self.cols * self.cell / 2 + self.cell / 2
        y0 = self.centre[1] + self.rows * self.cell / 2 - self.cell / 2
        return (x0 + c * self.cell, y0 - r * self.cell)

    def cell_at(self, p: Sequence[float]) -> tuple[int, int] | None:
        left = self.centre[0] - self.cols * self.cell / 2
        top = self.centre[1] + self.rows * self.cell / 2
        c = math.floor((p[0] - left) / self.cell)
        r = math.floor((top - p[1]) / self.cell)
        if 0 <= r < self.rows and 0 <= c < self.cols:
            return r, c
        return None

    def paint(self, r: int, c: int, colour: int) -> None:
        import numpy as np

        if self.grid[r][c] == colour:
            return
        self.grid[r][c] = colour
        cols = np.array(self.stim.colors, dtype=float)
        cols[r * self.cols + c] = self.palette[colour % len(self.palette)]
        self.stim.colors = cols

    def draw(self) -> None:
        if self.stim is not None:
            self.stim.draw()


def _text(
    ctx: Ctx,
    text: str,
    pos: tuple[float, float],
    *,
    height: float = 24,
    color: str = TEXT,
    font: str = SANS,
    wrap: float | None = None,
    **kw: Any,
) -> Any:
    return ctx.visual.TextStim(
        ctx.win,
        text=text,
        pos=pos,
        height=height,
        color=color,
        font=font,
        wrapWidth=wrap,
        units="pix",
        **kw,
    )


def _capture(ctx: Ctx, stims: Sequence[Any]) -> Any:
    """Draw static stimuli once into an image; drawing it each frame is cheap."""
    if not stims:
        return None
    # no interpolation: the image is drawn 1:1, and linear filtering is slow in software GL
    return ctx.visual.BufferImageStim(ctx.win, stim=list(stims), interpolate=False)


class Screen:
    """Base of the response screens.

    Subclasses fill ``static`` (drawn once into a buffer image), keep their dynamic stimuli and
    implement :meth:`draw_dynamic`, :meth:`key` and :meth:`press`. ``targets`` maps names to
    window pixel positions (used by the test driver and the benchmark to click on things).
    """

    help_text = ""
    #: the bank choice numbers in the order this screen shows them (set by the runner; None
    #: when the choices are in bank order)
    choice_order: tuple[int, ...] | None = None

    def __init__(
        self, ctx: Ctx, item: Any, view: dict[str, Any], mode: str, *, state_rule: bool = False
    ):
        self.ctx, self.item, self.view, self.mode = ctx, item, view, mode
        self.state_rule = state_rule
        self.targets: dict[str, tuple[float, float]] = {}
        self.buttons: dict[str, Button] = {}
        w, h = ctx.size
        self.w, self.h = w, h
        static = self.build()
        for b in self.buttons.values():
            static += b.stims()
        if self.help_text:
            static.append(
                _text(ctx, self.help_text, (0, -h / 2 + 24), height=17, color=DIM, wrap=w - 40)
            )
        self.image = _capture(ctx, static)

    def build(self) -> list[Any]:
        """Make the stimuli; return the static ones."""
        return []

    def add_button(
        self, name: str, label: str, pos: tuple[float, float], size: tuple[float, float], **kw: Any
    ) -> Button:
        b = Button(self.ctx, label, pos, size, **kw)
        self.buttons[name] = b
        self.targets[name] = pos
        return b

    def draw(self) -> None:
        if self.image is not None:
            self.image.draw()
        self.draw_dynamic()

    def draw_dynamic(self) -> None:
        return None

    def key(self, name: str, t: float) -> Answer | None:
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        return None

    def drag(self, pos: Sequence[float]) -> None:
        return None


# -- choices (any family in select mode) -----------------------------------------------------
class ChoiceMixin:
    """Numbered choices answered by clicking one or pressing its number key."""

    n_choices = 0
    buttons: dict[str, Button]

    def choice_key(self, name: str, t: float) -> Answer | None:
        key = name.replace("num_", "")
        if key.isdigit() and 1 <= int(key) <= self.n_choices:
            return Answer(int(key), t)
        return None

    def choice_press(self, pos: Sequence[float], t: float) -> Answer | None:
        for k in range(1, self.n_choices + 1):
            b = self.buttons.get(f"choice:{k}")
            if b is not None and b.contains(pos):
                return Answer(k, t)
        return None


class TypingMixin:
    """A typed answer with visible editing: letters and digits, backspace, enter to submit."""

    typed = ""
    entry: Any = None
    allowed: Callable[[str], bool] = staticmethod(lambda ch: ch.isalnum())

    _NAMED = {"space": " ", "minus": "-", "comma": ",", "period": ".", "slash": "/"}

    def typing_key(self, name: str, t: float) -> Answer | None:
        if name in ("return", "enter", "num_enter"):
            if self.typed:
                return Answer(self.typed, t)
            return None
        if name == "backspace":
            self.typed = self.typed[:-1]
        else:
            ch = self._NAMED.get(name, name.replace("num_", ""))
            if len(ch) == 1 and self.allowed(ch) and len(self.typed) < 60:
                self.typed += ch
        if self.entry is not None:
            self.entry.text = self.typed + "_"
        return None


class ChoiceOrTypingMixin(ChoiceMixin, TypingMixin):
    """Numbered choices in select mode, a typed answer otherwise."""

    mode: str

    def draw_dynamic(self) -> None:
        if self.entry is not None:
            self.entry.draw()

    def key(self, name: str, t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_key(name, t)
        return self.typing_key(name, t)


class TextScreen(ChoiceOrTypingMixin, Screen):
    """Fallback for a family without its own screen: its text prompt, then a typed answer
    (generate) or numbered choices (select)."""

    help_text = "Type your answer, BACKSPACE to correct, ENTER to submit.   ESC: end session"

    def build(self) -> list[Any]:
        from twofold.study import render

        prompt = render(self.item, "text", self.mode)
        static = [
            _text(self.ctx, prompt, (0, self.h * 0.12), height=20, font=MONO, wrap=self.w - 120)
        ]
        if self.mode == "select":
            self.help_text = "Press the number of your choice.   ESC: end session"
            self.n_choices = len(self.view.get("choices") or ())
        else:
            self.entry = _text(
                self.ctx, "_", (0, -self.h * 0.32), height=34, font=MONO, color=ACCENT
            )
        return static


# -- matrices --------------------------------------------------------------------------------
def _panel_stims(
    ctx: Ctx, panel: dict[str, Any] | None, centre: tuple[float, float], side: float, maxc: int
) -> list[Any]:
    v, (x, y) = ctx.visual, centre
    out = [
        v.Rect(
            ctx.win,
            width=side,
            height=side,
            pos=centre,
            fillColor="#f2efe6",
            lineColor=PANEL_EDGE,
            lineWidth=2,
            units="pix",
        )
    ]
    if panel is None:
        out.append(_text(ctx, "?", centre, height=side * 0.5, color="#5b6370"))
        return out
    n = int(panel.get("count", 1))
    slot = side * 0.9 / max(maxc, 1)
    base = min(slot * 0.45, side * 0.16)
    r = base * (0.35 + 0.65 * int(panel.get("size", 3)) / 6)
    margin = base + side * 0.04
    pos = POSITIONS.index(panel["position"]) if panel.get("position") in POSITIONS else 2
    cy = y + side / 2 - margin - pos * (side - 2 * margin) / 4
    g = SHADE_GREY.get(str(panel.get("shade")), 120)
    fill = f"#{g:02x}{g:02x}{g:02x}"
    for i in range(n):
        cx = x - n * slot / 2 + slot * (i + 0.5)
        shape = panel.get("shape", "circle")
        if shape == "circle":
            out.append(
                v.Circle(
                    ctx.win,
                    radius=r,
                    edges=48,
                    pos=(cx, cy),
                    fillColor=fill,
                    lineColor="#101010",
                    lineWidth=1.5,
                    units="pix",
                )
            )
        else:
            nv = {"triangle": 3, "square": 4, "pentagon": 5, "hexagon": 6}.get(shape, 4)
            out.append(
                v.Polygon(
                    ctx.win,
                    edges=nv,
                    radius=r,
                    pos=(cx, cy),
                    ori=45 if nv == 4 else 0,
                    fillColor=fill,
                    lineColor="#101010",
                    lineWidth=1.5,
                    units="pix",
                )
            )
    return out


class MatricesScreen(Screen, ChoiceMixin):
    """The 3x3 matrix with its empty cell; numbered choices (select) or a panel builder
    (generate: pick each attribute, then submit)."""

    def build(self) -> list[Any]:
        rows = self.view["panels"]
        choices = self.view.get("choices") or []
        pool = [p for row in rows for p in row if p] + list(choices)
        maxc = max([int(p.get("count", 1)) for p in pool] + [1])
        self.maxc = maxc
        select = self.mode == "select"
        side = min(self.h * (0.15 if select else 0.2), self.w * (0.14 if select else 0.16))
        top = self.h / 2 - side * 0.75 - 10
        x0 = -side * 1.05 if select else -self.w * 0.22 - side * 1.05
        static: list[Any] = []
        for r in range(3):
            for c in range(3):
                static += _panel_stims(
                    self.ctx, rows[r][c], (x0 + c * side * 1.05, top - r * side * 1.05), side, maxc
                )
        if select:
            self.help_text = "Click the panel that completes the pattern, or press its number."
            self.n_choices = len(choices)
            cs = min(side * 0.9, (self.w - 80) / max(4, math.ceil(len(choices) / 2)) * 0.9)
            per_row = math.ceil(len(choices) / 2) if len(choices) > 4 else len(choices)
            ytop = top - 3 * side * 1.05 - cs * 0.2
            for k, ch in enumerate(choices):
                rr, cc = divmod(k, per_row)
                cx = (cc - (per_row - 1) / 2) * cs * 1.2
                cy = ytop - rr * cs * 1.2
                static += _panel_stims(self.ctx, ch, (cx, cy), cs, maxc)
                static.append(
                    _text(
                        self.ctx,
                        str(k + 1),
                        (cx - cs / 2 - 12, cy + cs / 2 - 10),  # outside, by the top left
                        height=18,
                        color=TEXT,
                        bold=True,
                    )
                )
                b = Button(self.ctx, "", (cx, cy), (cs + 6, cs + 6), fill=None)  # a frame only
                self.buttons[f"choice:{k + 1}"] = b
                self.targets[f"choice:{k + 1}"] = (cx, cy)
            return static
        # generate: one row of option buttons per attribute, a preview, a submit button
        self.help_text = "Choose each property of the missing panel, then click DONE."
        attrs = self.view.get("attributes") or {}
        self.attrs = {a: list(vals) for a, vals in attrs.items()}
        self.pick: dict[str, Any] = {}
        self.opt_buttons: dict[tuple[str, Any], Button] = {}
        x_left, y = self.w * 0.02, self.h / 2 - 70
        most = max((len(v) for v in self.attrs.values()), default=1)
        step = min(80.0, (self.w / 2 - x_left - 125) / most)  # option buttons fit the half
        for a, vals in self.attrs.items():
            static.append(_text(self.ctx, a, (x_left + 50, y), height=18, color=DIM))
            for j, val in enumerate(vals):
                pos = (x_left + 105 + step / 2 + j * step, y)
                b = Button(self.ctx, str(val), pos, (step - 5, 36), height=min(15, step / 5.2))
                self.opt_buttons[(a, val)] = b
                static += b.stims()
                self.targets[f"attr:{a}={val}"] = pos
            y -= 56
        self.preview_pos = (self.w * 0.25, y - self.h * 0.12)
        self.preview_side = side
        self.preview: list[Any] = []
        self.highlights = {a: Highlight(self.ctx) for a in self.attrs}
        self.add_button("submit", "DONE", (self.w * 0.25, -self.h / 2 + 70), (160, 48))
        return static

    def draw_dynamic(self) -> None:
        if self.mode == "select":
            return
        for a, val in self.pick.items():
            self.highlights[a].draw(self.opt_buttons[(a, val)])
        for s in self.preview:
            s.draw()

    def key(self, name: str, t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_key(name, t)
        if name in ("return", "enter") and len(self.pick) == len(self.attrs):
            return Answer(dict(self.pick), t)
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_press(pos, t)
        for (a, val), b in self.opt_buttons.items():
            if b.contains(pos):
                self.pick[a] = val
                if len(self.pick) == len(self.attrs):
                    self.preview = _panel_stims(
                        self.ctx, self.pick, self.preview_pos, self.preview_side, max(self.maxc, 6)
                    )
                return None
        if self.buttons["submit"].contains(pos) and len(self.pick) == len(self.attrs):
            return Answer(dict(self.pick), t)
        return None


# -- grids -----------------------------------------------------------------------------------
class GridsScreen(Screen, ChoiceMixin):
    """Demonstration pairs and the test input; an output grid editor (generate) or numbered
    candidate grids (select).

    Editor: pick a colour from the palette (click or digit key), click or drag to paint cells,
    change the size with the row/column buttons, copy the input, reset, submit (button or ENTER).
    """

    MAX = 30

    def build(self) -> list[Any]:
        ctx, w, h = self.ctx, self.w, self.h
        palette = self.view.get("palette") or ["#000000"]
        self.palette = palette
        train = self.view.get("train") or []
        test = self.view["test_input"]
        static: list[Any] = []
        # demonstrations in a column on the left: input -> output per row
        col_w = w * 0.42
        n = max(len(train), 1)
        slot = min((h - 80) / n, col_w / 2.3)
        box = slot * 0.86
        y = h / 2 - 30 - slot / 2
        x_in, x_out = -w / 2 + 20 + box / 2, -w / 2 + 20 + box * 1.5 + slot * 0.3
        static.append(_text(ctx, "examples", (-w / 2 + 20 + box, h / 2 - 14), height=16, color=DIM))
        self.demo_views = []
        for pair in train:
            self.demo_views.append(GridView(ctx, pair["input"], palette, (x_in, y), box))
            self.demo_views.append(GridView(ctx, pair["output"], palette, (x_out, y), box))
            static.append(_text(ctx, "\u2192", ((x_in + x_out) / 2, y), height=28, color=ACCENT))
            y -= slot
        static += [g.stim for g in self.demo_views if g.stim is not None]
        right = w * 0.05
        tbox = min(h * 0.30, w * 0.26)
        self.test_view = GridView(
            ctx, test, palette, (right + tbox / 2, h / 2 - 30 - tbox / 2), tbox
        )
        static.append(_text(ctx, "test", (right + tbox / 2, h / 2 - 14), height=16, color=DIM))
        if self.test_view.stim is not None:
            static.append(self.test_view.stim)
        if self.mode == "select":
            self.help_text = "Click the grid that follows the rule, or press its number."
            choices = self.view.get("choices") or []
            self.n_choices = len(choices)
            per_row = 4
            cb = min((w / 2 - 40) / per_row * 0.85, h * 0.2)
            for k, ch in enumerate(choices):
                rr, cc = divmod(k, per_row)
                cx = right - 10 + cb * 0.6 + cc * cb * 1.15
                cy = h / 2 - 60 - tbox - cb * 0.65 - rr * cb * 1.3
                gv = GridView(ctx, ch, palette, (cx, cy), cb * 0.85)
                if gv.stim is not None:
                    static.append(gv.stim)
                static.append(_text(ctx, str(k + 1), (cx, cy + cb * 0.5), height=16, color=TEXT))
                self.buttons[f"choice:{k + 1}"] = Button(
                    ctx, "", (cx, cy), (cb * 0.95, cb * 0.95), fill=None
                )
                self.targets[f"choice:{k + 1}"] = (cx, cy)
            return static
        self.help_text = (
            "Paint the output: pick a colour (click or 0-9), click or drag cells. "
            "ENTER or SUBMIT when done.   ESC: end session"
        )
        # editor below the test input
        self.ebox = min(h * 0.42, w * 0.30)
        self.ecentre = (right + self.ebox / 2, -h / 2 + 60 + self.ebox / 2)
        self.colour = 1 if len(palette) > 1 else 0
        rows, cols = len(test), len(test[0])
        self.editor = GridView(
            ctx, [[0] * cols for _ in range(rows)], palette, self.ecentre, self.ebox
        )
        # controls in a column right of the test input and the editor, from the top
        bx = right + max(tbox, self.ebox) + 85
        by = h / 2 - 50
        for k, colour in enumerate(palette):
            pos = (bx - 40 + (k % 2) * 46, by - (k // 2) * 46)
            self.buttons[f"colour:{k}"] = Button(
                ctx, str(k), pos, (40, 40), height=14, fill=colour, edge=PANEL_EDGE
            )
            self.targets[f"colour:{k}"] = pos
        y2 = by - math.ceil(len(palette) / 2) * 46 - 10
        for name, label, pos in (
            ("rows-", "row -", (bx - 40, y2)),
            ("rows+", "row +", (bx + 6, y2)),
            ("cols-", "col -", (bx - 40, y2 - 40)),
            ("cols+", "col +", (bx + 6, y2 - 40)),
        ):
            self.add_button(name, label, pos, (44, 34), height=13)
        self.add_button("copy", "copy input", (bx - 17, y2 - 86), (100, 34), height=14)
        self.add_button("reset", "reset", (bx - 17, y2 - 126), (100, 34), height=14)
        self.add_button("submit", "SUBMIT", (bx - 17, y2 - 176), (100, 44), height=16)
        self.highlight = Highlight(ctx)
        self.size_label = _text(
            ctx, "", (self.ecentre[0], self.ecentre[1] + self.ebox / 2 + 16), height=15, color=DIM
        )
        self._update_targets()
        return static

    def _update_targets(self) -> None:
        ed = self.editor
        self.targets = {k: v for k, v in self.targets.items() if not k.startswith("cell:")}
        for r in range(ed.rows):
            for c in range(ed.cols):
                self.targets[f"cell:{r},{c}"] = ed.cell_pos(r, c)
        self.size_label.text = f"output {ed.rows} x {ed.cols}"

    def _resize(self, dr: int, dc: int) -> None:
        ed = self.editor
        rows = min(max(ed.rows + dr, 1), self.MAX)
        cols = min(max(ed.cols + dc, 1), self.MAX)
        grid = [
            [ed.grid[r][c] if r < ed.rows and c < ed.cols else 0 for c in range(cols)]
            for r in range(rows)
        ]
        ed.set(grid)
        self._update_targets()

    def draw_dynamic(self) -> None:
        if self.mode == "select":
            return
        self.editor.draw()
        self.size_label.draw()
        self.highlight.draw(self.buttons[f"colour:{self.colour}"])

    def _answer(self, t: float) -> Answer:
        return Answer([list(r) for r in self.editor.grid], t)

    def key(self, name: str, t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_key(name, t)
        key = name.replace("num_", "")
        if key.isdigit() and int(key) < len(self.palette):
            self.colour = int(key)
        elif name in ("return", "enter"):
            return self._answer(t)
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_press(pos, t)
        cell = self.editor.cell_at(pos)
        if cell is not None:
            self.editor.paint(*cell, self.colour)
            return None
        for name, b in self.buttons.items():
            if not b.contains(pos):
                continue
            if name.startswith("colour:"):
                self.colour = int(name.split(":")[1])
            elif name in ("rows-", "rows+", "cols-", "cols+"):
                step = 1 if name.endswith("+") else -1
                self._resize(
                    step if name.startswith("rows") else 0, step if name.startswith("cols") else 0
                )
            elif name == "copy":
                self.editor.set(self.view["test_input"])
                self._update_targets()
            elif name == "reset":
                t_in = self.view["test_input"]
                self.editor.set([[0] * len(t_in[0]) for _ in t_in])
                self._update_targets()
            elif name == "submit":
                return self._answer(t)
            return None
        return None

    def drag(self, pos: Sequence[float]) -> None:
        if self.mode == "select":
            return
        cell = self.editor.cell_at(pos)
        if cell is not None:
            self.editor.paint(*cell, self.colour)


# -- strings ---------------------------------------------------------------------------------
class StringsScreen(ChoiceOrTypingMixin, Screen):
    """Source pair and target in a large monospace font, the symbol order above them; a typed
    answer with visible editing (generate; symbols that have no key get on-screen keys) or
    numbered choices (select)."""

    def build(self) -> list[Any]:
        ctx, w, h, v = self.ctx, self.w, self.h, self.view
        order = [str(x) for x in v.get("symbol_order") or []]
        self.symbols = order
        wrap = " (after the last comes the first again)" if v.get("circular") else ""
        static = [
            _text(ctx, v.get("task", ""), (0, h / 2 - 50), height=22, wrap=w - 100),
            _text(
                ctx,
                "order:  " + " ".join(order) + wrap,
                (0, h / 2 - 100),
                height=18,
                color=DIM,
                font=MONO,
                wrap=w - 80,
            ),
        ]
        big = min(
            64, (w * 0.38) / max(len(v["source"]), len(v["changed"]), len(v["target"]) + 1, 1) * 1.6
        )
        y1, y2 = h * 0.18, h * 0.02
        for y, left, right, col in (
            (y1, v["source"], v["changed"], TEXT),
            (y2, v["target"], "?", ACCENT),
        ):
            static.append(_text(ctx, left, (-w * 0.22, y), height=big, font=MONO))
            static.append(_text(ctx, "\u2192", (0, y), height=big * 0.8, color=DIM))
            static.append(_text(ctx, right, (w * 0.22, y), height=big, font=MONO, color=col))
        if self.mode == "select":
            self.help_text = "Click the answer or press its number.   ESC: end session"
            choices = [str(c) for c in v.get("choices") or []]
            self.n_choices = len(choices)
            for k, ch in enumerate(choices):
                x = (k - (len(choices) - 1) / 2) * min(220, (w - 80) / max(len(choices), 1))
                pos = (x, -h * 0.25)
                self.add_button(
                    f"choice:{k + 1}",
                    f"{k + 1}   {ch}",
                    pos,
                    (min(200, (w - 100) / max(len(choices), 1)), 70),
                    height=min(30, big * 0.6),
                )
            return static
        self.help_text = (
            "Type the answer, BACKSPACE to correct, ENTER to submit.   ESC: end session"
        )
        self.entry = _text(ctx, "_", (0, -h * 0.17), height=big, font=MONO, color=ACCENT)
        typeable = all(len(s) == 1 and s.isascii() and (s.islower() or s.isdigit()) for s in order)
        allowed = set(order)
        self.allowed = lambda ch: ch in allowed
        if not typeable:  # an invented symbol order: on-screen keys
            self.help_text = (
                "Click the symbols (or type them), DELETE removes the last, "
                "DONE submits.   ESC: end session"
            )
            per = max(1, min(len(order), 13))
            for k, sym in enumerate(order):
                rr, cc = divmod(k, per)
                pos = ((cc - (per - 1) / 2) * 62, -h * 0.28 - rr * 60)
                self.add_button(f"symbol:{sym}", sym, pos, (54, 50), height=26)
            yb = -h * 0.28 - ((len(order) - 1) // per + 1) * 60 - 10
            self.add_button("delete", "DELETE", (-90, yb), (140, 46), height=18)
            self.add_button("done", "DONE", (90, yb), (140, 46), height=18)
        return static

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_press(pos, t)
        for name, b in self.buttons.items():
            if not b.contains(pos):
                continue
            if name.startswith("symbol:") and len(self.typed) < 60:
                self.typed += name.split(":", 1)[1]
            elif name == "delete":
                self.typed = self.typed[:-1]
            elif name == "done" and self.typed:
                return Answer(self.typed, t)
            self.entry.text = self.typed + "_"
        return None


# -- contrast --------------------------------------------------------------------------------
_CONTRAST_SIZE = {"small": 0.38, "medium": 0.58, "large": 0.8}
_CONTRAST_SHADE = {"light": "#dcd6c8", "mid": "#8d8a84", "dark": "#2b2b30"}
_ROWS = {"top": 0, "middle": 1, "bottom": 2}
_COLS = {"left": 0, "centre": 1, "right": 2}


def _outline(kind: str, r: float) -> list[tuple[float, float]]:
    """Vertices (relative to the centre) of a figure of half-size ``r``."""
    if kind == "triangle":
        return [(-r, -r * 0.8), (r, -r * 0.8), (0, r * 0.9)]
    if kind == "dome":  # a half disc standing on its flat side
        arc = [
            (r * math.cos(a), -r * 0.5 + r * math.sin(a))
            for a in (math.pi * k / 16 for k in range(17))
        ]
        return arc
    if kind == "cross":
        q = r / 3
        return [
            (-q, r),
            (q, r),
            (q, q),
            (r, q),
            (r, -q),
            (q, -q),
            (q, -r),
            (-q, -r),
            (-q, -q),
            (-r, -q),
            (-r, q),
            (-q, q),
        ]
    return [(-r, -r), (r, -r), (r, r), (-r, r)]


def _contrast_panel(
    ctx: Ctx,
    objs: Sequence[dict[str, Any]],
    centre: tuple[float, float],
    side: float,
    *,
    edge: str = PANEL_EDGE,
) -> list[Any]:
    import numpy as np

    v = ctx.visual
    out = [
        v.Rect(
            ctx.win,
            width=side,
            height=side,
            pos=centre,
            fillColor="#f2efe6",
            lineColor=edge,
            lineWidth=2,
            units="pix",
        )
    ]
    cell = side / 3
    placed: list[tuple[float, float, float]] = []
    for o in objs:
        if o.get("inside") is not None and 0 <= o["inside"] < len(placed):
            cx, cy, outer = placed[o["inside"]]
            r = outer * 0.45
        else:
            cx = centre[0] + (_COLS.get(str(o.get("col")), 1) - 1) * cell
            cy = centre[1] - (_ROWS.get(str(o.get("row")), 1) - 1) * cell
            r = cell / 2 * _CONTRAST_SIZE.get(str(o.get("size")), 0.58)
        placed.append((cx, cy, r))
        verts = _outline(o.get("shape", "square"), r)
        ori = 30 if o.get("tilt") == "tilted" else 0
        dashed = o.get("edge") == "dashed"
        out.append(
            v.ShapeStim(
                ctx.win,
                vertices=verts,
                pos=(cx, cy),
                ori=ori,
                fillColor=_CONTRAST_SHADE.get(str(o.get("shade")), "#8d8a84"),
                lineColor=None if dashed else "#101010",
                lineWidth=2,
                units="pix",
            )
        )
        if dashed:  # a dotted edge: small marks along the outline
            pts = []
            closed = verts + [verts[0]]
            th = math.radians(-ori)
            for (x0, y0), (x1, y1) in zip(closed[:-1], closed[1:], strict=True):
                n = max(2, int(math.hypot(x1 - x0, y1 - y0) / 7))
                for k in range(n):
                    x, y = x0 + (x1 - x0) * k / n, y0 + (y1 - y0) * k / n
                    pts.append(
                        (
                            cx + x * math.cos(th) - y * math.sin(th),
                            cy + x * math.sin(th) + y * math.cos(th),
                        )
                    )
            out.append(
                v.ElementArrayStim(
                    ctx.win,
                    units="pix",
                    nElements=len(pts),
                    xys=np.array(pts),
                    sizes=3.5,
                    elementTex=np.ones((4, 4)),
                    elementMask=None,
                    colors=(-1, -1, -1),
                    sfs=0,
                )
            )
    return out


class ContrastScreen(Screen, TypingMixin):
    """Set A and set B side by side, the test panels below; each test panel is labelled A or B
    in turn (keys A/B or F/J, or a click on the A or B button). With ``state_rule``, a typed
    statement of the rule follows (stored verbatim). In generate mode the rule is typed."""

    state_rule = False

    def build(self) -> list[Any]:
        ctx, w, h, v = self.ctx, self.w, self.h, self.view
        sets, tests = v["sets"], v["test"]
        n_side = max(len(sets["A"]), len(sets["B"]), 1)
        per_col = 2
        n_cols = math.ceil(n_side / per_col)
        side = min((w / 2 - 60) / max(n_cols, 1) * 0.9, h * 0.19)
        static: list[Any] = []
        for s_i, label in enumerate(("A", "B")):
            x_mid = (-1 if s_i == 0 else 1) * w / 4
            static.append(
                _text(
                    ctx,
                    f"set {label}",
                    (x_mid, h / 2 - 22),
                    height=22,
                    color=ACCENT if label == "A" else SELECT,
                    bold=True,
                )
            )
            for k, objs in enumerate(sets[label]):
                cc, rr = divmod(k, per_col)
                cx = x_mid + (cc - (n_cols - 1) / 2) * side * 1.08
                cy = h / 2 - 45 - side / 2 - rr * side * 1.08
                static += _contrast_panel(ctx, objs, (cx, cy), side)
        static.append(
            ctx.visual.Line(
                ctx.win,
                start=(0, h / 2 - 10),
                end=(0, h / 2 - 60 - per_col * side * 1.08),
                lineColor=PANEL_EDGE,
                lineWidth=2,
                units="pix",
            )
        )
        tside = min(side, (w - 80) / max(len(tests), 1) * 0.8)
        ty = h / 2 - 80 - per_col * side * 1.08 - tside / 2
        self.test_pos = []
        for k, objs in enumerate(tests):
            x = (k - (len(tests) - 1) / 2) * tside * 1.25
            self.test_pos.append((x, ty))
            static += _contrast_panel(ctx, objs, (x, ty), tside)
        self.tside, self.ty = tside, ty
        self.labels: list[str] = []
        self.label_stims = [
            _text(ctx, "", (x, ty - tside / 2 - 22), height=26, bold=True) for x, _ in self.test_pos
        ]
        self.cursor = ctx.visual.Rect(
            ctx.win,
            width=tside + 10,
            height=tside + 10,
            fillColor=None,
            lineColor=ACCENT,
            lineWidth=4,
            units="pix",
        )
        self.n_tests = len(tests)
        self.stage = "label" if self.mode == "select" else "rule"
        if self.mode == "select":
            self.help_text = (
                "For each test panel in turn: A (or F) if it belongs with set A, "
                "B (or J) if with set B.   BACKSPACE: undo   ESC: end session"
            )
            yb = -h / 2 + 70
            self.add_button("label:A", "A", (-90, yb), (120, 54), height=28)
            self.add_button("label:B", "B", (90, yb), (120, 54), height=28)
        else:
            self.help_text = "Type the rule in your own words, ENTER to submit.   ESC: end session"
        self.allowed = lambda ch: ch.isalnum() or ch in " -,./"
        self.prompt = _text(
            ctx,
            "State the rule in your own words, then press ENTER:",
            (0, -h / 2 + 130),
            height=20,
            color=DIM,
        )
        self.entry = _text(
            ctx, "_", (0, -h / 2 + 80), height=26, font=MONO, color=ACCENT, wrap=w - 80
        )
        return static

    def draw_dynamic(self) -> None:
        for s in self.label_stims:
            s.draw()
        if self.stage == "label" and len(self.labels) < self.n_tests:
            self.cursor.pos = self.test_pos[len(self.labels)]
            self.cursor.draw()
        if self.stage == "rule":
            self.prompt.draw()
            self.entry.draw()

    def _label(self, lab: str, t: float) -> Answer | None:
        self.labels.append(lab)
        stim = self.label_stims[len(self.labels) - 1]
        stim.text, stim.color = lab, ACCENT if lab == "A" else SELECT
        if len(self.labels) == self.n_tests:
            if self.state_rule:
                self.stage = "rule"
                self._labels_t = t
                return None
            return Answer("".join(self.labels), t)
        return None

    def key(self, name: str, t: float) -> Answer | None:
        if self.stage == "label":
            lab = {"a": "A", "f": "A", "b": "B", "j": "B"}.get(name)
            if lab:
                return self._label(lab, t)
            if name == "backspace" and self.labels:
                self.labels.pop()
                self.label_stims[len(self.labels)].text = ""
            return None
        ans = self.typing_key(name, t)
        if ans is None:
            return None
        if self.mode == "select":  # the classification is the response; the rule is kept
            return Answer("".join(self.labels), self._labels_t, f"rule statement: {ans.value}")
        return ans

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        if self.stage != "label":
            return None
        for lab in ("A", "B"):
            if self.buttons[f"label:{lab}"].contains(pos):
                return self._label(lab, t)
        return None


#: The response screen of each family (plugins: the ``twofold.screens`` entry-point group).
SCREENS: Registry[type[Screen]] = Registry("screen", group="twofold.screens")
for _family, _screen in (
    ("contrast", ContrastScreen),
    ("grids", GridsScreen),
    ("matrices", MatricesScreen),
    ("strings", StringsScreen),
):
    SCREENS.register(_family, _screen)


def register_screen(family: str, screen: type[Screen]) -> type[Screen]:
    """Use ``screen`` for items of ``family`` (a lab's own family can bring its own screen)."""
    return SCREENS.register(family, screen)


def make_screen(
    ctx: Ctx, item: Any, view: dict[str, Any], mode: str, *, state_rule: bool = False
) -> Screen:
    """The response screen for ``item`` (its family's screen, or the text fallback)."""
    cls = SCREENS.get(item.family) if item.family in SCREENS else TextScreen
    try:
        return cls(ctx, item, view, mode, state_rule=state_rule)
    except (KeyError, TypeError, IndexError, ValueError):
        if cls is TextScreen:
            raise
        # a view shape this screen does not know: show the family's own text prompt instead
        return TextScreen(ctx, item, view, mode)
