"""Type: a typed answer with visible editing (BackSpace, Return), and on-screen keys for symbols
that cannot be typed (``symbol:<s>``, ``delete``, ``done``).

The typed text is shown in the scene's ``answer_box`` (at the stimulus's scale) or, without
one, in an entry row of the strip.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from twofold.study.colour import contrast_ratio

from .base import MARGIN, ROW, Answer, Screen
from .paint import ScenePainter
from .widgets import (
    ACCENT,
    MIN_TEXT_PX,
    MONO,
    PANEL,
    Keypad,
    entry_frame,
    ink_on_light,
    key_char,
    make_text,
    text_width,
)

__all__ = ["TypeScreen"]

MAX_CHARS = 60
ENTRY_ROW = 52.0


class TypeScreen(Screen):
    """A typed answer; with ``symbols`` in the response options, on-screen symbol keys too."""

    def prepare(self) -> None:
        self.symbols = [str(s) for s in self.options.get("symbols") or ()]
        self.typed = ""
        if self.symbols:
            # keys can type letters and digits only; invented symbols are clicked
            typeable = all(s.isascii() and s.isalnum() for s in self.symbols)
            self.help_text = (
                f"Click the symbols{' (or type them)' if typeable else ''}; DELETE removes the"
                " last one, DONE submits.   ESC: end session"
            )
        else:
            self.help_text = (
                "Type your answer; BACKSPACE corrects, ENTER submits.   ESC: end session"
            )
        self.rows = [] if self.scene.answer_box else [ENTRY_ROW]
        if self.symbols:
            self.pad = Keypad(self.symbols, self.w - 2 * MARGIN)
            self.rows += [self.pad.height, ROW]

    def allowed(self, ch: str) -> bool:
        if self.symbols:
            return ch in self.symbols
        return ch.isalnum() or ch in " -,./"

    def build(self) -> list[Any]:
        static: list[Any] = []
        if self.scene.answer_box:
            x0, y0, x1, y1 = self.painter.box_px(self.scene.answer_box)
            row = 0
        else:
            y = self.row_y(0)
            x0, x1 = -self.w * 0.3, self.w * 0.3
            y0, y1 = y - ENTRY_ROW / 2, y + ENTRY_ROW / 2
            static.append(entry_frame(self.ctx, (x0, y0, x1, y1)))
            row = 1
        self.entry_box = (x0, y0, x1, y1)
        # on the scene's own background (answer box) or on the dark entry frame: readable ink
        behind = self.scene.background if self.scene.answer_box else PANEL
        self.ink = ACCENT if contrast_ratio(ACCENT, behind) >= 4.5 else ink_on_light(behind)
        self.entry_height = max(MIN_TEXT_PX, min((y1 - y0) * 0.62, 44.0))
        self.entry = make_text(
            self.ctx,
            "_",
            (x0 + 8, (y0 + y1) / 2),
            height=self.entry_height,
            color=self.ink,
            font=MONO,
            anchor="left",
        )
        self.dynamic_texts.append(("entry", self.entry))
        self.drawn: ScenePainter | None = None
        if self.symbols:
            top = self.row_y(row) + self.rows[row] / 2
            for sym, pos in self.pad.positions(top):
                self.add_button(f"symbol:{sym}", sym, pos, (self.pad.key, self.pad.key), height=24)
            self.row_of_buttons(
                [("delete", "DELETE"), ("done", "DONE")], self.row_y(row + 1), gap=40
            )
        return static

    def _answer_scene(self, text: str) -> Any:
        """The family's drawing of ``text`` when it fits the answer box at the stimulus's
        scale (e.g. symbols in even cells, as the stimulus shows strings), else None."""
        box = self.scene.answer_box
        if box is None or not text:
            return None
        from twofold.study import get_family

        try:
            ans = get_family(self.item.family).answer_scene(self.item, self.mode, text)
        except (ValueError, TypeError, KeyError, IndexError):
            return None
        if any(getattr(e, "role", "") == "answer" for e in ans.elements):
            return None  # the default drawing (the answer written out): the entry shows it
        fits = ans.width <= box[2] - box[0] + 0.5 and ans.height <= box[3] - box[1] + 0.5
        return ans if fits else None

    def _show(self) -> None:
        self.drawn = None
        ans = self._answer_scene(self.typed)
        x0, y0, x1, y1 = self.entry_box
        self.entry.height = self.entry_height
        if ans is not None:  # painted as the family draws strings, left in the answer box
            s = self.painter.scale
            self.drawn = ScenePainter(
                self.ctx,
                ans,
                (x0, y1 - ans.height * s, x0 + ans.width * s, y1),
                scale=s,
                capture=False,
                background=False,
            )
            self.entry.text = "_"
            self.entry.pos = (x0 + ans.width * s + 4, (y0 + y1) / 2)
            return
        self.entry.pos = (x0 + 8, (y0 + y1) / 2)
        self.entry.text = self.typed + "_"
        room = x1 - x0 - 16
        tw = text_width(self.entry)
        if tw > room:
            self.entry.height = max(MIN_TEXT_PX, self.entry_height * room / tw)

    def _room_for(self, text: str) -> bool:
        if len(text) > MAX_CHARS:
            return False
        if self._answer_scene(text[:-1]) is not None or not text[:-1]:
            if self._answer_scene(text) is not None:
                return True
        room = self.entry_box[2] - self.entry_box[0] - 16
        return (len(text) + 1) * MIN_TEXT_PX * 0.61 <= room

    def draw_dynamic(self) -> None:
        if self.drawn is not None:
            self.drawn.draw()
        self.entry.draw()

    def extra_boxes(self) -> list[tuple[str, float, float, float, float, float | None]]:
        if self.drawn is None:
            return []
        return [(n, *b, lt) for n, *b, lt in self.drawn.boxes()]  # type: ignore[misc]

    def add(self, ch: str) -> None:
        if self._room_for(self.typed + ch):
            self.typed += ch
            self._show()

    def key(self, name: str, t: float) -> Answer | None:
        if name in ("return", "enter", "num_enter"):
            return Answer(self.typed, t) if self.typed else None
        if name == "backspace":
            self.typed = self.typed[:-1]
            self._show()
            return None
        ch = key_char(name)
        if len(ch) == 1 and self.allowed(ch):
            self.add(ch)
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        for name, b in self.buttons.items():
            if not b.contains(pos):
                continue
            if name.startswith("symbol:"):
                self.add(name.split(":", 1)[1])
            elif name == "delete":
                self.typed = self.typed[:-1]
                self._show()
            elif name == "done" and self.typed:
                return Answer(self.typed, t)
        return None
