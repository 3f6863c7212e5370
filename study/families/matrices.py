"""The ``matrices`` family: 3x3 figure matrices with the bottom-right panel missing.

Every panel shows ``count`` copies of one shape, of one size and shade, turned one way, at one
height in the panel. Each of the six attributes (``shape``, ``size``, ``shade``, ``count``,
``position``, ``turn``) plays one role in an item:

* **ruled** -- governed by a row rule: ``kept`` (each row keeps one value, rows differ),
  ``step+k`` / ``step-k`` (each step along a row moves ``k`` levels), ``each-of-three`` (every
  row shows the same three distinct values in another order), ``sum`` / ``difference`` (third
  value = first + / - second; numeric attributes ``size`` and ``count`` only; the rule kind is
  called ``sum-difference``);
* **fixed** -- one value in all nine panels (the trivial kept rule);
* **irrelevant** -- a fresh value in every panel that fits no rule, so any value completes the
  matrix; the other values are stored as accepted answers.

Validity (checked at generation and by :meth:`MatricesFamily.check`): for every attribute, every
rule of the family's rule space that fits the eight visible panels predicts the same value (and
at least one fits, unless the attribute is irrelevant, where none may fit), and no distractor fits
every attribute's rule.

Distractor schemes for select mode: ``one-off`` (each distractor changes one attribute of the
answer) and ``balanced`` (the choices are the product of value sets of a few attributes, so every
value of every attribute appears equally often and no choices-only vote can find the answer).

The look
--------
Shapes (version 2): a drop, a crescent, a house, a tee and an open ring, none of them the same
after a quarter or half turn, so ``turn`` (up, right, down, left: where the drop's tip, the
crescent's horns, the house's roof, the tee's bar and the ring's opening face; each level one
quarter turn clockwise) is always visible. Copies sit in rows of at most three; sizes, heights
and panel sizes are set so the smallest object is at least
:data:`~twofold.study.scene.MIN_OBJECT` across at the design box. In select mode the choices
stand in a block to the right of the matrix (two columns of four for eight choices), each the
size of a matrix panel, its number outside its frame.

Items of version 1
------------------
Banks written before version 2 (five attributes, regular polygons ordered by their corners, the
rule names ``constant``, ``progression±k`` and ``distribution``) still load, score, classify and
draw: the family reads them through :data:`INVENTORIES` ``["1"]`` without rewriting the record
(the bank hash stays). Their answers and views keep their own values, and their shapes are
drawn with their own outlines (regular polygons and a circle), always upright, in the version 2
layout; their rule names are read as the version 2 rules they are.
"""

from __future__ import annotations

import itertools
import json
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ..checks import fail
from ..colour import contrast_ratio
from ..exceptions import ItemError, ResponseError
from ..item import Item, canonical_json
from ..scene import (
    DESIGN_BOX,
    MIN_OBJECT,
    MIN_TEXT,
    Element,
    Response,
    Scene,
    Shape,
    Slot,
    Text,
    polygon,
    rect,
)
from . import register
from ._base import Family, ParamSpec, Rejected

__all__ = [
    "ATTRIBUTES",
    "HYPOTHESES",
    "INVENTORIES",
    "LEVELS",
    "RULE_KINDS",
    "SHADE_FILL",
    "Inventory",
    "MatricesFamily",
    "contrast_ratio",
    "fitting_rules",
    "inventory",
    "panel_from_index",
    "panel_to_index",
    "rule_fits",
]

#: the panel attributes, in the order used everywhere
ATTRIBUTES: tuple[str, ...] = ("shape", "size", "shade", "count", "position", "turn")

#: the values of every attribute, in their order (steps move along this order)
LEVELS: dict[str, tuple[Any, ...]] = {
    "shape": ("drop", "crescent", "house", "tee", "ring"),
    "size": (1, 2, 3, 4, 5, 6),
    "shade": ("white", "pale", "light", "medium", "dark", "black"),
    "count": (1, 2, 3, 4, 5, 6),
    # three heights: with two rows of copies a panel has room for three clearly apart
    "position": ("high", "middle", "low"),
    "turn": ("up", "right", "down", "left"),  # quarter turns clockwise
}
_NUMERIC = frozenset({"size", "count"})

#: the rule space, in the order a careful solver tries it (simplest first)
HYPOTHESES: tuple[str, ...] = (
    "kept",
    "step+1",
    "step-1",
    "step+2",
    "step-2",
    "each-of-three",
    "sum",
    "difference",
)
#: the kinds of rule an item's rule set draws from
RULE_KINDS: tuple[str, ...] = ("kept", "step", "each-of-three", "sum-difference")
_WEIGHT = {
    "kept": 1,
    "step+1": 2,
    "step-1": 2,
    "step+2": 3,
    "step-2": 3,
    "each-of-three": 3,
    "sum": 4,
    "difference": 4,
}
_RULE_SETS = {
    "kept-step": ("kept", "step"),
    "every-kind": RULE_KINDS,
    "three-sum": ("each-of-three", "sum-difference"),
}
#: most choices that fit beside the matrix with every object legible (see ``_select_layout``)
MAX_CHOICES = 12

#: shade -> fill colour: greys evenly spaced in CIE L* (100, 84, 68, 52, 36, 18), so
#: neighbouring shades differ by the same lightness step
SHADE_FILL: dict[str, str] = {
    "white": "#ffffff",
    "pale": "#d1d1d1",
    "light": "#a6a6a6",
    "medium": "#7c7c7c",
    "dark": "#555555",
    "black": "#2c2c2c",
}
_PANEL_FILL = "#ffffff"
_PANEL_EDGE = "#5d6472"
_OBJECT_EDGE = "#1b1f2a"
_GAP_FILL = "#eaf0f7"
_GAP_EDGE = "#2f5d9e"
_INK = "#1b1f2a"


# -- inventories: the attributes and values of each family version ---------------------------
class Inventory:
    """The attributes, their values and the rule names of one family version.

    ``rule_names`` maps a rule name stored in an item of this version to the rule of
    :data:`HYPOTHESES` (or ``fixed`` / ``irrelevant``) it is; version 2 maps every name to
    itself.
    """

    def __init__(
        self,
        version: str,
        attributes: tuple[str, ...],
        levels: Mapping[str, tuple[Any, ...]],
        rule_names: Mapping[str, str],
    ):
        self.version = version
        self.attributes = attributes
        self.levels = {a: tuple(levels[a]) for a in attributes}
        self.numeric = frozenset(a for a in attributes if a in _NUMERIC)
        self.n_levels = tuple(len(self.levels[a]) for a in attributes)
        self.index = {a: {v: i for i, v in enumerate(self.levels[a])} for a in attributes}
        self.rule_names = dict(rule_names)
        self.answer_format = "one panel: " + " ".join(
            f"{a}=<{_levels_text(self, a)}>" for a in attributes
        )

    def rules(self, item: Item) -> dict[str, str]:
        """The item's rules per attribute, named as in :data:`HYPOTHESES`."""
        stored = item.stimulus["rules"]
        return {a: self.rule_names.get(stored[a], stored[a]) for a in self.attributes}

    def __repr__(self) -> str:
        return f"<matrices inventory v{self.version}: {', '.join(self.attributes)}>"


