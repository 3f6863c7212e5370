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

__all__ = ["SCREENS", "Answer", "Ctx", "Screen", "make_screen", "register_screen"]

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

    def __init__(self, ctx: Ctx, label: str, pos: tuple[float, float], size: tuple[float, float],
                 *, height: float = 22, fill: str = PANEL, edge: str = ACCENT):
        v = ctx.visual
        self.pos, self.size = pos, size
        self.rect = v.Rect(ctx.win, width=size[0], height=size[1], pos=pos, fillColor=fill,
                           lineColor=edge, lineWidth=2, units="pix")
        self.text = v.TextStim(ctx.win, text=label, pos=pos, height=height, color=TEXT,
                               font=SANS, units="pix")

    def contains(self, p: Sequence[float]) -> bool:
        return (abs(p[0] - self.pos[0]) <= self.size[0] / 2
                and abs(p[1] - self.pos[1]) <= self.size[1] / 2)

    def draw(self, selected: bool = False) -> None:
        self.rect.lineColor = SELECT if selected else ACCENT
        self.rect.lineWidth = 5 if selected else 2
        self.rect.draw()
        self.text.draw()


class GridView:
    """A colour grid drawn as one element array (fast for large grids)."""

    def __init__(self, ctx: Ctx, grid: Sequence[Sequence[int]], palette: Sequence[str],
                 centre: tuple[float, float], box: float, *, cell: float | None = None):
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
            self.ctx.win, units="pix", nElements=len(xys), xys=np.array(xys, dtype=float),
            sizes=max(self.cell - 1.5, 1.0), elementTex=np.ones((4, 4)), elementMask=None,
            colors=np.array(cols, dtype=float), colorSpace="rgb255", sfs=0,
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


def _text(ctx: Ctx, text: str, pos: tuple[float, float], *, height: float = 24,
          color: str = TEXT, font: str = SANS, wrap: float | None = None, **kw: Any) -> Any:
    return ctx.visual.TextStim(ctx.win, text=text, pos=pos, height=height, color=color, font=font,
                               wrapWidth=wrap, units="pix", **kw)


def _capture(ctx: Ctx, stims: Sequence[Any]) -> Any:
    """Draw static stimuli once into an image; drawing it each frame is cheap."""
    if not stims:
        return None
    return ctx.visual.BufferImageStim(ctx.win, stim=list(stims))


class Screen:
    """Base of the response screens.

    Subclasses fill ``static`` (drawn once into a buffer image), keep their dynamic stimuli and
    implement :meth:`draw_dynamic`, :meth:`key` and :meth:`press`. ``targets`` maps names to
    window pixel positions (used by the test driver and the benchmark to click on things).
    """

    help_text = ""

    def __init__(self, ctx: Ctx, item: Any, view: dict[str, Any], mode: str):
        self.ctx, self.item, self.view, self.mode = ctx, item, view, mode
        self.targets: dict[str, tuple[float, float]] = {}
        self.buttons: dict[str, Button] = {}
        w, h = ctx.size
        self.w, self.h = w, h
        static = self.build()
        if self.help_text:
            static.append(_text(ctx, self.help_text, (0, -h / 2 + 24), height=17, color=DIM,
                                wrap=w - 40))
        self.image = _capture(ctx, static)

    def build(self) -> list[Any]:
        """Make the stimuli; return the static ones."""
        return []

    def add_button(self, name: str, label: str, pos: tuple[float, float],
                   size: tuple[float, float], **kw: Any) -> Button:
        b = Button(self.ctx, label, pos, size, **kw)
        self.buttons[name] = b
        self.targets[name] = pos
        return b

    def draw(self) -> None:
        if self.image is not None:
            self.image.draw()
        self.draw_dynamic()

    def draw_dynamic(self) -> None:
        for b in self.buttons.values():
            b.draw()

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


