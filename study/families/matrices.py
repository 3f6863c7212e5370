"""The ``matrices`` family: 3x3 figure matrices with the bottom-right panel missing.

Every panel shows ``count`` copies of one shape, of one size and shade, at one height in the
panel. Each of the five attributes (``shape``, ``size``, ``shade``, ``count``, ``position``) plays
one role in an item:

* **ruled** -- governed by a row rule: ``constant`` (each row keeps one value, rows differ),
  ``progression+k`` / ``progression-k`` (each step along a row moves ``k`` levels), ``distribution``
  (every row shows the same three distinct values in another order), ``sum`` / ``difference``
  (third value = first + / - second; numeric attributes ``size`` and ``count`` only);
* **fixed** -- one value in all nine panels (the trivial constant rule);
* **irrelevant** -- a fresh value in every panel that fits no rule, so any value completes the
  matrix; the other values are stored as accepted answers.

Validity (checked at generation and by :meth:`MatricesFamily.check`): for every attribute, every
rule of the family's rule space that fits the eight visible panels predicts the same value (and
at least one fits, unless the attribute is irrelevant, where none may fit), and no distractor fits
every attribute's rule.

Distractor schemes for select mode: ``one-off`` (each distractor changes one attribute of the
answer) and ``balanced`` (the choices are the product of value sets of a few attributes, so every
value of every attribute appears equally often and no choices-only vote can find the answer).
"""

from __future__ import annotations

import itertools
import json
import math
import re
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ..exceptions import ResponseError
from ..item import Item, canonical_json
from . import register
from ._base import Family, ParamSpec, Rejected

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = [
    "ATTRIBUTES",
    "HYPOTHESES",
    "LEVELS",
    "MatricesFamily",
    "fitting_rules",
    "panel_from_index",
    "panel_to_index",
    "rule_fits",
]

#: the panel attributes, in the order used everywhere
ATTRIBUTES: tuple[str, ...] = ("shape", "size", "shade", "count", "position")

#: the values of every attribute, in their order (progressions move along this order)
LEVELS: dict[str, tuple[Any, ...]] = {
    "shape": ("triangle", "square", "pentagon", "hexagon", "circle"),  # by number of corners
    "size": (1, 2, 3, 4, 5, 6),
    "shade": ("white", "pale", "light", "medium", "dark", "black"),
    "count": (1, 2, 3, 4, 5, 6),
    "position": ("top", "upper", "middle", "lower", "bottom"),
}
_NUMERIC = frozenset({"size", "count"})
_N_LEVELS = tuple(len(LEVELS[a]) for a in ATTRIBUTES)
_INDEX = {a: {v: i for i, v in enumerate(LEVELS[a])} for a in ATTRIBUTES}

#: the rule space, in the order a careful solver tries it (simplest first)
HYPOTHESES: tuple[str, ...] = (
    "constant",
    "progression+1",
    "progression-1",
    "progression+2",
    "progression-2",
    "distribution",
    "sum",
    "difference",
)
_WEIGHT = {
    "constant": 1,
    "progression+1": 2,
    "progression-1": 2,
    "progression+2": 3,
    "progression-2": 3,
    "distribution": 3,
    "sum": 4,
    "difference": 4,
}
_RULE_SETS = {
    "basic": ("constant", "progression"),
    "all": ("constant", "progression", "distribution", "arithmetic"),
    "hard": ("distribution", "arithmetic"),
}
_SHADE_GREY = {
    "white": 1.0,
    "pale": 0.82,
    "light": 0.64,
    "medium": 0.46,
    "dark": 0.28,
    "black": 0.06,
}


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
    if rule == "constant":
        if not (a == b == c and d == e == f and g == h):
            return None
        pred = g
    elif rule.startswith("progression"):
        k = int(rule[len("progression") :])
        if not (b - a == k and c - b == k and e - d == k and f - e == k and h - g == k):
            return None
        pred = h + k
    elif rule == "distribution":
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


def fitting_rules(attribute: str, cells: Sequence[int]) -> dict[str, int]:
    """Every rule of :data:`HYPOTHESES` fitting ``cells`` of ``attribute``, with its prediction."""
    n = len(LEVELS[attribute])
    num = attribute in _NUMERIC
    out = {}
    for rule in HYPOTHESES:
        p = rule_fits(rule, cells, n, numeric=num)
        if p is not None:
            out[rule] = p
    return out