def _levels_text(inv: Inventory, attr: str) -> str:
    lv = inv.levels[attr]
    if attr in inv.numeric:
        return f"{lv[0]}-{lv[-1]}"
    return "|".join(lv)


_V1_RULES = {
    "constant": "kept",
    "progression+1": "step+1",
    "progression-1": "step-1",
    "progression+2": "step+2",
    "progression-2": "step-2",
    "distribution": "each-of-three",
}
#: family version -> inventory; version 1 is read (never generated) for old banks
INVENTORIES: dict[str, Inventory] = {
    "1": Inventory(
        "1",
        ("shape", "size", "shade", "count", "position"),
        {
            **LEVELS,
            "shape": ("triangle", "square", "pentagon", "hexagon", "circle"),
            "position": ("top", "upper", "middle", "lower", "bottom"),
        },
        _V1_RULES,
    ),
    "2": Inventory("2", ATTRIBUTES, LEVELS, {}),
}
_CURRENT = INVENTORIES["2"]


def inventory(item: Item) -> Inventory:
    """The inventory an item was generated with (by its ``family_version``)."""
    inv = INVENTORIES.get(item.family_version)
    if inv is None:
        raise fail(
            "family_version",
            item.family_version,
            ", ".join(INVENTORIES),
            where=f"item {item.id}",
            error=ItemError,
        )
    return inv


# -- the rule space --------------------------------------------------------------------------
def rule_fits(rule: str, cells: Sequence[int], n_levels: int, *, numeric: bool) -> int | None:
    """Predict the missing value under ``rule``, or ``None`` when the rule does not fit.

    Parameters
    ----------
    rule : str
        One of :data:`HYPOTHESES`.
    cells : sequence of 8 int
        Level indices of one attribute in the visible panels, row by row
        (row 1: 0-2, row 2: 3-5, row 3: 6-7).
    n_levels : int
        Number of levels of the attribute; a prediction outside ``0 .. n_levels-1`` fails.
    numeric : bool
        Whether the attribute has numbers as values (``sum`` and ``difference`` need it).
    """
    a, b, c, d, e, f, g, h = cells
    pred: int
    if rule == "kept":
        if not (a == b == c and d == e == f and g == h):
            return None
        pred = g
    elif rule.startswith("step"):
        k = int(rule[len("step") :])
        if not (b - a == k and c - b == k and e - d == k and f - e == k and h - g == k):
            return None
        pred = h + k
    elif rule == "each-of-three":
        s = {a, b, c}
        if len(s) != 3 or {d, e, f} != s or g == h or g not in s or h not in s:
            return None
        pred = (s - {g, h}).pop()
    elif rule == "sum":
        # values are 1-based: (c+1) = (a+1) + (b+1)
        if not numeric or c != a + b + 1 or f != d + e + 1:
            return None
        pred = g + h + 1
    elif rule == "difference":
        if not numeric or c != a - b - 1 or f != d - e - 1:
            return None
        pred = g - h - 1
    else:
        raise ValueError(f"unknown rule {rule!r}")
    return pred if 0 <= pred < n_levels else None


def fitting_rules(
    attribute: str, cells: Sequence[int], inv: Inventory | None = None
) -> dict[str, int]:
    """Every rule of :data:`HYPOTHESES` fitting ``cells`` of ``attribute``, with its prediction."""
    inv = inv or _CURRENT
    n = len(inv.levels[attribute])
    num = attribute in inv.numeric
    out = {}
    for rule in HYPOTHESES:
        p = rule_fits(rule, cells, n, numeric=num)
        if p is not None:
            out[rule] = p
    return out


def _rule_holds(rule: str, col: Sequence[int], attribute: str, inv: Inventory) -> bool:
    """Whether a full 9-cell column of values satisfies ``rule`` in all three rows."""
    if rule == "irrelevant":
        return True
    if rule == "fixed":
        return len(set(col)) == 1
    n = len(inv.levels[attribute])
    return rule_fits(rule, col[:8], n, numeric=attribute in inv.numeric) == col[8]


# -- panels ----------------------------------------------------------------------------------
def panel_from_index(idx: Sequence[int], inv: Inventory | None = None) -> dict[str, Any]:
    """A panel dict from one level index per attribute."""
    inv = inv or _CURRENT
    return {a: inv.levels[a][i] for a, i in zip(inv.attributes, idx, strict=True)}


def panel_to_index(panel: Mapping[str, Any], inv: Inventory | None = None) -> tuple[int, ...]:
    """Level indices of a (normalised) panel dict."""
    inv = inv or _CURRENT
    return tuple(inv.index[a][panel[a]] for a in inv.attributes)


def _norm_value(inv: Inventory, attr: str, value: Any) -> Any:
    """Canonical value of ``attr`` or ``None``: ints for numeric attributes, names otherwise."""
    if attr in inv.numeric:
        if isinstance(value, bool):
            return None
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if isinstance(value, str) and value.strip().isdigit():
            value = int(value.strip())
        return value if isinstance(value, int) and value in inv.index[attr] else None
    if isinstance(value, str):
        v = value.strip().strip("\"'").lower()
        if v == "centre" or v == "center":
            v = "middle"
        return v if v in inv.index[attr] else None
    return None


# -- outlines --------------------------------------------------------------------------------
def _arc(cx: float, cy: float, r: float, a0: float, a1: float, n: int) -> list[tuple[float, float]]:
    """``n + 1`` points of a circular arc from angle ``a0`` to ``a1`` (degrees)."""
    return [
        (
            cx + r * math.cos(math.radians(a0 + (a1 - a0) * k / n)),
            cy + r * math.sin(math.radians(a0 + (a1 - a0) * k / n)),
        )
        for k in range(n + 1)
    ]


def _regular(n: int, start: float = 90.0) -> list[tuple[float, float]]:
    return [
        (math.cos(math.radians(start + 360 * k / n)), math.sin(math.radians(start + 360 * k / n)))
        for k in range(n)
    ]


