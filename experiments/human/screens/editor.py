"""Paint: the grid editor (our own design).

The answer grid stands in the scene's ``answer_box`` at the item's own cell size (the scale of
the stimulus), its top-left corner at the box's. Under it, in the strip: a palette row (each
swatch shows its colour, its hatch pattern and its label in black or white for contrast), then
the tools: ``fill`` (the next click fills the touching area of one colour), ``copy`` (the probe
grid into the answer), ``clear``, ``undo``, ``rows-``/``rows+``/``cols-``/``cols+``, ``size``
(then type rows x cols, e.g. ``4x6``, and ENTER) and ``submit``.

Keys: a swatch's label (or its index digit) picks that colour; BACKSPACE undoes; ENTER submits.
Every edit is one undo step: a click, a whole drag stroke, a fill, a copy, a clear, a resize.
Drags paint continuous strokes: every cell the pointer passed between two mouse positions is
painted, however fast the drag.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from .base import ROW, Answer, Screen
from .widgets import ACCENT, DIM, GridEditorView, Highlight, PaletteRow, make_text

__all__ = ["EditorScreen"]

SWATCH = (46.0, 58.0)
_KEYNAME = {".": "period", ",": "comma", "-": "minus", "/": "slash", " ": "space"}
UNDO_DEPTH = 500


class EditorScreen(Screen):
    """Paint an answer grid: palette, click and drag, fill, copy, clear, undo, size, submit."""

    def prepare(self) -> None:
        o = self.options
        self.palette = [str(c) for c in o.get("palette") or ("#ffffff", "#000000")]
        self.hatch_names = list(o.get("hatches") or [None] * len(self.palette))
        self.labels = [
            str(x) for x in o.get("labels") or [str(k) for k in range(len(self.palette))]
        ]
        self.inks = [str(x) for x in o.get("inks") or ()]
        self.start = [list(r) for r in o.get("start") or [[0]]]
        self.empty = int(o.get("empty", 0))
        self.max_size = tuple(o.get("max_size") or (30, 30))
        self.help_text = (
            "Pick a colour (click it or press its label), then click or drag over cells. "
            "BACKSPACE undoes, ENTER submits.   ESC: end session"
        )
        self.rows = [SWATCH[1], ROW]

    def build(self) -> list[Any]:
        from twofold.study import get_family
        from twofold.study.scene import Grid

        o = self.options
        ab = self.scene.answer_box or (0.0, 0.0, self.scene.width, self.scene.height)
        x0, y0, x1, y1 = self.painter.box_px(ab)
        self.answer_px = (x0, y0, x1, y1)
        cell = float(o.get("cell") or 20.0)
        pitch = cell * self.painter.scale
        blank = [[self.empty] * len(self.start[0]) for _ in self.start]
        # the look of an answer grid as the family draws it (hatch inks, cell borders)
        marks: list[str] = []
        mark, line = "#202020", "#7a7a7a"
        try:
            ans = get_family(self.item.family).answer_scene(self.item, self.mode, blank)
            g = next(e for e in ans.elements if isinstance(e, Grid))
            marks = [
                g.mark_of(k) if hasattr(g, "mark_of") else g.mark for k in range(len(self.palette))
            ]
            mark, line = g.mark, g.line
        except (StopIteration, ValueError, TypeError, KeyError, IndexError):
            pass
        self.marks = marks
        self.view = GridEditorView(
            self.ctx,
            blank,
            self.palette,
            self.hatch_names,
            (x0, y1),
            pitch,
            mark=mark,
            line=line,
            marks=marks,
        )
        centre_x = max(
            -self.w / 2 + 20 + self._palette_width() / 2,
            min((x0 + x1) / 2, self.w / 2 - 20 - self._palette_width() / 2),
        )
        self.swatches = PaletteRow(
            self.ctx,
            self.palette,
            self.hatch_names,
            self.labels,
            marks,
            (centre_x, self.row_y(0)),
            swatch=SWATCH,
            inks=self.inks,
        )
        for k, c in enumerate(self.swatches.centres):
            self.targets[f"colour:{k}"] = c
        tools = [
            ("fill", "fill"),
            ("copy", "copy grid"),
            ("clear", "clear"),
            ("undo", "undo"),
            ("rows-", "rows -"),
            ("rows+", "rows +"),
            ("cols-", "cols -"),
            ("cols+", "cols +"),
            ("size", "size..."),
            ("submit", "SUBMIT"),
        ]
        self.row_of_buttons(tools, self.row_y(1), gap=8)
        sx0, _, sx1, _ = self.swatches.box(len(self.palette) - 1)
        self.size_text = make_text(
            self.ctx, "", (sx1 + 16, self.row_y(0)), color=DIM, anchor="left", height=20
        )
        self.dynamic_texts.append(("size", self.size_text))
        self.colour = next((k for k in range(len(self.palette)) if k != self.empty), 0)
        self.pick_mark = Highlight(self.ctx, ACCENT, width=4, gap=4)
        self.tool_mark = Highlight(self.ctx, ACCENT, width=3, gap=3)
        self.fill_mode = False
        self.typing_size: str | None = None
        self.undo_stack: list[list[list[int]]] = []
        self.stroke: tuple[float, float] | None = None  # last drag point of a stroke
        self.stroke_saved = False
        self._update()
        return list(self.swatches.stims)

    def _palette_width(self) -> float:
        n = len(self.palette)
        return n * SWATCH[0] + (n - 1) * 8 + 160

    # -- state ---------------------------------------------------------------------------------
    def _update(self) -> None:
        v = self.view
        self.targets = {k: p for k, p in self.targets.items() if not k.startswith("cell:")}
        for r in range(v.rows):
            for c in range(v.cols):
                self.targets[f"cell:{r},{c}"] = v.cell_pos(r, c)
        if self.typing_size is not None:
            self.size_text.text = f"size: {self.typing_size}_"
            self.size_text.color = ACCENT
        else:
            self.size_text.text = f"{v.rows} x {v.cols}"
            self.size_text.color = DIM

    def _save(self) -> None:
        self.undo_stack.append([list(r) for r in self.view.grid])
        del self.undo_stack[:-UNDO_DEPTH]

    def _set(self, grid: list[list[int]]) -> None:
        """Replace the whole answer grid as one undoable edit."""
        if grid == self.view.grid:
            return
        self._save()
        self.view.set(grid)
        self._update()

    def _undo(self) -> None:
        if self.undo_stack:
            self.view.set(self.undo_stack.pop())
            self._update()

    def _resize(self, rows: int, cols: int) -> None:
        v = self.view
        rows = min(max(rows, 1), int(self.max_size[0]))
        cols = min(max(cols, 1), int(self.max_size[1]))
        grid = [
            [v.grid[r][c] if r < v.rows and c < v.cols else self.empty for c in range(cols)]
            for r in range(rows)
        ]
        self._set(grid)

    def _paint(self, cell: tuple[int, int]) -> None:
        if self.view.grid[cell[0]][cell[1]] == self.colour:
            return
        if not self.stroke_saved:  # the first change of a stroke opens its undo step
            self._save()
            self.stroke_saved = True
        self.view.paint(cell[0], cell[1], self.colour)

    def _fill(self, cell: tuple[int, int]) -> None:
        g = [list(r) for r in self.view.grid]
        old = g[cell[0]][cell[1]]
        if old == self.colour:
            return
        todo = [cell]
        while todo:
            r, c = todo.pop()
            if 0 <= r < len(g) and 0 <= c < len(g[0]) and g[r][c] == old:
                g[r][c] = self.colour
                todo += [(r + 1, c), (r - 1, c), (r, c + 1), (r, c - 1)]
        self._set(g)

    # -- drawing -------------------------------------------------------------------------------
    def draw_dynamic(self) -> None:
        self.view.draw()
        self.pick_mark.draw(self.swatches.box(self.colour))
        if self.fill_mode:
            self.tool_mark.draw(self.buttons["fill"].box())
        if self.typing_size is not None:
            self.tool_mark.draw(self.buttons["size"].box())
        self.size_text.draw()

    def extra_boxes(self) -> list[tuple[str, float, float, float, float, float | None]]:
        out: list[tuple[str, float, float, float, float, float | None]] = []
        v = self.view
        if v.rows:
            x0, y0, x1, y1 = v.box()
            out.append(("answer-grid", x0, y0, x1, y1, None))
            out.append(("cell", x0, y1 - v.pitch, x0 + v.pitch, y1, None))
        for k, t in enumerate(self.swatches.labels):
            out.append((f"swatch:{k}", *self.swatches.box(k), None))
            from .paint import text_box

            out.append((f"swatch-label@{k}", *text_box(t), float(t.height)))
        return out

    # -- input ---------------------------------------------------------------------------------
    def _answer(self, t: float) -> Answer:
        return Answer([list(r) for r in self.view.grid], t)

    def key(self, name: str, t: float) -> Answer | None:
        if self.typing_size is not None:
            if name in ("return", "enter", "num_enter"):
                nums = [int(x) for x in self.typing_size.replace("x", " ").split() if x.isdigit()]
                self.typing_size = None
                if len(nums) == 2:
                    self._resize(nums[0], nums[1])
            elif name == "backspace":
                self.typing_size = self.typing_size[:-1]
            else:
                ch = name.replace("num_", "")
                if ch.isdigit() and len(self.typing_size) < 7:
                    self.typing_size += ch
                elif ch in ("x", "space", "comma", "multiply") and "x" not in self.typing_size:
                    self.typing_size += "x"
            self._update()
            return None
        if name in ("return", "enter", "num_enter"):
            return self._answer(t)
        if name == "backspace":
            self._undo()
            return None
        for k, lab in enumerate(self.labels):
            if name == _KEYNAME.get(lab, lab.lower()):
                self.colour = k
                return None
        key = name.replace("num_", "")
        if key.isdigit() and int(key) < len(self.palette):
            self.colour = int(key)
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        self.stroke, self.stroke_saved = None, False
        cell = self.view.cell_at(pos)
        if cell is not None:
            if self.fill_mode:
                self._fill(cell)
                self.fill_mode = False
            else:
                self._paint(cell)
                self.stroke = (float(pos[0]), float(pos[1]))
            return None
        k = self.swatches.at(pos)
        if k is not None:
            self.colour = k
            return None
        v = self.view
        for name, b in self.buttons.items():
            if not b.contains(pos):
                continue
            if name == "fill":
                self.fill_mode = not self.fill_mode
            elif name == "copy":
                self._set([list(r) for r in self.start])
            elif name == "clear":
                self._set([[self.empty] * v.cols for _ in range(v.rows)])
            elif name == "undo":
                self._undo()
            elif name in ("rows-", "rows+", "cols-", "cols+"):
                step = 1 if name.endswith("+") else -1
                if name.startswith("rows"):
                    self._resize(v.rows + step, v.cols)
                else:
                    self._resize(v.rows, v.cols + step)
            elif name == "size":
                self.typing_size = "" if self.typing_size is None else None
                self._update()
            elif name == "submit":
                return self._answer(t)
        return None

    def drag(self, pos: Sequence[float]) -> None:
        """The pointer moved with the button held: paint every cell on the way from the last
        point of the stroke (a continuous stroke, however fast the drag)."""
        if self.stroke is None:
            return
        (ax, ay), (bx, by) = self.stroke, (float(pos[0]), float(pos[1]))
        if (ax, ay) == (bx, by):
            return
        steps = max(1, math.ceil(math.hypot(bx - ax, by - ay) / (self.view.pitch / 4)))
        for k in range(1, steps + 1):
            cell = self.view.cell_at((ax + (bx - ax) * k / steps, ay + (by - ay) * k / steps))
            if cell is not None:
                self._paint(cell)
        self.stroke = (bx, by)