class TextScreen(Screen, ChoiceMixin, TypingMixin):
    """Fallback for a family without its own screen: its text prompt, then a typed answer
    (generate) or numbered choices (select)."""

    help_text = "Type your answer, BACKSPACE to correct, ENTER to submit.   ESC: end session"

    def build(self) -> list[Any]:
        from twofold.study import render

        prompt = render(self.item, "text", self.mode)
        static = [_text(self.ctx, prompt, (0, self.h * 0.12), height=20, font=MONO,
                        wrap=self.w - 120)]
        if self.mode == "select":
            self.help_text = "Press the number of your choice.   ESC: end session"
            self.n_choices = len(self.view.get("choices") or ())
        else:
            self.entry = _text(self.ctx, "_", (0, -self.h * 0.32), height=34, font=MONO,
                               color=ACCENT)
        return static

    def draw_dynamic(self) -> None:
        if self.entry is not None:
            self.entry.draw()

    def key(self, name: str, t: float) -> Answer | None:
        if self.mode == "select":
            return self.choice_key(name, t)
        return self.typing_key(name, t)


# -- matrices --------------------------------------------------------------------------------
def _panel_stims(ctx: Ctx, panel: dict[str, Any] | None, centre: tuple[float, float],
                 side: float, maxc: int) -> list[Any]:
    v, (x, y) = ctx.visual, centre
    out = [v.Rect(ctx.win, width=side, height=side, pos=centre, fillColor="#f2efe6",
                  lineColor=PANEL_EDGE, lineWidth=2, units="pix")]
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
    g = SHADE_GREY.get(panel.get("shade"), 120)
    fill = f"#{g:02x}{g:02x}{g:02x}"
    for i in range(n):
        cx = x - n * slot / 2 + slot * (i + 0.5)
        shape = panel.get("shape", "circle")
        if shape == "circle":
            out.append(v.Circle(ctx.win, radius=r, edges=48, pos=(cx, cy), fillColor=fill,
                                lineColor="#101010", lineWidth=1.5, units="pix"))
        else:
            nv = {"triangle": 3, "square": 4, "pentagon": 5, "hexagon": 6}.get(shape, 4)
            out.append(v.Polygon(ctx.win, edges=nv, radius=r, pos=(cx, cy),
                                 ori=45 if nv == 4 else 0, fillColor=fill, lineColor="#101010",
                                 lineWidth=1.5, units="pix"))
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
        side = min(self.h * (0.17 if select else 0.2), self.w * 0.16)
        top = self.h / 2 - side * 0.75 - 10
        x0 = -side * 1.05 if select else -self.w * 0.22 - side * 1.05
        static: list[Any] = []
        for r in range(3):
            for c in range(3):
                static += _panel_stims(self.ctx, rows[r][c],
                                       (x0 + c * side * 1.05, top - r * side * 1.05), side, maxc)
        if select:
            self.help_text = "Click the panel that completes the pattern, or press its number."
            self.n_choices = len(choices)
            cs = min(side * 0.9, (self.w - 80) / max(4, math.ceil(len(choices) / 2)) * 0.9)
            per_row = math.ceil(len(choices) / 2) if len(choices) > 4 else len(choices)
            ytop = top - 3 * side * 1.05 - cs * 0.2
            for k, ch in enumerate(choices):
                rr, cc = divmod(k, per_row)
                cx = (cc - (per_row - 1) / 2) * cs * 1.12
                cy = ytop - rr * cs * 1.2
                static += _panel_stims(self.ctx, ch, (cx, cy), cs, maxc)
                static.append(_text(self.ctx, str(k + 1), (cx - cs / 2 + 12, cy + cs / 2 - 14),
                                    height=18, color="#20242b", bold=True))
                b = Button(self.ctx, "", (cx, cy), (cs, cs))
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
        for a, vals in self.attrs.items():
            static.append(_text(self.ctx, a, (x_left + 55, y), height=20, color=DIM))
            for j, val in enumerate(vals):
                pos = (x_left + 140 + j * 78, y)
                b = Button(self.ctx, str(val), pos, (74, 36), height=15)
                self.opt_buttons[(a, val)] = b
                self.targets[f"attr:{a}={val}"] = pos
            y -= 56
        self.preview_pos = (self.w * 0.25, y - self.h * 0.12)
        self.preview_side = side
        self.preview: list[Any] = []
        self.add_button("submit", "DONE", (self.w * 0.25, -self.h / 2 + 70), (160, 48))
        return static

    def draw_dynamic(self) -> None:
        if self.mode == "select":
            return
        for (a, val), b in self.opt_buttons.items():
            b.draw(selected=self.pick.get(a) == val)
        for s in self.preview:
            s.draw()
        self.buttons["submit"].draw()

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
                    self.preview = _panel_stims(self.ctx, self.pick, self.preview_pos,
                                                self.preview_side, max(self.maxc, 6))
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
        static.append(_text(ctx, "examples", (-w / 2 + 20 + box, h / 2 - 14), height=16,
                            color=DIM))
        self.demo_views = []
        for pair in train:
            self.demo_views.append(GridView(ctx, pair["input"], palette, (x_in, y), box))
            self.demo_views.append(GridView(ctx, pair["output"], palette, (x_out, y), box))
            static.append(_text(ctx, "\u2192", ((x_in + x_out) / 2, y), height=28, color=ACCENT))
            y -= slot
        static += [g.stim for g in self.demo_views if g.stim is not None]
        right = w * 0.05
        tbox = min(h * 0.30, w * 0.26)
        self.test_view = GridView(ctx, test, palette, (right + tbox / 2, h / 2 - 30 - tbox / 2),
                                  tbox)
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
                self.buttons[f"choice:{k + 1}"] = Button(ctx, "", (cx, cy), (cb * 0.95, cb * 0.95))
                self.targets[f"choice:{k + 1}"] = (cx, cy)
            return static
        self.help_text = ("Paint the output: pick a colour (click or 0-9), click or drag cells. "
                          "ENTER or SUBMIT when done.   ESC: end session")
        # editor below the test input
        self.ebox = min(h * 0.42, w * 0.30)
        self.ecentre = (right + self.ebox / 2, -h / 2 + 60 + self.ebox / 2)
        self.colour = 1 if len(palette) > 1 else 0
        rows, cols = len(test), len(test[0])
        self.editor = GridView(ctx, [[0] * cols for _ in range(rows)], palette, self.ecentre,
                               self.ebox)
        bx = right + self.ebox + 85
        by = self.ecentre[1] + self.ebox / 2 - 20
        for k, colour in enumerate(palette):
            pos = (bx - 40 + (k % 2) * 46, by - (k // 2) * 46)
            self.buttons[f"colour:{k}"] = Button(ctx, str(k), pos, (40, 40), height=14,
                                                 fill=colour, edge=PANEL_EDGE)
            self.targets[f"colour:{k}"] = pos
        y2 = by - math.ceil(len(palette) / 2) * 46 - 10
        for name, label, pos in (
            ("rows-", "row -", (bx - 40, y2)), ("rows+", "row +", (bx + 6, y2)),
            ("cols-", "col -", (bx - 40, y2 - 40)), ("cols+", "col +", (bx + 6, y2 - 40)),
        ):
            self.add_button(name, label, pos, (44, 34), height=13)
        self.add_button("copy", "copy input", (bx - 17, y2 - 86), (100, 34), height=14)
        self.add_button("reset", "reset", (bx - 17, y2 - 126), (100, 34), height=14)
        self.add_button("submit", "SUBMIT", (bx - 17, y2 - 176), (100, 44), height=16)
        self.size_label = _text(ctx, "", (self.ecentre[0], self.ecentre[1] + self.ebox / 2 + 16),
                                height=15, color=DIM)
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
        grid = [[ed.grid[r][c] if r < ed.rows and c < ed.cols else 0 for c in range(cols)]
                for r in range(rows)]
        ed.set(grid)
        self._update_targets()

    def draw_dynamic(self) -> None:
        if self.mode == "select":
            return
        self.editor.draw()
        self.size_label.draw()
        for name, b in self.buttons.items():
            b.draw(selected=name == f"colour:{self.colour}")

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
                self._resize(step if name.startswith("rows") else 0,
                             step if name.startswith("cols") else 0)
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


SCREENS: dict[str, type[Screen]] = {"matrices": MatricesScreen, "grids": GridsScreen}


def register_screen(family: str, screen: type[Screen]) -> type[Screen]:
    """Use ``screen`` for items of ``family`` (a lab's own family can bring its own screen)."""
    SCREENS[family] = screen
    return screen


def make_screen(ctx: Ctx, item: Any, view: dict[str, Any], mode: str) -> Screen:
    """The response screen for ``item`` (its family's screen, or the text fallback)."""
    cls = SCREENS.get(item.family, TextScreen)
    try:
        return cls(ctx, item, view, mode)
    except (KeyError, TypeError, IndexError, ValueError):
        if cls is TextScreen:
            raise
        # a view shape this screen does not know: show the family's own text prompt instead
        return TextScreen(ctx, item, view, mode)
