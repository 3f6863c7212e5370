"""Build: pick one value per attribute (``attr:<a>=<v>``); once every attribute has a value the
family's :meth:`answer_scene <twofold.study.families.Family.answer_scene>` of the picked panel is
painted into the scene's ``answer_box`` at the stimulus's own scale; ``submit`` (or ENTER).

The option buttons stand in a column right of the scene; the scene's scale is the largest at
which that column fits beside it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .base import GAP, MARGIN, Answer, Screen
from .paint import ScenePainter
from .widgets import DIM, Button, Highlight, help_line, make_text

__all__ = ["BuildScreen"]

BTN_H = 36.0
LABEL_H = 28.0
ROW_GAP = 6.0
BTN_GAP = 8.0
SUBMIT_H = 44.0


class BuildScreen(Screen):
    """Option buttons per attribute, a preview to scale, submit."""

    def prepare(self) -> None:
        self.attrs = {str(a): list(v) for a, v in (self.options.get("attributes") or {}).items()}
        self.pick: dict[str, Any] = {}
        self.help_text = (
            "Pick one value of each property for the missing panel; the preview shows it. "
            "ENTER or SUBMIT when done.   ESC: end session"
        )
        ctx, w, h = self.ctx, self.w, self.h
        help_h = float(help_line(ctx, self.help_text, w - 2 * MARGIN, 0).boundingBox[1])
        self.widths = {
            (a, str(v)): Button.measure(ctx, str(v)) for a, vals in self.attrs.items() for v in vals
        }
        self.label_w = {a: Button.measure(ctx, a, pad=0) for a in self.attrs}
        avail_h = h - 2 * MARGIN - help_h - GAP
        sw, sh = self.scene.width, self.scene.height
        s = min(1.6, avail_h / sh, (w - 2 * MARGIN) / sw)
        widest = max([*self.widths.values(), *self.label_w.values(), 140.0])
        while True:
            col_w = w - 2 * MARGIN - 2 * GAP - s * sw
            if col_w >= widest and self._column(col_w)[1] <= avail_h:
                break
            if s < 0.5:
                col_w = max(col_w, widest)
                break
            s *= 0.97
        self.side = col_w

    def _column(self, width: float) -> tuple[list[tuple[str, Any, float, float]], float]:
        """Placements (kind, what, x offset of the centre, y offset of the centre from the top)
        of labels and buttons in a column ``width`` wide; and its height."""
        out: list[tuple[str, Any, float, float]] = []
        y = 0.0
        for a, vals in self.attrs.items():
            out.append(("label", a, 0.0, y + LABEL_H / 2))
            y += LABEL_H
            x = 0.0
            for v in vals:
                bw = self.widths[(a, str(v))]
                if x > 0 and x + bw > width:
                    x, y = 0.0, y + BTN_H + ROW_GAP
                out.append(("button", (a, v), x + bw / 2, y + BTN_H / 2))
                x += bw + BTN_GAP
            y += BTN_H + 2 * ROW_GAP
        out.append(("submit", None, 0.0, y + SUBMIT_H / 2))
        return out, y + SUBMIT_H

    def build(self) -> list[Any]:
        x0 = self.w / 2 - MARGIN - self.side
        top = self.h / 2 - MARGIN - self.ctx.top  # the countdown keeps the top edge
        places, height = self._column(self.side)
        top -= max(0.0, (top - self.strip_top - height) / 2)  # centred in the height
        self.opt: dict[tuple[str, Any], Button] = {}
        for kind, what, dx, dy in places:
            if kind == "label":
                stim = make_text(self.ctx, what, (x0, top - dy), color=DIM, anchor="left")
                self.static_texts.append((f"attr-label:{what}", stim))
            elif kind == "button":
                a, v = what
                name = f"attr:{a}={v}"
                bw = self.widths[(a, str(v))]
                self.opt[(a, v)] = self.add_button(name, str(v), (x0 + dx, top - dy), (bw, BTN_H))
            else:
                self.add_button("submit", "SUBMIT", (x0 + 70, top - dy), (140, SUBMIT_H))
        self.marks = {a: Highlight(self.ctx, gap=3) for a in self.attrs}
        self.preview: ScenePainter | None = None
        return []

    def _complete(self) -> bool:
        return len(self.pick) == len(self.attrs)

    def _update_preview(self) -> None:
        from twofold.study import get_family

        box = self.scene.answer_box
        if not self._complete() or box is None:
            self.preview = None
            return
        ans = get_family(self.item.family).answer_scene(self.item, self.mode, dict(self.pick))
        # to scale: the stimulus's own pixels per unit, centred in the answer box
        self.preview = ScenePainter(
            self.ctx, ans, self.painter.box_px(box), scale=self.painter.scale
        )

    def draw_dynamic(self) -> None:
        for a, v in self.pick.items():
            self.marks[a].draw(self.opt[(a, v)].box())
        if self.preview is not None:
            self.preview.draw()

    def key(self, name: str, t: float) -> Answer | None:
        if name in ("return", "enter", "num_enter") and self._complete():
            return Answer(dict(self.pick), t)
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        for (a, v), b in self.opt.items():
            if b.contains(pos):
                self.pick[a] = v
                self._update_preview()
                return None
        if self.buttons["submit"].contains(pos) and self._complete():
            return Answer(dict(self.pick), t)
        return None

    def extra_boxes(self) -> list[tuple[str, float, float, float, float, float | None]]:
        if self.preview is None:
            return []
        return [(n, *b, lt) for n, *b, lt in self.preview.boxes()]  # type: ignore[misc]
