"""The response screen base: the family's scene above, a strip of controls and a help line below.

Layout (window pixels, origin at the window centre): the scene box takes the window minus a
margin and a bottom strip; the strip holds the screen's rows of controls (typed entry, keypad,
buttons, palette...) above one help line. Every height comes from measured text, so nothing
leaves the window or overlaps.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from twofold.study.scene import Scene

from .paint import ScenePainter, text_box
from .widgets import Button, help_line

__all__ = ["Answer", "Ctx", "Screen"]

MARGIN = 12.0  #: window edge to anything drawn (px)
GAP = 8.0  #: between strip rows (px)
ROW = 42.0  #: a row of buttons (px)

BoxEntry = tuple[str, float, float, float, float, float | None]


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
    top: float = 0.0  #: px kept free along the window's top edge (the runner's countdown)


class Screen:
    """Base of the response screens: paints the scene, lays out the strip, captures the static
    part once.

    Subclasses set :attr:`help_text` and :attr:`rows` (heights of their strip rows, top to
    bottom) in :meth:`prepare`, create their widgets in :meth:`build` (placing them with
    :meth:`row_y`), and implement :meth:`draw_dynamic`, :meth:`key`, :meth:`press` and
    :meth:`drag`. ``targets`` maps names to window pixel positions (centre origin) of things to
    click: the test driver and the benchmark use them.
    """

    help_text = ""
    #: the bank choice numbers in the order this screen shows them (set by the runner; None
    #: when the choices are in bank order)
    choice_order: tuple[int, ...] | None = None

    def __init__(
        self,
        ctx: Ctx,
        item: Any,
        mode: str,
        *,
        state_rule: bool = False,
        scene: Scene | None = None,
    ):
        if scene is None:
            from twofold.study import get_family

            scene = get_family(item.family).scene(item, mode)
        self.ctx, self.item, self.mode, self.scene = ctx, item, mode, scene
        self.state_rule = state_rule
        self.options: dict[str, Any] = dict(scene.response.options) if scene.response else {}
        self.targets: dict[str, tuple[float, float]] = {}
        self.buttons: dict[str, Button] = {}
        self.static_texts: list[tuple[str, Any]] = []  # (name, TextStim) drawn once
        self.dynamic_texts: list[tuple[str, Any]] = []  # (name, TextStim) drawn each frame
        w, h = ctx.size
        self.w, self.h = w, h
        self.rows: list[float] = []
        self.side = 0.0  # width of a control column right of the scene (px), set by prepare
        self.prepare()
        bottom = -h / 2 + MARGIN / 2
        self.help = (
            help_line(ctx, self.help_text, w - 2 * MARGIN, bottom) if self.help_text else None
        )
        help_h = float(self.help.boundingBox[1]) if self.help is not None else 0.0
        self._rows_top = bottom + help_h + GAP + sum(self.rows) + GAP * len(self.rows)
        self.strip_top = self._rows_top + (GAP if self.rows else 0.0)
        right = w / 2 - MARGIN - (self.side + 2 * GAP if self.side else 0.0)
        self.scene_box = (-w / 2 + MARGIN, self.strip_top, right, h / 2 - MARGIN - ctx.top)
        self.painter = ScenePainter(ctx, scene, self.scene_box, capture=False)
        static = list(self.build())
        static = self.painter.stims + static
        for b in self.buttons.values():
            if not getattr(b, "dynamic", False):
                static += b.stims()
        static += [s for _, s in self.static_texts]
        if self.help is not None:
            static.append(self.help)
        self.image = ScenePainter.capture(ctx, static)

    # -- to override ---------------------------------------------------------------------------
    def prepare(self) -> None:
        """Set :attr:`help_text` and :attr:`rows` (nothing drawn yet)."""

    def build(self) -> list[Any]:
        """Make the widgets (the scene is painted); return extra static stimuli."""
        return []

    def draw_dynamic(self) -> None:
        return None

    def key(self, name: str, t: float) -> Answer | None:
        return None

    def press(self, pos: Sequence[float], t: float) -> Answer | None:
        return None

    def drag(self, pos: Sequence[float]) -> None:
        return None

    # -- layout helpers ------------------------------------------------------------------------
    def row_y(self, k: int) -> float:
        """The centre y of strip row ``k`` (0 = the top row)."""
        y = self._rows_top
        for j, hh in enumerate(self.rows):
            if j == k:
                return y - hh / 2
            y -= hh + GAP
        raise IndexError(k)

    def add_button(
        self,
        name: str,
        label: str,
        pos: tuple[float, float],
        size: tuple[float, float] | None = None,
        *,
        dynamic: bool = False,
        **kw: Any,
    ) -> Button:
        b = Button(self.ctx, label, pos, size, **kw)
        b.dynamic = dynamic  # type: ignore[attr-defined]
        self.buttons[name] = b
        self.targets[name] = pos
        return b

    def row_of_buttons(
        self,
        specs: Sequence[tuple[str, str]],
        y: float,
        *,
        centre: float = 0.0,
        gap: float = 10.0,
        height: float = ROW,
        min_width: float = 0.0,
        **kw: Any,
    ) -> list[Button]:
        """Buttons (name, label) side by side, as wide as their labels, centred on ``centre``
        (kept inside the window)."""
        widths = [max(min_width, Button.measure(self.ctx, label)) for _, label in specs]
        total = sum(widths) + gap * (len(widths) - 1)
        x = centre - total / 2
        x = max(-self.w / 2 + MARGIN, min(x, self.w / 2 - MARGIN - total))
        out = []
        for (name, label), bw in zip(specs, widths, strict=True):
            out.append(self.add_button(name, label, (x + bw / 2, y), (bw, height), **kw))
            x += bw + gap
        return out

    # -- drawing ---------------------------------------------------------------------------------
    def draw(self) -> None:
        if self.image is not None:
            self.image.draw()
        self.draw_dynamic()

    def boxes(self) -> list[BoxEntry]:
        """Everything drawn, as ``(name, x0, y0, x1, y1, letter_px)`` in window pixels with the
        origin at the top left (y down), ``letter_px`` the letter height of a text (else None).

        Names: ``text:...`` (scene texts), ``shape:<role>`` / ``line:<role>`` / ``grid`` /
        ``cell`` (scene primitives), ``button:<name>`` and ``label@<name>`` (a button and its own
        label), ``help``, and the screen's own texts by name.
        """
        out: list[BoxEntry] = []
        for name, *b, letter in self.painter.boxes():
            out.append((name, *b, letter))  # type: ignore[arg-type]
        for name, btn in self.buttons.items():
            if getattr(btn, "dynamic", False) and not self.showing(name):
                continue
            out.append((f"button:{name}", *btn.box(), None))
            if btn.has_label:
                out.append((f"label@{name}", *text_box(btn.text), float(btn.text.height)))
        if self.help is not None:
            out.append(("help", *text_box(self.help), float(self.help.height)))
        for name, stim in self.static_texts + self.visible_texts():
            if stim.text:
                out.append((name, *text_box(stim), float(stim.height)))
        out += self.extra_boxes()
        w, h = self.w, self.h
        return [
            (n, x0 + w / 2, h / 2 - y1, x1 + w / 2, h / 2 - y0, lt) for n, x0, y0, x1, y1, lt in out
        ]

    def showing(self, name: str) -> bool:
        """Whether dynamic button ``name`` is on screen now."""
        return True

    def visible_texts(self) -> list[tuple[str, Any]]:
        """The dynamic texts on screen now."""
        return list(self.dynamic_texts)

    def extra_boxes(self) -> list[BoxEntry]:
        """Other drawn things (centre-origin pixels, y up)."""
        return []