def _rule_holds(rule: str, col: Sequence[int], attribute: str) -> bool:
    """Whether a full 9-cell column of values satisfies ``rule`` in all three rows."""
    n = len(LEVELS[attribute])
    if rule == "irrelevant":
        return True
    if rule == "fixed":
        return len(set(col)) == 1
    return rule_fits(rule, col[:8], n, numeric=attribute in _NUMERIC) == col[8]


# -- panels ----------------------------------------------------------------------------------
def panel_from_index(idx: Sequence[int]) -> dict[str, Any]:
    """A panel dict from one level index per attribute."""
    return {a: LEVELS[a][i] for a, i in zip(ATTRIBUTES, idx, strict=True)}


def panel_to_index(panel: Mapping[str, Any]) -> tuple[int, ...]:
    """Level indices of a (normalised) panel dict."""
    return tuple(_INDEX[a][panel[a]] for a in ATTRIBUTES)


def _norm_value(attr: str, value: Any) -> Any:
    """Canonical value of ``attr`` or ``None``: ints for numeric attributes, names otherwise."""
    if attr in _NUMERIC:
        if isinstance(value, bool):
            return None
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if isinstance(value, str) and value.strip().isdigit():
            value = int(value.strip())
        return value if isinstance(value, int) and value in _INDEX[attr] else None
    if isinstance(value, str):
        v = value.strip().strip("\"'").lower()
        if v == "centre" or v == "center":
            v = "middle"
        return v if v in _INDEX[attr] else None
    return None


def _levels_text(attr: str) -> str:
    lv = LEVELS[attr]
    if attr in _NUMERIC:
        return f"{lv[0]}-{lv[-1]}"
    return "|".join(lv)


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


