"""The ``strings`` family: symbol-string analogies.

A source string and its changed form are shown with a target string; the respondent produces the
analogous change of the target (``defg -> defh``; ``qrst -> ?``). Strings are runs of consecutive
symbols of an ordered, circular symbol set (letters, digits, or an invented glyph order that is
shown on screen), optionally grouped (``aabbcc``).

The transformation grammar
--------------------------
Every change is a *description* (a program) from a small grammar of our own, applied to a parse of
the string into *units*: either single symbols (level ``symbol``) or runs of one repeated symbol
(level ``group``). Programs are plain tuples:

``("map", level, selector, op)``
    change the selected units; ``op`` is ``("shift", k)`` (move ``k`` places along the circular
    order, k in -2..2) or ``("set", v)`` (become the literal symbol ``v``).
``("double", level, selector)`` / ``("delete", level, selector)``
    repeat / remove the selected units.
``("append", level, rel)``
    add a unit after the last one: ``("next",)`` continues the run's step, ``("shift", k)`` is the
    last unit moved ``k`` places, ``("value", v)`` is the literal ``v``.
``("swap", level)``
    exchange the first and last units. ``("reverse",)`` reverses the string.

Selectors are ``("first",)``, ``("last",)``, ``("all",)``, ``("pos", k)`` (k-th from the start,
k >= 2), ``("rpos", k)`` (k-th from the end, k >= 2) and ``("value", v)`` (every unit showing the
literal symbol ``v``). Programs that name a literal symbol (``value`` selectors, ``set`` ops,
``value`` appends) are the *literal* readings.

Each program has a description length in bits (:func:`description_length`): a cost for the form,
the level (groups are free, symbols cost one bit), the selector (positions cost more the further
they are counted, literals cost ``1 + log2(alphabet size)``) and the operation. The validity check
enumerates every description consistent with the source change (:func:`consistent_programs`),
applies each to the target's own parse, rejects an item when a strictly shorter description gives
another answer (reason ``"simpler reading"``), and records as accepted answers the answers of
non-literal descriptions at most :data:`ACCEPT_MARGIN` bits longer than the intended one, labelled
by the kind of reading (``symbol-level``, ``group-level``, ``counted-from-start``...).

Items are drawn as one scene (:mod:`~twofold.study.families.strings.scene`). Version 3 changed
only how items are drawn; version 2 records have the same format and load, score and render
unchanged.
"""

from __future__ import annotations

from .. import register
from .family import StringsFamily
from .grammar import (
    ACCEPT_MARGIN,
    ALPHABETS,
    RULES,
    apply_program,
    description_length,
    is_literal,
    program_space,
)
from .search import consistent_programs, describe_program, literal_edit, rule_program

__all__ = [
    "ACCEPT_MARGIN",
    "ALPHABETS",
    "RULES",
    "StringsFamily",
    "apply_program",
    "consistent_programs",
    "describe_program",
    "description_length",
    "is_literal",
    "literal_edit",
    "program_space",
    "rule_program",
]

register(StringsFamily())
