"""Label: give each test panel (slot ``test:k``) one of the set labels, review, submit.

Keys A or F give the first label, B or J the second; a click on ``label:A`` / ``label:B`` does
the same, and a click on a test panel (``test:k``) makes it the one to label next, so any label
can be changed. After the last label nothing is submitted at once: the review state shows
``submit`` (or press ENTER). With a stated rule (the block's ``state_rule``, or the response's
``rule`` option) a typed rule box in the strip, under the A/B buttons, must be filled first;
in that state typed letters go to the rule box and labels change by clicking.

The chosen label is drawn in the scene's label box under each test panel (role
``label-box``), or under the panel when the scene has none.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .base import MARGIN, ROW, Answer, Screen
from .widgets import (
    ACCENT,
    DIM,
    MIN_TEXT_PX,
    MONO,
    PANEL,
    SELECT,
    Badge,
    Highlight,
    entry_frame,
    key_char,
    make_text,
    text_width,
)

__all__ = ["LabelScreen"]

RULE_ROW = 48.0
#: badge colours of the first and second label
LABEL_FILL = (ACCENT, SELECT)


class LabelScreen(Screen):
    """Set labels for the test panels, a review state, an optional typed rule."""

    def prepare(self) -> None:
        self.labels_of = [str(x) for x in self.options.get("labels") or ("A", "B")]
        self.rule = bool(self.state_rule or self.options.get("rule"))
        tests = [s for s in self.scene.slots if s.key.startswith("test:")]
        self.test_keys = sorted((s.key for s in tests), key=lambda k: int(k.split(":")[1]))
        self.n = len(self.test_keys)
        self.given: list[str | None] = [None] * self.n
        self.current: int | None = 0 if self.n else None
        self.rule_text = ""
        self.labels_t = 0.0
        a, b = self.labels_of[0], self.labels_of[1]
        self.help_text = (
            f"Label each test panel: {a} (or F) for set {a}, {b} (or J) for set {b}; click a "
            "panel to change its label. ENTER or SUBMIT when done.   ESC: end session"
        )
        if self.rule:
            self.help_text = (
                f"Label each test panel: {a} (or F) for set {a}, {b} (or J) for set {b}; click a "
                "panel to change its label. Then type the rule, ENTER to submit.   ESC: end session"
            )
        self.rows = [ROW] + ([RULE_ROW] if self.rule else [])

    def build(self) -> list[Any]:
        static: list[Any] = []
        self.areas: list[tuple[float, float, float, float]] = []
        boxes = [e for e in self.scene.elements if getattr(e, "role", "") == "label-box"]
        self.badges: list[Badge] = []
        for key in self.test_keys:
            box = self.painter.slot_px(key)
            self.areas.append(box)
            self.targets[key] = ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2)
            slot = self.scene.slot(key)
            near = [
                b
                for b in boxes
                if b.bbox()[3] <= slot.y - slot.h / 2 + 1e-6 + 60
                and abs((b.bbox()[0] + b.bbox()[2]) / 2 - slot.x) < slot.w
            ]
            if near:
                nb = min(near, key=lambda b: abs((b.bbox()[0] + b.bbox()[2]) / 2 - slot.x))
                x0, y0, x1, y1 = self.painter.box_px(nb.bbox())
                pos = ((x0 + x1) / 2, (y0 + y1) / 2)
                height = max(MIN_TEXT_PX, min((y1 - y0) * 0.72, 30.0))
            else:
                pos = ((box[0] + box[2]) / 2, box[1] - 20)
                height = 22.0
            self.badges.append(Badge(self.ctx, pos, height=height))
        y = self.row_y(0)
        specs = [(f"label:{lab}", f"Set {lab}") for lab in self.labels_of[:2]]
        self.row_of_buttons(specs, y, gap=30, min_width=140)
        last = self.buttons[specs[-1][0]].box()
        sub_w = 140.0
        self.add_button(
            "submit", "SUBMIT", (last[2] + 60 + sub_w / 2, y), (sub_w, ROW), dynamic=True
        )
        self.cursor = Highlight(self.ctx, ACCENT, width=4, gap=4)
        if self.rule:
            y2 = self.row_y(1)
            self.prompt = make_text(
                self.ctx, "The rule:", (-self.w / 2 + MARGIN + 8, y2), color=DIM, anchor="left"
            )
            x0 = -self.w / 2 + MARGIN + 8 + text_width(self.prompt) + 14
            x1 = self.w / 2 - MARGIN - 8
            self.rule_box = (x0, y2 - RULE_ROW / 2, x1, y2 + RULE_ROW / 2)
            self.rule_frame = entry_frame(self.ctx, self.rule_box, DIM)
            self.entry = make_text(
                self.ctx, "", (x0 + 8, y2), height=22, color=ACCENT, font=MONO, anchor="left"
            )
            self.dynamic_texts += [("rule-prompt", self.prompt), ("rule", self.entry)]
        return static

    # -- state -----------------------------------------------------------------------------
    @property
    def review(self) -> bool:
        return all(g is not None for g in self.given)

    def showing(self, name: str) -> bool:
        return name != "submit" or self.review

    def visible_texts(self) -> list[tuple[str, Any]]:
        out = [(f"badge:{k + 1}", b.text) for k, b in enumerate(self.badges) if b.value]
        if self.rule and self.review:
            out += self.dynamic_texts
        return out

    def _give(self, lab: str, t: float) -> None:
        if self.current is None:
            return
        k = self.current
        self.given[k] = lab
        self.badges[k].set(lab, LABEL_FILL[self.labels_of.index(lab) % 2])
        self.labels_t = t
        nxt = [j for j in list(range(k + 1, self.n)) + list(range(k)) if self.given[j] is None]
        self.current = nxt[0] if nxt else None
        if self.review and self.rule:
            self._show_rule()

    def _show_rule(self) -> None:
        self.entry.text = self.rule_text + "_"
        room = self.rule_box[2] - self.rule_box[0] - 16
        self.entry.height = 22
        if text_width(self.entry) > room:
            self.entry.height = max(MIN_TEXT_PX, 22 * room / text_width(self.entry))

    def _submit(self, t: float) -> Answer | None:
        if not self.review:
            return None
        value = "".join(g or "" for g in self.given)
        if self.rule:
            if not self.rule_text.strip():
                return None
            # the classification is the response (timed at its last label); the rule is kept
            return Answer(value, self.labels_t, f"rule statement: {self.rule_text}")
        return Answer(value, t)

    # -- input -----------------------------------------------------------------------------
    def key(self, name: str, t: float) -> Answer | None:
        if name in ("return", "enter", "num_enter"):
            return self._submit(t)
        if self.rule and self.review:
            if name == "backspace":
                self.rule_text = self.rule_text[:-1]
            else:
                ch = key_char(name)
                if len(ch) == 1 and (ch.isalnum() or ch in " -,./") and len(self.rule_text) < 80:
                    self.rule_text += ch
            self._show_rule()
            return None
        first, second = self.labels_of[0], self.labels_of[1]
        lab = {first.lower(): first, "f": first, second.lower(): second, "j": second}.get(name)
        if lab is not None:
            self._give(lab, t)
        elif name == "backspace":  # step back: clear the previous label
            k = (self.current if self.current is not None else self.n) - 1
            if 0 <= k < self.n:
                self.given[k] = None
                self.badges[k].set("", PANEL)
                self.current = k
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        for k, (x0, y0, x1, y1) in enumerate(self.areas):
            if x0 <= pos[0] <= x1 and y0 <= pos[1] <= y1:
                self.current = k
                return None
        for lab in self.labels_of[:2]:
            if self.buttons[f"label:{lab}"].contains(pos):
                self._give(lab, t)
                return None
        if self.review and self.buttons["submit"].contains(pos):
            return self._submit(t)
        return None

    def draw_dynamic(self) -> None:
        for b in self.badges:
            b.draw()
        if self.current is not None:
            self.cursor.draw(self.areas[self.current])
        if self.review:
            self.buttons["submit"].draw()
            if self.rule:
                self.rule_frame.draw()
                self.prompt.draw()
                self.entry.draw()