def _raw_outlines() -> dict[str, list[tuple[float, float]]]:
    # drop: a round body (radius 0.8) with a tip at the top, joined by the tangents from the tip
    phi = math.degrees(math.acos(0.8 / 1.2))
    drop = [(0.0, 1.0), *_arc(0.0, -0.2, 0.8, 90 + phi, 450 - phi, 28)]
    # crescent: the unit disc with a disc of radius 0.8 at (0, 0.55) bitten out; horns up
    yi = (1.0 - 0.64 + 0.55**2) / 1.1
    xi = math.sqrt(1.0 - yi * yi)
    big = math.degrees(math.atan2(yi, xi))
    small = math.degrees(math.atan2(yi - 0.55, xi))
    crescent = _arc(0, 0, 1.0, big, -180 - big, 30) + _arc(
        0, 0.55, 0.8, 180 - small, 360 + small, 24
    )
    house = [
        (-0.62, -1),
        (0.62, -1),
        (0.62, 0.15),
        (0.95, 0.15),
        (0, 1),
        (-0.95, 0.15),
        (-0.62, 0.15),
    ]
    tee = [
        (-1, 1),
        (-1, 0.36),
        (-0.32, 0.36),
        (-0.32, -1),
        (0.32, -1),
        (0.32, 0.36),
        (1, 0.36),
        (1, 1),
    ]
    # ring: an annulus (inner radius 0.52) open at the top over 56 degrees
    ring = _arc(0, 0, 1.0, 118, 422, 30) + _arc(0, 0, 0.52, 422, 118, 22)
    return {
        "drop": drop,
        "crescent": crescent,
        "house": house,
        "tee": tee,
        "ring": ring,
        # version 1 outlines: regular polygons with a corner (or side) at the top, and a circle
        "triangle": _regular(3),
        "square": _regular(4, 45.0),
        "pentagon": _regular(5),
        "hexagon": _regular(6),
        "circle": _regular(48),
    }


def _normalised(points: Sequence[tuple[float, float]]) -> tuple[tuple[float, float], ...]:
    """Outline centred on its bounding box, its longer side 2 long."""
    xs, ys = [p[0] for p in points], [p[1] for p in points]
    cx, cy = (min(xs) + max(xs)) / 2, (min(ys) + max(ys)) / 2
    half = max(max(xs) - min(xs), max(ys) - min(ys)) / 2
    return tuple((round((x - cx) / half, 6), round((y - cy) / half, 6)) for x, y in points)


#: shape name -> unit outline (bounding box centred, longer side 2), pointing up
OUTLINES: dict[str, tuple[tuple[float, float], ...]] = {
    k: _normalised(v) for k, v in _raw_outlines().items()
}


def _aspect(points: Sequence[tuple[float, float]]) -> float:
    xs, ys = [p[0] for p in points], [p[1] for p in points]
    w, h = max(xs) - min(xs), max(ys) - min(ys)
    return min(w, h) / max(w, h)


#: the smallest (short side / long side) of any outline: sizes are set from it so every
#: object's short side reaches MIN_OBJECT (quarter turns only swap the sides)
_ASPECT_MIN = min(_aspect(o) for o in OUTLINES.values())


class _Draw:
    """Fast uniform draws from a block of floats taken from a numpy generator at once.

    Generating an item needs a few dozen small random choices; one numpy call per choice costs
    more than the rest of the generator, so draws come from a buffer refilled in blocks.
    """

    __slots__ = ("_buf", "_i", "_rng")

    def __init__(self, rng: np.random.Generator):
        self._rng = rng
        self._buf: list[float] = rng.random(64).tolist()
        self._i = 0

    def random(self) -> float:
        if self._i >= len(self._buf):
            self._buf = self._rng.random(64).tolist()
            self._i = 0
        u = self._buf[self._i]
        self._i += 1
        return u

    def integers(self, lo: int, hi: int | None = None) -> int:
        """Uniform integer in ``[lo, hi)`` (or ``[0, lo)`` with one argument)."""
        if hi is None:
            lo, hi = 0, lo
        return lo + int(self.random() * (hi - lo))

    def choice(self, seq: Sequence[Any]) -> Any:
        return seq[int(self.random() * len(seq))]

    def sample(self, seq: Sequence[Any], k: int) -> list[Any]:
        """``k`` distinct elements of ``seq`` in random order (partial Fisher-Yates)."""
        pool = list(seq)
        for i in range(k):
            j = i + int(self.random() * (len(pool) - i))
            pool[i], pool[j] = pool[j], pool[i]
        return pool[:k]

    def permutation(self, seq: Sequence[Any] | int) -> list[Any]:
        items = list(range(seq)) if isinstance(seq, int) else list(seq)
        return self.sample(items, len(items))


# -- layout ----------------------------------------------------------------------------------
_MARGIN = 10.0  # around the scene
_GAP = 8.0  # between matrix panels
_BLOCK_GAP = 36.0  # between the matrix and the block of choices
_BADGE_W = 32.0  # the column left of each choice that holds its number
_CHOICE_GAP = 10.0  # between choices
_BADGE_SIZE = 20.0


def _matrix_cell() -> float:
    """The panel size that lets the matrix fill the design box's height."""
    return (DESIGN_BOX[1] - 2 * _MARGIN - 2 * _GAP) / 3


def _select_layout(n: int) -> tuple[int, int, float]:
    """(columns, rows, panel size) of the select scene for ``n`` choices.

    The panel size is the largest one at which the matrix and a block of ``n`` choices (each as
    large as a matrix panel, its badge to its left) fit the design box side by side. Among
    arrangements within 5 % of the largest, the one with the fewest empty places (then the
    fewest columns) wins: eight choices stand in two columns of four.
    """
    w, h = DESIGN_BOX
    options = []
    for cols in range(1, n + 1):
        rows = math.ceil(n / cols)
        by_height = (h - 2 * _MARGIN - (rows - 1) * _CHOICE_GAP) / rows
        room = w - 2 * _MARGIN - 2 * _GAP - _BLOCK_GAP - cols * _BADGE_W - (cols - 1) * _CHOICE_GAP
        options.append((min(_matrix_cell(), by_height, room / (3 + cols)), cols, rows))
    top = max(o[0] for o in options)
    cell, cols, rows = min(
        (o for o in options if o[0] >= 0.95 * top), key=lambda o: (o[1] * o[2] - n, o[1])
    )
    return cols, rows, cell