class MatricesFamily(Family):
    """3x3 figure matrices with row rules per attribute; see the module docstring."""

    name = "matrices"
    prefix = "mat"
    reference_solver = "matrices-ref"
    typical_rt_ms = 14000.0
    version = "1"
    modes = ("generate", "select")
    params = (
        ParamSpec("n_rules", "int", 2, "number of attributes governed by a row rule", 1, 5),
        ParamSpec(
            "rule_set",
            "choice",
            "all",
            "rule kinds drawn from: basic (constant, progression), all, hard "
            "(distribution, arithmetic)",
            options=("basic", "all", "hard"),
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
        "permute-values": "rename the values of size, shade, count and position by "
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
        "multiple-wrong": "two attributes break their row rules",
        "copied-adjacent": "the panel left of or above the gap, copied",
        "other": "three or more attributes wrong, or nothing systematic",
    }
    answer_format = (
        "one panel: shape=<triangle|square|pentagon|hexagon|circle> size=<1-6> "
        "shade=<white|pale|light|medium|dark|black> count=<1-6> "
        "position=<top|upper|middle|lower|bottom>"
    )

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
        problem = self._grid_problem(grid, rules)
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
    def _ranges(max_count: int) -> dict[str, int]:
        r = {a: len(LEVELS[a]) for a in ATTRIBUTES}
        r["count"] = max_count
        return r

    @staticmethod
    def _ruled_column(attr: str, kinds: Sequence[str], L: int, rng: _Draw) -> tuple[str, list[int]]:
        options = [k for k in kinds if k != "arithmetic" or attr in _NUMERIC]
        if not options:
            raise Rejected(f"no rule of the rule set applies to {attr}")
        kind = rng.choice(options)
        rows: list[list[int]]
        if kind == "constant":
            if L < 2:
                raise Rejected(f"{attr} has one level; no constant rule that varies")
            vals = [rng.integers(L) for _ in range(3)]
            if len(set(vals)) == 1:
                raise Rejected("constant rule with one value in every row")
            rule, rows = "constant", [[v] * 3 for v in vals]
        elif kind == "progression":
            k = rng.choice((1, -1, 2, -2))
            lo, hi = max(0, -2 * k), min(L - 1, L - 1 - 2 * k)
            if lo > hi:
                raise Rejected(f"{attr} has too few levels for a progression of step {k}")
            starts = [rng.integers(lo, hi + 1) for _ in range(3)]
            rule, rows = f"progression{k:+d}", [[s, s + k, s + 2 * k] for s in starts]
        elif kind == "distribution":
            if L < 3:
                raise Rejected(f"{attr} has too few levels for a distribution of three values")
            vals = rng.sample(range(L), 3)
            shift = rng.choice((1, 2))
            rows = [[vals[(c + r * shift) % 3] for c in range(3)] for r in range(3)]
            rule = "distribution"
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
    def _grid_problem(grid: Sequence[Sequence[int]], rules: Mapping[str, str]) -> str | None:
        """Why the 9-panel grid (answer last) is not a valid item, or ``None``."""
        for j, attr in enumerate(ATTRIBUTES):
            col = [g[j] for g in grid]
            if not _rule_holds(rules[attr], col, attr):
                return f"{attr} does not follow its rule {rules[attr]}"
            fits = fitting_rules(attr, col[:8])
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
            "rule_set": params.get("rule_set", "all"),
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
    def _grid(item: Item) -> list[tuple[int, ...]]:
        """The nine panels of an item as level indices, the answer last."""
        rows = item.stimulus["panels"]
        out = [panel_to_index(rows[k // 3][k % 3]) for k in range(8)]
        out.append(panel_to_index(item.answer))
        return out

    def check(self, item: Item) -> list[str]:
        problems: list[str] = []
        try:
            grid = self._grid(item)
            rules = item.stimulus["rules"]
        except (KeyError, TypeError, IndexError) as err:
            return [f"malformed matrices payload ({err!r})"]
        problem = self._grid_problem(grid, rules)
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
                    cidx = panel_to_index(ch)
                except (KeyError, TypeError):
                    problems.append(f"choice {k} is not a panel")
                    continue
                if not self._broken(grid, rules, cidx):
                    problems.append(f"choice {k} also satisfies every row rule")
            if len({canonical_json(c) for c in item.choices}) != len(item.choices):
                problems.append("two choices are the same panel")
        return problems

    @staticmethod
    def _broken(
        grid: Sequence[tuple[int, ...]], rules: Mapping[str, str], panel: tuple[int, ...]
    ) -> list[str]:
        """Attributes whose rule the panel breaks in the gap."""
        out = []
        for j, attr in enumerate(ATTRIBUTES):
            if rules[attr] == "irrelevant":
                continue
            col = [g[j] for g in grid[:8]] + [panel[j]]
            if not _rule_holds(rules[attr], col, attr):
                out.append(attr)
        return out

    def broken_rules(self, item: Item, panel: Mapping[str, Any]) -> list[dict[str, str]]:
        """Which attributes of ``panel`` break which row rule when it fills the gap.

        Returns
        -------
        list of dict
            One ``{"attribute", "rule", "expected", "got"}`` per broken rule.
        """
        p = self._normalize_panel(item, panel)
        grid = self._grid(item)
        rules = item.stimulus["rules"]
        return [
            {
                "attribute": a,
                "rule": "constant" if rules[a] == "fixed" else rules[a],
                "expected": str(item.answer[a]),
                "got": str(p[a]),
            }
            for a in self._broken(grid, rules, panel_to_index(p))
        ]

    # -- variants ---------------------------------------------------------------------------
    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        if operator not in self.variant_operators:
            raise Rejected(f"unknown operator {operator}")
        grid = self._grid(item)
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
                if rule.startswith("progression"):
                    perm = list(range(L))[::-1]
                    rules[attr] = "progression" + ("-" if "+" in rule else "+") + rule[-1]
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
        problem = self._grid_problem(grid, rules)
        if problem:
            raise Rejected(f"{operator}: {problem}")
        if choices is not None:
            for c in choices:
                if c != grid[8] and not self._broken(grid, rules, c):
                    raise Rejected(f"{operator}: a distractor became correct")
        if grid == self._grid(item):
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
        if isinstance(response, str):
            return self._parse_panel_text(item, response)
        if not isinstance(response, Mapping):
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a panel, a dict "
                f"with keys {', '.join(ATTRIBUTES)}.",
                field="response",
            )
        low = {str(k).strip().lower(): v for k, v in response.items()}
        out = {}
        for attr in ATTRIBUTES:
            if attr not in low:
                raise ResponseError(
                    f"item {item.id}: field 'response.{attr}' is missing; accepted: a panel dict "
                    f"with keys {', '.join(ATTRIBUTES)}.",
                    field=f"response.{attr}",
                )
            v = _norm_value(attr, low[attr])
            if v is None:
                raise ResponseError(
                    f"item {item.id}: field 'response.{attr}': got {low[attr]!r}; accepted: "
                    f"{_levels_text(attr)}.",
                    field=f"response.{attr}",
                )
            out[attr] = v
        return out

    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        return self._normalize_panel(item, response)

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        panel = item.choices[response - 1] if mode == "select" else response  # type: ignore[index]
        p = self._normalize_panel(item, panel)
        rows = item.stimulus["panels"]
        key = canonical_json(p)
        if key in (canonical_json(rows[2][1]), canonical_json(rows[1][2])):
            return "copied-adjacent"
        grid = self._grid(item)
        broken = self._broken(grid, item.stimulus["rules"], panel_to_index(p))
        if len(broken) == 1:
            return f"wrong-{broken[0]}"
        if len(broken) == 2:
            return "multiple-wrong"
        return "other"

    def sample_wrong_answer(
        self, item: Item, mode: str, rng: np.random.Generator
    ) -> tuple[Any, str]:
        rules = item.stimulus["rules"]
        bound = [a for a in ATTRIBUTES if rules[a] != "irrelevant"]
        kind = int(rng.integers(4))
        if kind == 0:
            resp = dict(item.stimulus["panels"][2][1])
        else:
            n_wrong = 1 if kind < 3 else 2
            attrs = [bound[int(j)] for j in rng.permutation(len(bound))[:n_wrong]]
            resp = dict(item.answer)
            for a in attrs:
                others = [v for v in LEVELS[a] if v != item.answer[a]]
                resp[a] = others[int(rng.integers(len(others)))]
        if self.score(item, resp, mode).correct:  # a copied panel that happens to be right
            a = bound[0]
            resp[a] = next(v for v in LEVELS[a] if v != item.answer[a])
        return resp, self.classify_error(item, resp, mode)

    _JSON = re.compile(r"\{[^{}]*\}")

    def _parse_panel_text(self, item: Item, text: str) -> dict[str, Any]:
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
        for attr in ATTRIBUTES:
            pat = re.compile(
                rf"\b{attr}s?\b\s*(?:[:=]|is|of)?\s*[\"'`*]*\s*([A-Za-z]+|\d+)", re.IGNORECASE
            )
            for m in reversed(list(pat.finditer(text))):
                v = _norm_value(attr, m.group(1))
                if v is not None:
                    out[attr] = v
                    break
        missing = [a for a in ATTRIBUTES if a not in out]
        if missing:
            raise ResponseError(
                f"item {item.id}: no value for {', '.join(missing)} found in reply; accepted: "
                + self.answer_format
                + ".",
                field="response",
            )
        return out

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            return super().parse_text(item, text, mode)
        return self._parse_panel_text(item, text)

    # -- rendering --------------------------------------------------------------------------
    @staticmethod
    def _panel_text(p: Mapping[str, Any]) -> str:
        return " ".join(f"{a}={p[a]}" for a in ATTRIBUTES)

    def render_text(self, item: Item, mode: str) -> str:
        rows = item.stimulus["panels"]
        lines = [
            "A 3 by 3 matrix of panels. Each panel shows one or more copies of a shape; a panel "
            "is written as its attributes:",
            *(f"  {a}: {_levels_text(a)}" for a in ATTRIBUTES),
            "Within every row, each attribute follows a rule (for example: stays the same, steps "
            "up or down, shows three values in turn, or adds up). The last panel of row 3 is "
            "missing.",
            "",
        ]
        for r in range(3):
            for c in range(3):
                p = rows[r][c]
                lines.append(
                    f"row {r + 1}, column {c + 1}: " + ("?" if p is None else self._panel_text(p))
                )
        lines.append("")
        if mode == "select":
            lines.append("Choices:")
            for k, ch in enumerate(item.choices or (), start=1):
                lines.append(f"  {k}: {self._panel_text(ch)}")
            n = len(item.choices or ())
            lines.append(
                f"Which choice completes the matrix? Reply with the choice number only (1-{n})."
            )
        else:
            lines.append(
                "Which panel completes the matrix? Reply with one line in this form: "
                "shape=<shape> size=<size> shade=<shade> count=<count> position=<position>"
            )
        return "\n".join(lines)

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        view: dict[str, Any] = {
            "task": "complete the 3x3 matrix; the panel at row 3, column 3 is missing",
            "attributes": {a: list(LEVELS[a]) for a in ATTRIBUTES},
            "numeric": sorted(_NUMERIC),
            "panels": json.loads(canonical_json(item.stimulus["panels"])),
            "missing": [2, 2],
            "answer_format": self.answer_format,
            # how a screen draws a panel: `count` copies side by side at the `position` height,
            # shape outlines in black, filled with the shade's grey (0 black .. 100 white)
            "drawing": {
                "shade_grey_percent": {k: round(v * 100) for k, v in _SHADE_GREY.items()},
                "shape_corners": {
                    "triangle": 3,
                    "square": 4,
                    "pentagon": 5,
                    "hexagon": 6,
                    "circle": 0,
                },
                "position_from_top": list(LEVELS["position"]),
            },
        }
        if mode == "select":
            view["choices"] = [dict(c) for c in item.choices or ()]
        return view

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        ax = fig.add_axes((0.0, 0.0, 1.0, 1.0))
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_aspect("equal")
        ax.axis("off")
        rows = item.stimulus["panels"]
        pool = [p for row in rows for p in row if p is not None] + list(item.choices or [])
        maxc = max(p["count"] for p in pool)
        if mode == "select":
            side, x0, y0 = 0.19, 0.215, 0.40
        else:
            side, x0, y0 = 0.29, 0.065, 0.065
        for r in range(3):
            for c in range(3):
                x, y = x0 + c * side, y0 + (2 - r) * side
                self._draw_panel(ax, rows[r][c], x, y, side, maxc)
        if mode == "select":
            cs = 0.2
            for k, ch in enumerate(item.choices or ()):
                rr, cc = divmod(k, 4)
                x, y = 0.1 + cc * (cs + 0.005), 0.2 - rr * (cs - 0.01)
                self._draw_panel(ax, ch, x, y, cs * 0.88, maxc)
                ax.text(
                    x + 0.01,
                    y + cs * 0.88 - 0.01,
                    str(k + 1),
                    ha="left",
                    va="top",
                    fontsize=10,
                    color="black",
                    fontweight="bold",
                )

    @staticmethod
    def _draw_panel(
        ax: Any, p: Mapping[str, Any] | None, x: float, y: float, side: float, maxc: int
    ) -> None:
        from matplotlib.patches import Circle, Rectangle, RegularPolygon

        ax.add_patch(Rectangle((x, y), side, side, facecolor="white", edgecolor="black", lw=1.2))
        if p is None:
            ax.text(
                x + side / 2,
                y + side / 2,
                "?",
                ha="center",
                va="center",
                fontsize=int(side * 150),
                color="black",
            )
            return
        n = int(p["count"])
        slot = side * 0.9 / max(maxc, 1)
        base = min(slot * 0.45, side * 0.16)
        r = base * (0.35 + 0.65 * int(p["size"]) / 6)
        margin = base + side * 0.03
        pos = LEVELS["position"].index(p["position"])
        cy = y + side - margin - pos * (side - 2 * margin) / 4
        grey = _SHADE_GREY[p["shade"]]
        width = n * slot
        for i in range(n):
            cx = x + side / 2 - width / 2 + slot * (i + 0.5)
            kw = {"facecolor": (grey, grey, grey), "edgecolor": "black", "lw": 1.0}
            shape = p["shape"]
            patch: Circle | RegularPolygon
            if shape == "circle":
                patch = Circle((cx, cy), r, **kw)
            else:
                nv = {"triangle": 3, "square": 4, "pentagon": 5, "hexagon": 6}[shape]
                orient = math.pi / 4 if nv == 4 else 0.0
                patch = RegularPolygon((cx, cy), numVertices=nv, radius=r, orientation=orient, **kw)
            ax.add_patch(patch)


def _kind(rule: str) -> str:
    if rule.startswith("progression"):
        return "progression"
    if rule in ("sum", "difference"):
        return "arithmetic"
    return rule


register(MatricesFamily())
