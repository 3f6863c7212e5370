"""Choose: click a choice slot (``choice:k``) or press its number.

The slots, their frames and their number badges come from the family's scene. A scene without
choice slots (the default text scene lists its choices in the prompt) gets one numbered button
per choice in the strip.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .base import ROW, Answer, Screen

__all__ = ["ChooseScreen"]


class ChooseScreen(Screen):
    """Numbered choices: a click on a choice slot, or its number key (1-9)."""

    def prepare(self) -> None:
        keys = [s.key for s in self.scene.slots if s.key.startswith("choice:")]
        self.slot_keys = sorted(keys, key=lambda k: int(k.split(":")[1]))
        self.n_choices = len(self.slot_keys) or int(self.options.get("n", 0))
        where = "Click your choice" if self.slot_keys else "Click the number of your choice"
        keys_hint = " or press its number" if self.n_choices <= 9 else ""
        self.help_text = f"{where}{keys_hint}.   ESC: end session"
        if not self.slot_keys and self.n_choices:
            self.rows = [ROW]

    def build(self) -> list[Any]:
        self.areas: dict[int, tuple[float, float, float, float]] = {}
        for key in self.slot_keys:
            k = int(key.split(":")[1])
            box = self.painter.slot_px(key)
            self.areas[k] = box
            self.targets[key] = ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2)
        if not self.slot_keys and self.n_choices:
            specs = [(f"choice:{k}", str(k)) for k in range(1, self.n_choices + 1)]
            self.row_of_buttons(specs, self.row_y(0), gap=14, min_width=56)
        return []

    def _hit(self, pos: Sequence[float]) -> int | None:
        for k, (x0, y0, x1, y1) in self.areas.items():
            if x0 <= pos[0] <= x1 and y0 <= pos[1] <= y1:
                return k
        for name, b in self.buttons.items():
            if name.startswith("choice:") and b.contains(pos):
                return int(name.split(":")[1])
        return None

    def key(self, name: str, t: float) -> Answer | None:
        key = name.replace("num_", "")
        if key.isdigit() and 1 <= int(key) <= min(self.n_choices, 9):
            return Answer(int(key), t)
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        k = self._hit(pos)
        return Answer(k, t) if k is not None else None