class _Look:
    """Where the objects of a panel go, for one item at one panel size ``cell``.

    Copies stand in rows of at most three (four as 2 + 2, five as 3 + 2, six as 3 + 3) at a
    pitch of a third of the panel's inside; ``size`` scales the object's longer side from the
    smallest that keeps its shorter side at MIN_OBJECT up to 94 % of the pitch; ``position``
    moves the group's centre down in equal steps (two for the three heights of version 2, four
    for the five of version 1) over the room the tallest group of the item leaves (one row when
    the item holds at most three copies, else two).
    """

    def __init__(self, cell: float, rows_max: int, heights: int = 3):
        self.cell = cell
        self.pad = 0.04 * cell
        inner = cell - 2 * self.pad
        self.pitch = inner / 3
        s_max = 0.94 * self.pitch
        s_min = max((MIN_OBJECT + 0.5) / _ASPECT_MIN, 0.5 * s_max)
        self.sizes = tuple(s_min + (s_max - s_min) * i / 5 for i in range(6))
        tallest = (rows_max - 1) * self.pitch + s_max
        self.top = self.pad + inner - tallest / 2  # group centre at position level 0
        self.step = max(0.0, inner - tallest) / max(1, heights - 1)

    def objects(self, inv: Inventory, p: Mapping[str, Any], x0: float, y0: float) -> list[Shape]:
        """The object shapes of panel ``p`` whose bottom-left corner is ``(x0, y0)``."""
        n = int(p["count"])
        s = self.sizes[min(inv.index["size"][p["size"]], 5)]
        turn = inv.index["turn"][p["turn"]] if "turn" in inv.index else 0
        rows = [n] if n <= 3 else [(n + 1) // 2, n // 2]
        group = (len(rows) - 1) * self.pitch + s
        cy = y0 + self.top - inv.index["position"][p["position"]] * self.step
        lo, hi = y0 + self.pad + group / 2, y0 + self.cell - self.pad - group / 2
        cy = min(max(cy, lo), hi)
        unit, fill = OUTLINES[p["shape"]], SHADE_FILL[p["shade"]]
        width = max(1.5, 0.05 * s)
        out = []
        for r, m in enumerate(rows):
            ry = cy + ((len(rows) - 1) / 2 - r) * self.pitch
            for k in range(m):
                rx = x0 + self.cell / 2 + (k - (m - 1) / 2) * self.pitch
                pts = polygon(unit, rx, ry, s / 2, rotation=-90.0 * turn)
                out.append(Shape(pts, fill=fill, edge=_OBJECT_EDGE, edge_width=width))
        return out

    def panel(
        self, inv: Inventory, p: Mapping[str, Any] | None, x0: float, y0: float, role: str
    ) -> list[Element]:
        """A framed panel (the missing one framed in the accent colour with a question mark)."""
        box = rect(x0, y0, x0 + self.cell, y0 + self.cell)
        if p is None:
            mark = Text(
                x0 + self.cell / 2,
                y0 + self.cell / 2,
                "?",
                max(MIN_TEXT, 0.36 * self.cell),
                colour=_GAP_EDGE,
                bold=True,
                role="mark",
            )
            return [Shape(box, fill=_GAP_FILL, edge=_GAP_EDGE, edge_width=2.5, role="gap"), mark]
        frame = Shape(box, fill=_PANEL_FILL, edge=_PANEL_EDGE, edge_width=2.0, role=role)
        return [frame, *self.objects(inv, p, x0, y0)]


class MatricesFamily(Family):
    """3x3 figure matrices with row rules per attribute; see the module docstring."""

    name = "matrices"
    prefix = "mat"
    reference_solver = "matrices-ref"
    typical_rt_ms = 14000.0
    version = "2"
    modes = ("generate", "select")
    params = (
        ParamSpec("n_rules", "int", 2, "number of attributes governed by a row rule", 1, 6),
        ParamSpec(
            "rule_set",
            "choice",
            "every-kind",
            "rule kinds drawn from: kept-step (kept, step), every-kind, three-sum "
            "(each-of-three, sum-difference)",
            options=tuple(_RULE_SETS),
        ),
        ParamSpec(
            "n_irrelevant", "int", 0, "attributes that vary from panel to panel under no rule", 0, 2
        ),
        ParamSpec("max_count", "int", 4, "most objects a panel may hold", 1, 6),
    )
    factors = ("n_rules", "rule_set", "complexity", "hardest_rule", "n_irrelevant", "max_objects")
    distractor_schemes = {
        "one-off": "each distractor is the answer with one rule-bound attribute changed",
        "balanced": "choices are all combinations of a few values of a few attributes, so every "
        "attribute value appears equally often among the choices",
    }
    variant_operators = {
        "permute-values": "rename the values of size, shade, count, position and turn by "
        "rule-preserving permutations",
        "swap-shapes": "replace the shapes by others (a rule-preserving permutation of shapes)",
        "move-rule": "let another attribute carry a rule (swap the values of two attributes)",
        "swap-rows": "exchange the first two rows",
    }
    error_types = {
        "wrong-shape": "only the shape breaks its row rule",
        "wrong-size": "only the size breaks its row rule",
        "wrong-shade": "only the shade breaks its row rule",
        "wrong-count": "only the number of objects breaks its row rule",
        "wrong-position": "only the position breaks its row rule",
        "wrong-turn": "only the turn breaks its row rule",
        "multiple-wrong": "two attributes break their row rules",
        "copied-adjacent": "the panel left of or above the gap, copied",
        "other": "three or more attributes wrong, or nothing systematic",
    }
    answer_format = _CURRENT.answer_format

    # -- generation -------------------------------------------------------------------------
    def generate(
        self,
        params: Mapping[str, Any],
        rng: np.random.Generator,
        *,
        seed: int,
        modes: Sequence[str],
        distractor_scheme: str | None,
        n_choices: int,
    ) -> Item:
        p = {**self.default_params(), **dict(params)}
        n_rules, n_irr, max_count = int(p["n_rules"]), int(p["n_irrelevant"]), int(p["max_count"])
        if n_rules + n_irr > len(ATTRIBUTES):
            raise Rejected(
                f"n_rules + n_irrelevant = {n_rules + n_irr} exceeds the {len(ATTRIBUTES)} "
                "attributes"
            )
        if "select" in modes and n_choices > MAX_CHOICES:
            raise Rejected(
                f"{n_choices} choices: at most {MAX_CHOICES} fit beside the matrix with every "
                "object legible"
            )
        kinds = _RULE_SETS[p["rule_set"]]
        ranges = self._ranges(max_count)
        draw = _Draw(rng)
        order = draw.permutation(ATTRIBUTES)
        ruled = order[:n_rules]
        irrelevant = order[n_rules : n_rules + n_irr]
        rules: dict[str, str] = {}
        cols: dict[str, list[int]] = {}
        for attr in ATTRIBUTES:
            L = ranges[attr]
            if attr in ruled:
                rule, col = self._ruled_column(attr, kinds, L, draw)
            elif attr in irrelevant:
                if L < 3:
                    raise Rejected(f"{attr} has too few levels to vary irrelevantly")
                rule, col = "irrelevant", [draw.integers(L) for _ in range(9)]
            else:
                rule, col = "fixed", [draw.integers(L)] * 9
            rules[attr], cols[attr] = rule, col
        grid = [tuple(cols[a][k] for a in ATTRIBUTES) for k in range(9)]
        problem = self._grid_problem(grid, rules, _CURRENT)
        if problem:
            raise Rejected(problem)
        choices = None
        if "select" in modes:
            scheme = distractor_scheme or next(iter(self.distractor_schemes))
            choices = self._make_choices(grid[8], rules, scheme, n_choices, ranges, draw)
        return self._build(
            grid,
            rules,
            params=p,
            modes=modes,
            choices=choices,
            scheme=distractor_scheme if choices is not None else None,
            seed=seed,
        )

    @staticmethod
    def _ranges(max_count: int, inv: Inventory = _CURRENT) -> dict[str, int]:
        r = {a: len(inv.levels[a]) for a in inv.attributes}
        r["count"] = max_count
        return r

    @staticmethod
    def _ruled_column(attr: str, kinds: Sequence[str], L: int, rng: _Draw) -> tuple[str, list[int]]:
        options = [k for k in kinds if k != "sum-difference" or attr in _NUMERIC]
        if not options:
            raise Rejected(f"no rule of the rule set applies to {attr}")
        kind = rng.choice(options)
        rows: list[list[int]]
        if kind == "kept":
            if L < 2:
                raise Rejected(f"{attr} has one level; no kept rule that varies")
            vals = [rng.integers(L) for _ in range(3)]
            if len(set(vals)) == 1:
                raise Rejected("kept rule with one value in every row")
            rule, rows = "kept", [[v] * 3 for v in vals]
        elif kind == "step":
            k = rng.choice((1, -1, 2, -2))
            lo, hi = max(0, -2 * k), min(L - 1, L - 1 - 2 * k)
            if lo > hi:
                raise Rejected(f"{attr} has too few levels for a step of {k}")
            starts = [rng.integers(lo, hi + 1) for _ in range(3)]
            rule, rows = f"step{k:+d}", [[s, s + k, s + 2 * k] for s in starts]
        elif kind == "each-of-three":
            if L < 3:
                raise Rejected(f"{attr} has too few levels for each of three values")
            vals = rng.sample(range(L), 3)
            shift = rng.choice((1, 2))
            rows = [[vals[(c + r * shift) % 3] for c in range(3)] for r in range(3)]
            rule = "each-of-three"
        else:
            rule = "sum" if rng.random() < 0.5 else "difference"
            rows = []
            for _ in range(3):
                if rule == "sum":  # 1-based values x + y = z <= L
                    if L < 2:
                        raise Rejected(f"{attr} has too few levels for a sum")
                    x = rng.integers(1, L)
                    y = rng.integers(1, L - x + 1)
                    rows.append([x - 1, y - 1, x + y - 1])
                else:  # x - y = z >= 1
                    if L < 3:
                        raise Rejected(f"{attr} has too few levels for a difference")
                    x = rng.integers(2, L + 1)
                    y = rng.integers(1, x)
                    rows.append([x - 1, y - 1, x - y - 1])
        return rule, [v for row in rows for v in row]

    @staticmethod
    def _grid_problem(
        grid: Sequence[Sequence[int]], rules: Mapping[str, str], inv: Inventory
    ) -> str | None:
        """Why the 9-panel grid (answer last) is not a valid item, or ``None``."""
        for j, attr in enumerate(inv.attributes):
            col = [g[j] for g in grid]
            if not _rule_holds(rules[attr], col, attr, inv):
                return f"{attr} does not follow its rule {rules[attr]}"
            fits = fitting_rules(attr, col[:8], inv)
            if rules[attr] == "irrelevant":
                if fits:
                    return f"irrelevant {attr} fits a rule"
                continue
            if not fits:
                return f"no rule fits {attr}"
            if any(v != col[8] for v in fits.values()):
                return f"rules fitting {attr} predict different values"
        return None

    # -- choices ----------------------------------------------------------------------------
    @staticmethod
    def _bound(rules: Mapping[str, str]) -> list[int]:
        """Indices of attributes whose value is determined (not irrelevant)."""
        return [j for j, a in enumerate(ATTRIBUTES) if rules[a] != "irrelevant"]

    def _make_choices(
        self,
        answer: tuple[int, ...],
        rules: Mapping[str, str],
        scheme: str,
        n: int,
        ranges: Mapping[str, int],
        rng: _Draw,
    ) -> list[tuple[int, ...]]:
        bound = self._bound(rules)
        if scheme == "one-off":
            mods = [(j, v) for j in bound for v in range(ranges[ATTRIBUTES[j]]) if v != answer[j]]
            if len(mods) < n - 1:
                raise Rejected(
                    f"one-off: only {len(mods)} single-attribute changes for {n} choices"
                )
            out = [answer]
            for j, v in rng.sample(mods, n - 1):
                c = list(answer)
                c[j] = v
                out.append(tuple(c))
        elif scheme == "balanced":
            out = self._balanced(answer, bound, n, ranges, rng)
        else:  # pragma: no cover - parse_spec checks the scheme
            raise Rejected(f"unknown distractor scheme {scheme}")
        return rng.permutation(out)

    @staticmethod
    def _balanced(
        answer: tuple[int, ...],
        bound: Sequence[int],
        n: int,
        ranges: Mapping[str, int],
        rng: _Draw,
    ) -> list[tuple[int, ...]]:
        # factor n into as many factors as possible; each factor is the number of values one
        # attribute takes among the choices, so the choices are a full product of value sets
        factors = []
        m, q = n, 2
        while m > 1:
            while m % q == 0:
                factors.append(q)
                m //= q
            q += 1
        attrs = rng.permutation(bound)
        while len(factors) > len(attrs) and len(factors) > 1:
            factors.sort()
            factors = [factors[0] * factors[1], *factors[2:]]
        factors.sort(reverse=True)
        chosen: list[tuple[int, list[int]]] = []
        free = list(attrs)
        for f in factors:
            j = next((j for j in free if ranges[ATTRIBUTES[j]] >= f), None)
            if j is None:
                raise Rejected(f"balanced: cannot build {n} choices from the free attributes")
            free.remove(j)
            others = [v for v in range(ranges[ATTRIBUTES[j]]) if v != answer[j]]
            alt = rng.sample(others, f - 1)
            chosen.append((j, [answer[j], *alt]))
        out = []
        for combo in itertools.product(*(vals for _, vals in chosen)):
            c = list(answer)
            for (j, _), v in zip(chosen, combo, strict=True):
                c[j] = v
            out.append(tuple(c))
        return out

    # -- building and reading items ---------------------------------------------------------
    def _build(
        self,
        grid: Sequence[tuple[int, ...]],
        rules: Mapping[str, str],
        *,
        params: Mapping[str, Any],
        modes: Sequence[str],
        choices: Sequence[tuple[int, ...]] | None,
        scheme: str | None,
        seed: int,
        variant_of: str | None = None,
        variant_operator: str | None = None,
    ) -> Item:
        answer = panel_from_index(grid[8])
        panels: list[list[dict[str, Any] | None]] = [
            [panel_from_index(grid[3 * r + c]) for c in range(3)] for r in range(3)
        ]
        panels[2][2] = None
        ruled = [a for a in ATTRIBUTES if rules[a] not in ("fixed", "irrelevant")]
        irr = [a for a in ATTRIBUTES if rules[a] == "irrelevant"]
        accepted = []
        if irr:
            for combo in itertools.product(*(LEVELS[a] for a in irr)):
                alt = dict(answer)
                alt.update(zip(irr, combo, strict=True))
                if alt != answer:
                    accepted.append({"answer": alt, "label": "any " + " and ".join(irr)})
        hardest = max(ruled, key=lambda a: _WEIGHT[rules[a]], default=None)
        all_panels = list(grid) + list(choices or [])
        j_count = ATTRIBUTES.index("count")
        factors = {
            "n_rules": len(ruled),
            "rule_set": params.get("rule_set", "every-kind"),
            "complexity": sum(_WEIGHT[rules[a]] for a in ruled),
            "hardest_rule": "none" if hardest is None else _kind(rules[hardest]),
            "n_irrelevant": len(irr),
            "max_objects": max(LEVELS["count"][g[j_count]] for g in all_panels),
        }
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors=factors,
            modes=list(modes),
            stimulus={"panels": panels, "rules": dict(rules)},
            answer=answer,
            accepted=accepted,
            choices=None if choices is None else [panel_from_index(c) for c in choices],
            distractor_scheme=scheme,
            variant_of=variant_of,
            variant_operator=variant_operator,
            seed=seed,
        )

    @staticmethod
    def _grid(item: Item, inv: Inventory) -> list[tuple[int, ...]]:
        """The nine panels of an item as level indices, the answer last."""
        rows = item.stimulus["panels"]
        out = [panel_to_index(rows[k // 3][k % 3], inv) for k in range(8)]
        out.append(panel_to_index(item.answer, inv))
        return out

    def check(self, item: Item) -> list[str]:
        problems: list[str] = []
        try:
            inv = inventory(item)
            grid = self._grid(item, inv)
            rules = inv.rules(item)
        except (KeyError, TypeError, IndexError, ItemError) as err:
            return [f"malformed matrices payload ({err!r})"]
        problem = self._grid_problem(grid, rules, inv)
        if problem:
            problems.append(problem)
        if item.choices is not None:
            key = canonical_json(item.answer)
            hits = sum(canonical_json(c) == key for c in item.choices)
            if hits != 1:
                problems.append(f"the answer appears {hits} times among the choices")
            for k, ch in enumerate(item.choices, start=1):
                if canonical_json(ch) == key:
                    continue
                try:
                    cidx = panel_to_index(ch, inv)
                except (KeyError, TypeError):
                    problems.append(f"choice {k} is not a panel")
                    continue
                if not self._broken(grid, rules, cidx, inv):
                    problems.append(f"choice {k} also satisfies every row rule")
            if len({canonical_json(c) for c in item.choices}) != len(item.choices):
                problems.append("two choices are the same panel")
        return problems

    @staticmethod
    def _broken(
        grid: Sequence[tuple[int, ...]],
        rules: Mapping[str, str],
        panel: tuple[int, ...],
        inv: Inventory,
    ) -> list[str]:
        """Attributes whose rule the panel breaks in the gap."""
        out = []
        for j, attr in enumerate(inv.attributes):
            if rules[attr] == "irrelevant":
                continue
            col = [g[j] for g in grid[:8]] + [panel[j]]
            if not _rule_holds(rules[attr], col, attr, inv):
                out.append(attr)
        return out

    def broken_rules(self, item: Item, panel: Mapping[str, Any]) -> list[dict[str, str]]:
        """Which attributes of ``panel`` break which row rule when it fills the gap.

        Returns
        -------
        list of dict
            One ``{"attribute", "rule", "expected", "got"}`` per broken rule; rules are named
            as in :data:`HYPOTHESES` (``kept`` for an attribute fixed in all nine panels), also
            for items of version 1.
        """
        inv = inventory(item)
        p = self._normalize_panel(item, panel)
        grid = self._grid(item, inv)
        rules = inv.rules(item)
        return [
            {
                "attribute": a,
                "rule": "kept" if rules[a] == "fixed" else rules[a],
                "expected": str(item.answer[a]),
                "got": str(p[a]),
            }
            for a in self._broken(grid, rules, panel_to_index(p, inv), inv)
        ]

    # -- variants ---------------------------------------------------------------------------
    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        if operator not in self.variant_operators:
            raise Rejected(f"unknown operator {operator}")
        if item.family_version != self.version:
            raise Rejected(
                f"{operator}: item {item.id} is of family version {item.family_version}; "
                f"variants are made of version {self.version} items"
            )
        inv = _CURRENT
        grid = self._grid(item, inv)
        rules = dict(item.stimulus["rules"])
        choices = None if item.choices is None else [panel_to_index(c) for c in item.choices]
        ranges = self._ranges(int(item.params.get("max_count", 6)))
        if operator == "swap-rows":
            grid = grid[3:6] + grid[0:3] + grid[6:9]
        elif operator in ("permute-values", "swap-shapes"):
            targets = (
                ["shape"] if operator == "swap-shapes" else [a for a in ATTRIBUTES if a != "shape"]
            )
            maps: dict[int, list[int]] = {}
            for attr in targets:
                L, rule = ranges[attr], rules[attr]
                if rule in ("sum", "difference"):
                    continue
                if rule.startswith("step"):
                    perm = list(range(L))[::-1]
                    rules[attr] = "step" + ("-" if "+" in rule else "+") + rule[-1]
                else:
                    perm = [int(v) for v in rng.permutation(L)]
                if perm != list(range(L)):
                    maps[ATTRIBUTES.index(attr)] = perm
            if not maps:
                raise Rejected(f"{operator}: no attribute whose values can be renamed")

            def remap(p: tuple[int, ...]) -> tuple[int, ...]:
                return tuple(maps[j][v] if j in maps else v for j, v in enumerate(p))

            grid = [remap(g) for g in grid]
            choices = None if choices is None else [remap(c) for c in choices]
        else:  # move-rule
            ruled = [a for a in ATTRIBUTES if rules[a] not in ("fixed", "irrelevant")]
            pairs = []
            for a in ruled:
                for b in ATTRIBUTES:
                    if b == a or rules[b] == "irrelevant":
                        continue
                    ja, jb = ATTRIBUTES.index(a), ATTRIBUTES.index(b)
                    arith = {rules[a], rules[b]} & {"sum", "difference"}
                    if arith and not {a, b} <= _NUMERIC:
                        continue
                    pool = grid + (choices or [])
                    if (
                        max(p[ja] for p in pool) >= ranges[b]
                        or max(p[jb] for p in pool) >= ranges[a]
                    ):
                        continue
                    pairs.append((ja, jb))
            if not pairs:
                raise Rejected("move-rule: no attribute can take over a rule")
            ja, jb = pairs[int(rng.integers(len(pairs)))]

            def swap(p: tuple[int, ...]) -> tuple[int, ...]:
                q = list(p)
                q[ja], q[jb] = p[jb], p[ja]
                return tuple(q)

            grid = [swap(g) for g in grid]
            choices = None if choices is None else [swap(c) for c in choices]
            a, b = ATTRIBUTES[ja], ATTRIBUTES[jb]
            rules[a], rules[b] = rules[b], rules[a]
        problem = self._grid_problem(grid, rules, inv)
        if problem:
            raise Rejected(f"{operator}: {problem}")
        if choices is not None:
            for c in choices:
                if c != grid[8] and not self._broken(grid, rules, c, inv):
                    raise Rejected(f"{operator}: a distractor became correct")
        if grid == self._grid(item, inv):
            raise Rejected(f"{operator}: the panels did not change")
        return self._build(
            grid,
            rules,
            params=item.params,
            modes=item.modes,
            choices=choices,
            scheme=item.distractor_scheme,
            seed=item.seed,
            variant_of=item.id,
            variant_operator=operator,
        )

    # -- responses --------------------------------------------------------------------------
    def _normalize_panel(self, item: Item, response: Any) -> dict[str, Any]:
        inv = inventory(item)
        if isinstance(response, str):
            return self._parse_panel_text(item, response)
        if not isinstance(response, Mapping):
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a panel, a dict "
                f"with keys {', '.join(inv.attributes)}.",
                field="response",
            )
        low = {str(k).strip().lower(): v for k, v in response.items()}
        out = {}
        for attr in inv.attributes:
            if attr not in low:
                raise ResponseError(
                    f"item {item.id}: field 'response.{attr}' is missing; accepted: a panel dict "
                    f"with keys {', '.join(inv.attributes)}.",
                    field=f"response.{attr}",
                )
            v = _norm_value(inv, attr, low[attr])
            if v is None:
                raise ResponseError(
                    f"item {item.id}: field 'response.{attr}': got {low[attr]!r}; accepted: "
                    f"{_levels_text(inv, attr)}.",
                    field=f"response.{attr}",
                )
            out[attr] = v
        return out

    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        return self._normalize_panel(item, response)

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        inv = inventory(item)
        panel = item.choices[response - 1] if mode == "select" else response  # type: ignore[index]
        p = self._normalize_panel(item, panel)
        rows = item.stimulus["panels"]
        key = canonical_json(p)
        if key in (canonical_json(rows[2][1]), canonical_json(rows[1][2])):
            return "copied-adjacent"
        grid = self._grid(item, inv)
        broken = self._broken(grid, inv.rules(item), panel_to_index(p, inv), inv)
        if len(broken) == 1:
            return f"wrong-{broken[0]}"
        if len(broken) == 2:
            return "multiple-wrong"
        return "other"

    def sample_wrong_answer(
        self, item: Item, mode: str, rng: np.random.Generator
    ) -> tuple[Any, str]:
        inv = inventory(item)
        rules = inv.rules(item)
        bound = [a for a in inv.attributes if rules[a] != "irrelevant"]
        kind = int(rng.integers(4))
        if kind == 0:
            resp = dict(item.stimulus["panels"][2][1])
        else:
            n_wrong = 1 if kind < 3 else 2
            attrs = [bound[int(j)] for j in rng.permutation(len(bound))[:n_wrong]]
            resp = dict(item.answer)
            for a in attrs:
                others = [v for v in inv.levels[a] if v != item.answer[a]]
                resp[a] = others[int(rng.integers(len(others)))]
        if self.score(item, resp, mode).correct:  # a copied panel that happens to be right
            a = bound[0]
            resp[a] = next(v for v in inv.levels[a] if v != item.answer[a])
        return resp, self.classify_error(item, resp, mode)

    _JSON = re.compile(r"\{[^{}]*\}")

    def _parse_panel_text(self, item: Item, text: str) -> dict[str, Any]:
        inv = inventory(item)
        for blob in reversed(self._JSON.findall(text)):
            try:
                obj = json.loads(blob)
            except json.JSONDecodeError:
                continue
            if isinstance(obj, dict):
                try:
                    return self._normalize_panel(item, obj)
                except ResponseError:
                    continue
        out: dict[str, Any] = {}
        for attr in inv.attributes:
            pat = re.compile(
                rf"\b{attr}s?\b\s*(?:[:=]|is|of)?\s*[\"'`*]*\s*([A-Za-z]+|\d+)", re.IGNORECASE
            )
            for m in reversed(list(pat.finditer(text))):
                v = _norm_value(inv, attr, m.group(1))
                if v is not None:
                    out[attr] = v
                    break
        missing = [a for a in inv.attributes if a not in out]
        if missing:
            raise ResponseError(
                f"item {item.id}: no value for {', '.join(missing)} found in reply; accepted: "
                + inv.answer_format
                + ".",
                field="response",
            )
        return out

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            return super().parse_text(item, text, mode)
        return self._parse_panel_text(item, text)

    # -- text and structured views ----------------------------------------------------------
    _NOTES = {
        "shape": "the shape of every copy",
        "size": "1 smallest",
        "shade": "the fill, from white to black",
        "count": "copies of the shape",
        "position": "the height of the group of copies in the panel, from the top",
        "turn": "where the drop's tip, the crescent's horns, the house's roof, the tee's bar or "
        "the ring's opening faces; each value a quarter turn clockwise from the last",
    }

    def render_text(self, item: Item, mode: str) -> str:
        inv = inventory(item)
        rows = item.stimulus["panels"]
        lines = [
            "Nine panels stand in 3 rows of 3; the last panel of row 3 is missing. Each panel "
            "shows one or more copies of one shape. A panel is written as its attributes:",
            *(f"  {a}: {_levels_text(inv, a)} ({self._NOTES[a]})" for a in inv.attributes),
            "Along every row, each attribute obeys a rule of its own (for example: it stays "
            "put, it moves up or down by even amounts, three values appear once each, or the third "
            "number comes from adding or subtracting the first two).",
            "",
        ]
        for r in range(3):
            for c in range(3):
                p = rows[r][c]
                lines.append(
                    f"row {r + 1}, column {c + 1}: " + ("?" if p is None else _panel_text(inv, p))
                )
        lines.append("")
        if mode == "select":
            lines.append("Choices:")
            for k, ch in enumerate(item.choices or (), start=1):
                lines.append(f"  {k}: {_panel_text(inv, ch)}")
            n = len(item.choices or ())
            lines.append(
                f"Which choice fills the missing panel? Reply with the choice number only (1-{n})."
            )
        else:
            lines.append(
                "What is the missing panel? Reply with one line in this form: "
                + " ".join(f"{a}=<{a}>" for a in inv.attributes)
            )
        return "\n".join(lines)

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        inv = inventory(item)
        view: dict[str, Any] = {
            "task": "fill the missing panel (row 3, column 3) of the 3x3 matrix",
            "attributes": {a: list(inv.levels[a]) for a in inv.attributes},
            "numeric": sorted(inv.numeric),
            "notes": {a: self._NOTES[a] for a in inv.attributes},
            "panels": json.loads(canonical_json(item.stimulus["panels"])),
            "missing": [2, 2],
            "answer_format": inv.answer_format,
        }
        if mode == "select":
            view["choices"] = [dict(c) for c in item.choices or ()]
        return view

    # -- scenes -----------------------------------------------------------------------------
    @staticmethod
    def _rows_max(item: Item) -> int:
        """Rows of copies the item's tallest group needs (1 up to three copies, else 2)."""
        rows = item.stimulus["panels"]
        pool = [p for row in rows for p in row if p is not None] + list(item.choices or ())
        most = max([int(item.params.get("max_count", 6))] + [int(p["count"]) for p in pool])
        return 1 if most <= 3 else 2

    def _look(self, item: Item, mode: str) -> _Look:
        if mode == "select":
            cell = _select_layout(len(item.choices or ()))[2]
        else:
            cell = _matrix_cell()
        return _Look(cell, self._rows_max(item), len(inventory(item).levels["position"]))

    def scene(self, item: Item, mode: str) -> Scene:
        """The matrix (the missing panel framed in the accent colour with a question mark) and,
        in select mode, the choices in a block to its right at the same scale, each numbered
        outside its frame; in generate mode the answer is built attribute by attribute and
        shown in the missing panel (``answer_box``)."""
        inv = inventory(item)
        look = self._look(item, mode)
        c = look.cell
        w, h = DESIGN_BOX
        rows = item.stimulus["panels"]
        matrix_w = 3 * c + 2 * _GAP
        els: list[Element] = []
        slots: list[Slot] = []
        if mode == "select":
            n = len(item.choices or ())
            cols, nrows, _ = _select_layout(n)
            block_w = cols * (_BADGE_W + c) + (cols - 1) * _CHOICE_GAP
            x0 = (w - (matrix_w + _BLOCK_GAP + block_w)) / 2
        else:
            w = h = 2 * _MARGIN + matrix_w
            x0 = _MARGIN
        y_top = (h + matrix_w) / 2
        gap_box = (0.0, 0.0, 0.0, 0.0)
        for r in range(3):
            for col in range(3):
                px, py = x0 + col * (c + _GAP), y_top - (r + 1) * c - r * _GAP
                els += look.panel(inv, rows[r][col], px, py, "panel")
                if rows[r][col] is None:
                    gap_box = (px, py, px + c, py + c)
        if mode != "select":
            attrs = {a: list(inv.levels[a]) for a in inv.attributes}
            attrs["count"] = attrs["count"][: int(item.params.get("max_count", 6))]
            return Scene(
                w,
                h,
                tuple(els),
                response=Response("build", {"attributes": attrs}),
                answer_box=gap_box,
            )
        bx = x0 + matrix_w + _BLOCK_GAP
        by_top = (h + nrows * c + (nrows - 1) * _CHOICE_GAP) / 2
        for k, ch in enumerate(item.choices or ()):
            rr, cc = divmod(k, cols)
            fx = bx + cc * (_BADGE_W + c + _CHOICE_GAP) + _BADGE_W
            fy = by_top - (rr + 1) * c - rr * _CHOICE_GAP
            els += look.panel(inv, ch, fx, fy, "frame")
            els.append(
                Text(
                    fx - 6,
                    fy + c,
                    str(k + 1),
                    _BADGE_SIZE,
                    colour=_INK,
                    anchor="right",
                    valign="top",
                    bold=True,
                    role="badge",
                )
            )
            slots.append(Slot(f"choice:{k + 1}", fx + c / 2, fy + c / 2, c, c))
        return Scene(w, h, tuple(els), slots=tuple(slots), response=Response("choose", {"n": n}))

    def answer_scene(self, item: Item, mode: str, answer: Any) -> Scene:
        """A panel drawn exactly as in the item's scene, the size of one panel (the answer box):
        any complete panel (a dict, as built on screen) or, in select mode, a choice number."""
        inv = inventory(item)
        if mode == "select" and isinstance(answer, int) and not isinstance(answer, bool):
            k = self.normalize(item, answer, mode)
            panel = self._normalize_panel(item, (item.choices or [])[k - 1])
        else:
            panel = self._normalize_panel(item, answer)
        look = self._look(item, mode)
        els = look.panel(inv, panel, 0.0, 0.0, "panel")
        return Scene(look.cell, look.cell, tuple(els))


def _panel_text(inv: Inventory, p: Mapping[str, Any]) -> str:
    return " ".join(f"{a}={p[a]}" for a in inv.attributes)


def _kind(rule: str) -> str:
    if rule.startswith("step"):
        return "step"
    if rule in ("sum", "difference"):
        return "sum-difference"
    return rule


register(MatricesFamily())
