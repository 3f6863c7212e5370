"""Participant screens: the family's scene painted with PsychoPy, plus the controls of its
response kind (imported only by the runner, never at package import of ``twofold``).

A family describes an item once, as a :class:`~twofold.study.scene.Scene`;
:class:`~.paint.ScenePainter` paints it into the window, and one screen per *response kind*
(not per family) adds what a respondent acts on:

- ``choose`` (:mod:`.choose`): click a choice slot or press its number;
- ``type`` (:mod:`.typing`): a typed answer, with on-screen keys for symbols that cannot be typed;
- ``label`` (:mod:`.label`): give each test panel a set label, review, optionally state the rule;
- ``build`` (:mod:`.build`): pick a value per attribute, with a live preview to scale;
- ``paint`` (:mod:`.editor`): the grid editor.

A lab can still give one of its own families its own screen with :func:`register_screen`
(:data:`SCREENS`, also filled from the ``twofold.screens`` entry-point group).

Layout and colours are our own: a dark slate window, warm off-white text, amber for what can
be acted on, teal for what is selected; the scene keeps its own background.
"""

from __future__ import annotations

from typing import Any

from twofold.study.registry import Registry

from .base import Answer, Ctx, Screen
from .paint import ScenePainter

__all__ = [
    "KINDS",
    "SCREENS",
    "Answer",
    "Ctx",
    "ScenePainter",
    "Screen",
    "make_screen",
    "register_screen",
    "screen_for_kind",
]

#: Screens a lab registered for its own families (plugins: the ``twofold.screens`` entry-point
#: group); the built-in families need none: their scenes say how to answer.
SCREENS: Registry[type[Screen]] = Registry("screen", group="twofold.screens")

#: the response kinds and the modules of their screens
KINDS = {
    "choose": ("choose", "ChooseScreen"),
    "type": ("typing", "TypeScreen"),
    "label": ("label", "LabelScreen"),
    "build": ("build", "BuildScreen"),
    "paint": ("editor", "EditorScreen"),
}


def register_screen(family: str, screen: type[Screen]) -> type[Screen]:
    """Use ``screen`` for items of ``family`` (a lab's own family can bring its own screen)."""
    return SCREENS.register(family, screen)


def screen_for_kind(kind: str) -> type[Screen]:
    """The screen class of response kind ``kind`` (see :data:`KINDS`)."""
    import importlib

    from twofold.study.checks import check_choice

    check_choice("response kind", kind, list(KINDS))
    module, name = KINDS[kind]
    cls: type[Screen] = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    return cls


def make_screen(ctx: Ctx, item: Any, mode: str, *, state_rule: bool = False) -> Screen:
    """The response screen for ``item`` in ``mode``: the family's scene, with the screen of its
    response kind (or the family's registered screen)."""
    from twofold.study import get_family

    scene = get_family(item.family).scene(item, mode)
    kind = scene.response.kind if scene.response is not None else "type"
    default = screen_for_kind(kind)
    if item.family in SCREENS:
        try:
            return SCREENS.get(item.family)(ctx, item, mode, state_rule=state_rule, scene=scene)
        except (KeyError, TypeError, IndexError, ValueError):
            pass  # a lab screen that cannot show this item: the kind's own screen
    return default(ctx, item, mode, state_rule=state_rule, scene=scene)
