"""The ``contrast`` family: two sets of panels split by a hidden rule from a small feature grammar.

Every panel holds 1-6 simple objects on a 3x3 grid of cells. Each object has a shape, a size, a
shade, an edge style, a tilt, a cell (row and column) and may sit inside a larger object. A hidden
rule is true of every panel in set A and false of every panel in set B; the respondent classifies
new test panels (``select``) or states the rule (``generate``).

The rule notation (ours)
------------------------
Values stand for themselves (``dome``, ``large``, ``dark``, ``dashed``, ``tilted``, ``top``,
``left``...); ``attr:value`` is accepted too. A *description* is one value or two values of
different attributes joined by ``+`` (``dome+large``: a large dome).

=======================  ====================================================  ======
form                     meaning                                               length
=======================  ====================================================  ======
``n=3``, ``n>=3``        the panel holds exactly / at least 3 objects          1
``every[D]``             every object fits description D                       1+|D|
``some[D]``, ``no[D]``   at least one / no object fits D                       1+|D|
``#[v]=2``               exactly 2 objects have value v                        2
``above[a,b]``           an object fitting a is above (higher row than) one     1+args
                         fitting b; ``leftof``, ``bigger``, ``inside`` alike;
                         an argument is one value or ``*`` (any object)
``~F``                   F does not hold                                       1+|F|
``F & G``                both hold                                             1+|F|+|G|
=======================  ====================================================  ======

|D| counts values and ``+`` signs (``dome+large`` has length 3), ``*`` counts 0. Parentheses
group. The description length of a rule is the sum of these counts; it orders the hypothesis
space (shorter rules first).

The enumerated rule space (used by the validity check and by the reference solver) holds every
*leaf* (count tests, quantified descriptions, ``#`` tests, relations), every negated leaf, every
conjunction of two such literals and every negated conjunction of two literals. The parser and
evaluator accept any nesting of ``~``, ``&`` and parentheses.

Scoring
-------
``select``: the response is one letter ``A`` or ``B`` per test panel, in order (``"ABBA"`` or a
list). ``generate``: a rule in the notation above; it counts as correct (``"intended"``) when it
is the hidden rule in canonical form, and as correct with label ``"equivalent-rule"`` when it
classifies every training and test panel as the hidden rule does. Free text that does not parse
as a rule (a participant's rule in words) is *not automatically scorable*: :meth:`score` raises
:class:`~twofold.study.exceptions.ResponseError` (field ``response``), so runners log the trial
as ``invalid`` with the verbatim text kept for hand coding, rather than counting it as wrong.

Select mode classifies every test panel, so items carry no whole-item ``choices`` (``None``); their
distractor scheme ``per-panel`` tells the item schema so. The answer is the mapping
``{"rule": <canonical notation>, "labels": <one letter per test panel>}``; :meth:`normalize` also
reads such a mapping for the part belonging to the mode.

Error types
-----------
A wrong label string is compared with the labels given by related rules, in this order (the first
match wins): ``reversed-sets`` (the negated rule), ``over-general`` (a shorter literal true of every
panel the rule admits and of some set-B panel), ``over-specific`` (the rule joined with a literal
true of all set-A panels, when that changes a test label), ``irrelevant-attribute`` (the
best-fitting literals of length <= 3 about attributes the rule does not use, when they misfit at
most a third of the training panels); anything else is ``other``. A wrong rule (generate mode) is
compared by its truth on all panels: its negation, a shorter superset, a subset covering set A, a
rule about unused attributes only, or ``other``.

Validity
--------
A candidate item is rejected (:class:`~twofold.study.families.Rejected`, counted by the bank) when
another enumerated rule of equal or shorter description length separates the sets but classifies
a test panel differently, and by default (``minimal``) also when a strictly shorter rule separates
the sets. Before rejecting, the generator swaps in up to ``4 + 2 * length`` training panels on
which the hidden rule and a competing rule disagree.
"""

from __future__ import annotations

import copy
import random
import re
from collections.abc import Mapping, Sequence
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np

from ..exceptions import ResponseError, SpecError
from ..item import Item
from . import register
from ._base import Family, ParamSpec, Rejected, Score

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = [
    "ATTRIBUTES",
    "VALUES",
    "ContrastFamily",
    "Grammar",
    "describe_rule",
    "evaluate_rule",
    "format_rule",
    "grammar",
    "leaf_vectors",
    "panels_from_stimulus",
    "parse_rule",
    "rule_length",
]

# ------------------------------------------------------------------------------------------------
# Attributes and values
# ------------------------------------------------------------------------------------------------

#: object attributes, in the order used in panel arrays (``inside`` follows as column 7)
ATTRIBUTES: tuple[str, ...] = ("shape", "size", "shade", "edge", "tilt", "row", "col")
#: the values of each attribute; every value name is unique across attributes
VALUES: dict[str, tuple[str, ...]] = {
    "shape": ("square", "triangle", "dome", "cross"),
    "size": ("small", "medium", "large"),
    "shade": ("light", "mid", "dark"),
    "edge": ("solid", "dashed"),
    "tilt": ("upright", "tilted"),
    "row": ("top", "middle", "bottom"),
    "col": ("left", "centre", "right"),
}
OBJECT_ATTRS = ("shape", "size", "shade", "edge", "tilt")  # the ones that can be held constant
RULE_ATTRS = (*OBJECT_ATTRS, "position")  # attribute types a rule can be about (plus count)
SIZE, ROW, COL, INSIDE = 1, 5, 6, 7
CARD = tuple(len(VALUES[a]) for a in ATTRIBUTES)

ATOMS: tuple[tuple[int, int], ...] = tuple(
    (ai, vi) for ai, a in enumerate(ATTRIBUTES) for vi in range(len(VALUES[a]))
)
ATOM_NAME: tuple[str, ...] = tuple(VALUES[ATTRIBUTES[a]][v] for a, v in ATOMS)
ATOM_INDEX: dict[str, int] = {name: k for k, name in enumerate(ATOM_NAME)}
ATOM_ATTR = np.array([a for a, _ in ATOMS], dtype=np.int64)
ATOM_VAL = np.array([v for _, v in ATOMS], dtype=np.int64)
N_ATOMS = len(ATOMS)
_ALIASES = {"center": "centre", "grey": "mid", "gray": "mid"}

QUANTS = ("every", "some", "no")
#: the example rule in prompts and messages: a form no rule template produces (~n=k)
_EXAMPLE_RULE = "some[dark+dome] & ~n=2"


def _example_labels(n: int) -> str:
    """An example answer of another length than ``n``, so it can never be copied as correct."""
    k = 5 if n != 5 else 3
    return f"'Answer: {'ABBAB'[:k]}' for {k} panels"


RELATIONS = ("above", "leftof", "bigger", "inside")
MAX_OBJECTS = 6

# ------------------------------------------------------------------------------------------------
# Rule syntax trees
#   ("n", "=" | ">=", k)            ("q", quant, desc)        ("#", atom, k)
#   ("r", rel, atom | None, atom | None)   ("not", x)          ("and", (x, y, ...))
# desc is a sorted tuple of 1-2 atom indices of different attributes
# ------------------------------------------------------------------------------------------------

Rule = tuple


def rule_length(rule: Rule) -> int:
    """Description length of a rule (see the module docstring for the counts)."""
    kind = rule[0]
    if kind == "n":
        return 1
    if kind == "q":
        return 1 + 2 * len(rule[2]) - 1
    if kind == "#":
        return 2
    if kind == "r":
        return 1 + (rule[2] is not None) + (rule[3] is not None)
    if kind == "not":
        return 1 + rule_length(rule[1])
    return len(rule[1]) - 1 + sum(rule_length(x) for x in rule[1])


def _fmt(rule: Rule, top: bool) -> str:
    kind = rule[0]
    if kind == "n":
        return f"n{rule[1]}{rule[2]}"
    if kind == "q":
        return f"{rule[1]}[{'+'.join(ATOM_NAME[a] for a in rule[2])}]"
    if kind == "#":
        return f"#[{ATOM_NAME[rule[1]]}]={rule[2]}"
    if kind == "r":
        a = "*" if rule[2] is None else ATOM_NAME[rule[2]]
        b = "*" if rule[3] is None else ATOM_NAME[rule[3]]
        return f"{rule[1]}[{a},{b}]"
    if kind == "not":
        inner = rule[1]
        return "~" + (f"({_fmt(inner, True)})" if inner[0] == "and" else _fmt(inner, False))
    text = " & ".join(sorted(_fmt(x, False) for x in rule[1]))
    return text if top else f"({text})"


def format_rule(rule: Rule) -> str:
    """The canonical notation of a rule (conjuncts sorted, values bare)."""
    return _fmt(rule, True)


def _canon(rule: Rule) -> Rule:
    """Flatten nested conjunctions, drop double negation, sort descriptions."""
    kind = rule[0]
    if kind == "q":
        return ("q", rule[1], tuple(sorted(rule[2], key=lambda a: ATOMS[a])))
    if kind == "not":
        inner = _canon(rule[1])
        return inner[1] if inner[0] == "not" else ("not", inner)
    if kind == "and":
        parts: list[Rule] = []
        for x in rule[1]:
            x = _canon(x)
            parts.extend(x[1] if x[0] == "and" else [x])
        if len(parts) == 1:
            return parts[0]
        return ("and", tuple(sorted(parts, key=lambda r: _fmt(r, False))))
    return rule


# -- parser --------------------------------------------------------------------------------------

_TOKEN = re.compile(
    r"\s*(?:(?P<num>\d+)|(?P<op>>=|=|~|&|\+|\(|\)|\[|\]|,|\*|#)|(?P<word>[A-Za-z_][A-Za-z_:.]*))"
)


def _tokens(text: str) -> list[str]:
    out: list[str] = []
    pos = 0
    text = text.strip()
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m or m.end() == pos:
            raise ResponseError(
                f"field 'response': got {text!r}; accepted: a rule in the contrast notation "
                f"(unexpected character {text[pos]!r} at position {pos}).",
                field="response",
            )
        pos = m.end()
        tok = m.group("num") or m.group("op") or m.group("word")
        if tok:
            low = tok.lower()
            if low == "and":
                tok = "&"
            elif low == "not":
                tok = "~"
            out.append(tok)
    return out


class _Parser:
    def __init__(self, text: str):
        self.text = text
        self.toks = _tokens(text)
        self.i = 0

    def error(self, what: str) -> ResponseError:
        return ResponseError(
            f"field 'response': got {self.text!r}; accepted: a rule in the contrast notation, "
            f"e.g. '{_EXAMPLE_RULE}' ({what}).",
            field="response",
        )

    def peek(self) -> str | None:
        return self.toks[self.i] if self.i < len(self.toks) else None

    def take(self, want: str | None = None) -> str:
        tok = self.peek()
        if tok is None or (want is not None and tok != want):
            raise self.error(f"expected {want or 'more'} at token {self.i + 1}, found {tok!r}")
        self.i += 1
        return tok

    def parse(self) -> Rule:
        if not self.toks:
            raise self.error("empty")
        rule = self.expr()
        if self.peek() is not None:
            raise self.error(f"unexpected {self.peek()!r} at token {self.i + 1}")
        return _canon(rule)

    def expr(self) -> Rule:
        parts = [self.term()]
        while self.peek() == "&":
            self.take()
            parts.append(self.term())
        return parts[0] if len(parts) == 1 else ("and", tuple(parts))

    def term(self) -> Rule:
        tok = self.peek()
        if tok == "~":
            self.take()
            return ("not", self.term())
        if tok == "(":
            self.take()
            inner = self.expr()
            self.take(")")
            return inner
        return self.leaf()

    def value(self) -> int:
        tok = self.take()
        name = tok.lower()
        if ":" in name or "." in name:
            attr, _, name = re.split(r"([:.])", name, maxsplit=1)
            if attr not in ATTRIBUTES and attr != "position":
                raise self.error(f"unknown attribute {attr!r}")
        name = _ALIASES.get(name, name)
        if name not in ATOM_INDEX:
            raise self.error(f"unknown value {tok!r}; values: {', '.join(ATOM_NAME)}")
        return ATOM_INDEX[name]

    def desc(self) -> tuple[int, ...]:
        atoms = [self.value()]
        while self.peek() == "+":
            self.take()
            atoms.append(self.value())
        attrs = [ATOMS[a][0] for a in atoms]
        if len(set(attrs)) != len(attrs):
            raise self.error("a description joins values of different attributes")
        return tuple(sorted(atoms, key=lambda a: ATOMS[a]))

    def number(self) -> int:
        tok = self.take()
        if not tok.isdigit():
            raise self.error(f"expected a number, found {tok!r}")
        return int(tok)

    def leaf(self) -> Rule:
        tok = self.take()
        low = tok.lower()
        if low in ("n", "count"):
            op = self.take()
            if op not in ("=", ">="):
                raise self.error(f"expected = or >= after n, found {op!r}")
            return ("n", op, self.number())
        if tok == "#":
            self.take("[")
            atom = self.value()
            self.take("]")
            self.take("=")
            return ("#", atom, self.number())
        if low in ("all", "each"):
            low = "every"
        if low == "none":
            low = "no"
        if low in QUANTS:
            self.take("[")
            d = self.desc()
            self.take("]")
            return ("q", low, d)
        low = {"left": "leftof", "larger": "bigger", "in": "inside"}.get(low, low)
        if low in RELATIONS:
            self.take("[")
            args: list[int | None] = []
            for k in range(2):
                if self.peek() == "*":
                    self.take()
                    args.append(None)
                else:
                    args.append(self.value())
                if k == 0:
                    self.take(",")
            self.take("]")
            return ("r", low, args[0], args[1])
        raise self.error(f"unknown word {tok!r}")


def parse_rule(text: str) -> Rule:
    """Parse a rule written in the contrast notation into its syntax tree.

    Raises
    ------
    ResponseError
        When ``text`` is not a rule in the notation (field ``response``).
    """
    if not isinstance(text, str):
        raise ResponseError(
            f"field 'response': got {text!r}; accepted: a rule in the contrast notation (a str).",
            field="response",
        )
    return _Parser(text).parse()


# -- words ---------------------------------------------------------------------------------------

_NOUN = {"square": "square", "triangle": "triangle", "dome": "dome", "cross": "cross"}
_POS = {"row": "in the {} row", "col": "in the {} column"}
_ADJ = {"solid": "solid-edged", "dashed": "dashed-edged", "mid": "mid-toned"}


def _np(atoms: Sequence[int] | None, *, plural: bool = False) -> str:
    if not atoms:
        return "objects" if plural else "object"
    adjs, noun, loc = [], "object", []
    for a in atoms:
        attr, name = ATTRIBUTES[ATOMS[a][0]], ATOM_NAME[a]
        if attr == "shape":
            noun = _NOUN[name]
        elif attr in ("row", "col"):
            loc.append(_POS[attr].format(name))
        else:
            adjs.append(_ADJ.get(name, name))
    if plural:
        noun = noun + ("es" if noun.endswith(("s", "x")) else "s")
    return " ".join([*adjs, noun, *loc])


def _a(phrase: str) -> str:
    return ("an " if phrase[0] in "aeiou" else "a ") + phrase


def _words(rule: Rule) -> str:
    kind = rule[0]
    if kind == "n":
        return (
            "there are exactly {} objects" if rule[1] == "=" else "there are at least {} objects"
        ).format(rule[2])
    if kind == "q":
        d = rule[2]
        if rule[1] == "every":
            if any(ATOMS[a][0] == 0 for a in d):  # a shape: "every object is a large dome"
                return f"every object is {_a(_np(d))}"
            parts = [
                _POS[ATTRIBUTES[ATOMS[a][0]]].format(ATOM_NAME[a])
                if ATTRIBUTES[ATOMS[a][0]] in _POS
                else _ADJ.get(ATOM_NAME[a], ATOM_NAME[a])
                for a in d
            ]
            return "every object is " + " and ".join(parts)
        if rule[1] == "some":
            return f"there is {_a(_np(d))}"
        return f"there is no {_np(d)}"
    if kind == "#":
        k = rule[2]
        return (
            f"exactly {k} {_np([rule[1]], plural=k != 1)}"
            + (" are" if k != 1 else " is")
            + " present"
        )
    if kind == "r":
        a = _a(_np(None if rule[2] is None else [rule[2]]))
        b = "another object" if rule[3] is None else _a(_np([rule[3]]))
        verb = {
            "above": "is above",
            "leftof": "is left of",
            "bigger": "is larger than",
            "inside": "is inside",
        }[rule[1]]
        return f"{a} {verb} {b}"
    if kind == "not":
        return f"it is not true that {_words(rule[1])}"
    return " and ".join(_words(x) for x in rule[1])


def describe_rule(rule: Rule | str) -> str:
    """The rule in words, e.g. ``every object is large and there is a dark dome``."""
    if isinstance(rule, str):
        rule = parse_rule(rule)
    return _words(rule)


# ------------------------------------------------------------------------------------------------
# Panels: a panel is a list of objects, an object a list of 8 ints
# [shape, size, shade, edge, tilt, row, col, inside (index of the container or -1)]
# ------------------------------------------------------------------------------------------------


_VALUE_POS = [{v: k for k, v in enumerate(VALUES[a])} for a in ATTRIBUTES]


_CODES: dict[tuple[int, ...], str] = {}


def _obj_code(o: Sequence[int]) -> str:
    """Compact record form of an object: its values in attribute order, then ``in<k>``."""
    key = tuple(o)
    code = _CODES.get(key)
    if code is None:
        code = " ".join([VALUES[a][o[i]] for i, a in enumerate(ATTRIBUTES)])
        if o[INSIDE] >= 0:
            code = f"{code} in{o[INSIDE]}"
        _CODES[key] = code
    return code


def _obj_dict(code: str | Mapping[str, Any]) -> dict[str, Any]:
    """An object as a dict (attribute -> value, ``inside`` -> container index or None)."""
    if isinstance(code, Mapping):
        return dict(code)
    toks = code.split()
    rec: dict[str, Any] = dict(zip(ATTRIBUTES, toks[:7], strict=False))
    rec["inside"] = int(toks[7][2:]) if len(toks) > 7 else None
    return rec


def _obj_from_record(rec: str | Mapping[str, Any]) -> list[int]:
    if isinstance(rec, str):
        toks = rec.split()
        try:
            o = [_VALUE_POS[i][t] for i, t in enumerate(toks[:7])]
            if len(o) == 7 and len(toks) <= 8:
                o.append(int(toks[7][2:]) if len(toks) == 8 else -1)
                return o
        except (KeyError, ValueError):
            pass
        raise ResponseError(
            f"field 'object': got {rec!r}; accepted: values in the order "
            + ", ".join(ATTRIBUTES)
            + ", then optionally in<k>.",
            field="object",
        )
    try:
        o = [VALUES[a].index(rec[a]) for a in ATTRIBUTES]
    except (KeyError, ValueError, TypeError):
        raise ResponseError(
            f"field 'object': got {rec!r}; accepted: an object with "
            + ", ".join(f"{a} in {'/'.join(VALUES[a])}" for a in ATTRIBUTES),
            field="object",
        ) from None
    inside = rec.get("inside")
    o.append(-1 if inside is None else int(inside))
    return o


def panels_from_stimulus(stimulus: Mapping[str, Any]) -> tuple[list[list[list[int]]], int, int]:
    """Panels of a stimulus or structured view in the order A..., B..., test...

    Returns the panels (lists of int objects), the panels per set in A, and in B.
    """
    sets = stimulus["sets"]
    panels = [[_obj_from_record(o) for o in p] for p in sets["A"]]
    panels += [[_obj_from_record(o) for o in p] for p in sets["B"]]
    panels += [[_obj_from_record(o) for o in p] for p in stimulus["test"]]
    return panels, len(sets["A"]), len(sets["B"])


def _has(o: Sequence[int], desc: Sequence[int]) -> bool:
    for a in desc:
        at, v = ATOMS[a]
        if o[at] != v:
            return False
    return True


def _rel(rel: str, objs: Sequence[Sequence[int]], i: int, j: int) -> bool:
    oi, oj = objs[i], objs[j]
    if rel == "above":
        return oi[ROW] < oj[ROW]
    if rel == "leftof":
        return oi[COL] < oj[COL]
    if rel == "bigger":
        return oi[SIZE] > oj[SIZE]
    return oi[INSIDE] == j


def _pairs(rule: Rule, objs: Sequence[Sequence[int]]) -> list[tuple[int, int]]:
    _, rel, a, b = rule
    out = []
    for i, oi in enumerate(objs):
        if a is not None and not _has(oi, (a,)):
            continue
        for j, oj in enumerate(objs):
            if i != j and (b is None or _has(oj, (b,))) and _rel(rel, objs, i, j):
                out.append((i, j))
    return out


def _ev(rule: Rule, objs: Sequence[Sequence[int]]) -> bool:
    kind = rule[0]
    if kind == "n":
        return len(objs) == rule[2] if rule[1] == "=" else len(objs) >= rule[2]
    if kind == "q":
        d = rule[2]
        if rule[1] == "every":
            return all(_has(o, d) for o in objs)
        hit = any(_has(o, d) for o in objs)
        return hit if rule[1] == "some" else not hit
    if kind == "#":
        return sum(_has(o, (rule[1],)) for o in objs) == rule[2]
    if kind == "r":
        return _ev_rel(rule, objs)
    if kind == "not":
        return not _ev(rule[1], objs)
    return all(_ev(x, objs) for x in rule[1])


_ORDER_ATTR = {"above": ROW, "leftof": COL, "bigger": SIZE}


def _ev_rel(rule: Rule, objs: Sequence[Sequence[int]]) -> bool:
    """Truth of a relation leaf: some object fitting a stands in the relation to another
    object fitting b. For the strict orders it suffices to compare the extreme values (an
    object never stands in a strict order to itself)."""
    _, rel, a, b = rule
    if not objs:
        return False
    if a is None:
        xs: Sequence[Sequence[int]] = objs
    else:
        aa, av = ATOMS[a]
        xs = [o for o in objs if o[aa] == av]
        if not xs:
            return False
    if b is None:
        ys: Sequence[Sequence[int]] = objs
    else:
        ba, bv = ATOMS[b]
        ys = [o for o in objs if o[ba] == bv]
        if not ys:
            return False
    if rel == "inside":
        n = len(objs)
        for i, o in enumerate(objs):
            c = o[INSIDE]
            if (
                0 <= c < n
                and c != i
                and (a is None or o[aa] == av)
                and (b is None or objs[c][ba] == bv)
            ):
                return True
        return False
    at = _ORDER_ATTR[rel]
    if rel == "bigger":
        return max(o[at] for o in xs) > min(o[at] for o in ys)
    return min(o[at] for o in xs) < max(o[at] for o in ys)


def evaluate_rule(rule: Rule | str, panels: Sequence[Sequence[Sequence[int]]]) -> list[bool]:
    """Truth of ``rule`` (syntax tree or notation) on each panel (lists of int objects)."""
    if isinstance(rule, str):
        rule = parse_rule(rule)
    return [_ev(rule, p) for p in panels]


# ------------------------------------------------------------------------------------------------
# The enumerated grammar: leaves, their lengths and vectorised truth over many panels
# ------------------------------------------------------------------------------------------------


class Grammar:
    """The enumerated leaf rules, built once; see :func:`grammar`."""

    def __init__(self) -> None:
        leaves: list[Rule] = []
        for k in range(1, MAX_OBJECTS + 1):
            leaves.append(("n", "=", k))
        for k in range(2, MAX_OBJECTS + 1):
            leaves.append(("n", ">=", k))
        self.n_count = len(leaves)
        for q in QUANTS:
            for a in range(N_ATOMS):
                leaves.append(("q", q, (a,)))
        for k in (1, 2, 3):
            for a in range(N_ATOMS):
                leaves.append(("#", a, k))
        pairs = [
            (a, b)
            for a in range(N_ATOMS)
            for b in range(a + 1, N_ATOMS)
            if ATOMS[a][0] != ATOMS[b][0]
        ]
        self.pair_a = np.array([p[0] for p in pairs])
        self.pair_b = np.array([p[1] for p in pairs])
        for q in QUANTS:
            for a, b in pairs:
                leaves.append(("q", q, (a, b)))
        for rel in RELATIONS:
            for a in [*range(N_ATOMS), None]:
                for b in [*range(N_ATOMS), None]:
                    leaves.append(("r", rel, a, b))
        self.leaves = leaves
        self.index = {leaf: k for k, leaf in enumerate(leaves)}
        self.lengths = np.array([rule_length(x) for x in leaves], dtype=np.int64)
        # literals: the leaves, then their negations
        self.lit_lengths = np.concatenate([self.lengths, self.lengths + 1])
        self.n_leaves = len(leaves)
        self._upto: dict[int, tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = {}

    def upto(self, length: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Literals of length <= ``length``: indices, their leaves, negation masks, lengths."""
        key = max(length, 0)
        if key not in self._upto:
            idx = np.flatnonzero(self.lit_lengths <= key)
            flip = np.where(idx >= self.n_leaves, np.uint64((1 << 64) - 1), np.uint64(0))
            self._upto[key] = (idx, idx % self.n_leaves, flip, self.lit_lengths[idx])
        return self._upto[key]

    def literal(self, k: int) -> Rule:
        """The literal with index ``k`` (leaves first, then negated leaves)."""
        if k < self.n_leaves:
            return self.leaves[k]
        return ("not", self.leaves[k - self.n_leaves])

    def count_up_to(self, length: int) -> int:
        """How many rules of the enumerated space have description length <= ``length``."""
        hist = np.bincount(self.lit_lengths, minlength=length + 1)[: length + 1]
        n = int(hist.sum())
        # conjunctions of two literals (unordered) and their negations
        for la in range(1, length + 1):
            for lb in range(la, length + 1):
                c = (
                    int(hist[la]) * int(hist[lb])
                    if la != lb
                    else int(hist[la]) * (int(hist[la]) - 1) // 2
                )
                if la + lb + 1 <= length:
                    n += c
                if la + lb + 2 <= length:
                    n += c
        return n


@lru_cache(maxsize=1)
def grammar() -> Grammar:
    """The enumerated grammar (cached)."""
    return Grammar()


_PAD = (-1,) * 8


def _panel_array(panels: Sequence[Sequence[Sequence[int]]], m: int = MAX_OBJECTS) -> np.ndarray:
    """Panels as an int array (panel, object slot, attribute); ``m`` slots, padding rows -1."""
    flat: list[int] = []
    for objs in panels:
        for o in objs:
            flat.extend(o)
        flat.extend(_PAD * (m - len(objs)))
    return np.array(flat, dtype=np.int64).reshape(len(panels), m, 8)


_WEIGHTS = 2.0 ** np.arange(53)


_K1 = np.arange(1, MAX_OBJECTS + 1)
_K2 = np.arange(2, MAX_OBJECTS + 1)
_OBJ = np.arange(MAX_OBJECTS)


def leaf_vectors(panels: Sequence[Sequence[Sequence[int]]]) -> np.ndarray:
    """Truth of every enumerated leaf on every panel, as uint64 bit masks (bit p = panel p).

    One pass over all panels: an object-by-value indicator ``M`` (with a last column marking real
    objects) gives value counts and co-occurrence counts as ``M^T M``, and relation leaves as
    ``M^T R M`` for each relation matrix ``R`` (padding rows of ``M`` are zero).
    """
    if len(panels) > len(_WEIGHTS):
        raise ValueError("at most 53 panels per item")
    return _pack(_leaf_truth(panels))


def _pack(truth: np.ndarray) -> np.ndarray:
    """Bit masks (bit p = row p) of a panels-by-leaves truth table (at most 53 rows)."""
    return (_WEIGHTS[: len(truth)] @ truth).astype(np.uint64)


def _leaf_truth(panels: Sequence[Sequence[Sequence[int]]]) -> np.ndarray:
    """Truth of every enumerated leaf (columns) on every panel (rows), as booleans."""
    g = grammar()
    p = len(panels)
    m = max([1, *map(len, panels)])  # object slots; empty slots would add nothing
    x = _panel_array(panels, m)
    na = N_ATOMS
    maug = np.empty((p, m, na + 1), dtype=np.float32)
    np.equal(x[:, :, ATOM_ATTR], ATOM_VAL, out=maug[:, :, :na], casting="unsafe")
    np.greater_equal(x[:, :, 0], 0, out=maug[:, :, na], casting="unsafe")
    mt = maug.transpose(0, 2, 1)
    c2 = mt @ maug  # co-occurrence counts; the last row holds value counts, the corner n
    n = c2[:, na, na]
    c1 = c2[:, na, :na]
    cp = c2[:, g.pair_a, g.pair_b]
    row, col, size, ins = x[:, :, ROW], x[:, :, COL], x[:, :, SIZE], x[:, :, INSIDE]
    rel = np.empty((p, 4, m, m), dtype=np.float32)
    np.less(row[:, :, None], row[:, None, :], out=rel[:, 0], casting="unsafe")
    np.less(col[:, :, None], col[:, None, :], out=rel[:, 1], casting="unsafe")
    np.greater(size[:, :, None], size[:, None, :], out=rel[:, 2], casting="unsafe")
    np.equal(ins[:, :, None], _OBJ[:m], out=rel[:, 3], casting="unsafe")
    res = mt[:, None] @ (rel @ maug[:, None])  # (P, 4, A+1, A+1); the last index is "*"
    truth = np.empty((p, g.n_leaves), dtype=bool)
    nn = n[:, None]
    k = 0
    for arr in (
        nn == _K1,
        nn >= _K2,
        c1 == nn,
        c1 > 0,
        c1 == 0,
        c1 == 1,
        c1 == 2,
        c1 == 3,
        cp == nn,
        cp > 0,
        cp == 0,
    ):
        truth[:, k : k + arr.shape[1]] = arr
        k += arr.shape[1]
    np.greater(res.reshape(p, -1), 0, out=truth[:, k:])
    return truth


def rule_vector(rule: Rule, panels: Sequence[Sequence[Sequence[int]]]) -> int:
    """Truth of ``rule`` on the panels as an int bit mask."""
    v = 0
    for p, objs in enumerate(panels):
        if _ev(rule, objs):
            v |= 1 << p
    return v


def _popcount(x: np.ndarray) -> np.ndarray:
    return (
        np.bitwise_count(x)
        if hasattr(np, "bitwise_count")
        else np.array([bin(int(v)).count("1") for v in x])
    )


def separating(
    vec: np.ndarray, *, a_mask: int, b_mask: int, max_length: int
) -> dict[str, np.ndarray]:
    """Every enumerated rule up to ``max_length`` that is true on all A and no B panels.

    Parameters
    ----------
    vec : ndarray of uint64
        Leaf truth vectors from :func:`leaf_vectors`.
    a_mask, b_mask : int
        Bits of the set-A and set-B (training) panels.

    Returns
    -------
    dict
        ``single`` (literal indices), ``pair_i``/``pair_j`` (literal indices of conjunctions),
        ``neg_i``/``neg_j`` (negated conjunctions), each with ``*_vec`` truth vectors and
        ``*_len`` lengths. Pairs are unordered (i <= j by vector group representative).
    """
    g = grammar()
    full = np.uint64((1 << 64) - 1)
    am, bm = np.uint64(a_mask), np.uint64(b_mask)
    train = am | bm
    out: dict[str, np.ndarray] = {}
    idx, leaf, flip, lens = g.upto(max_length)
    lits = vec[leaf] ^ flip
    ok = (lits & train) == am
    out["single"], out["single_vec"], out["single_len"] = idx[ok], lits[ok], lens[ok]
    for name, pos, neg, extra in (("pair", am, bm, 1), ("neg", bm, am, 2)):
        empty = np.zeros(0, dtype=np.int64)
        sub, leaf, flip, lens = g.upto(max_length - extra - 1)
        ci = np.zeros(0, dtype=np.int64)
        if sub.size:
            lits = vec[leaf] ^ flip
            cand = ((lits & pos) == pos) & ((lits & neg) != neg)
            ci = np.flatnonzero(cand)
            lits, lens, sub = lits[ci], lens[ci], sub[ci]
        if ci.size == 0:
            out[f"{name}_i"] = out[f"{name}_j"] = empty
            out[f"{name}_vec"] = np.zeros(0, dtype=np.uint64)
            out[f"{name}_len"] = empty
            continue
        # one representative (shortest) per distinct vector keeps the pair step small
        order = np.lexsort((lens, lits))
        v = lits[order]
        first = np.ones(len(v), dtype=bool)
        first[1:] = v[1:] != v[:-1]
        keep = order[first]
        ci, v, ln = sub[keep], lits[keep], lens[keep]
        conj = v[:, None] & v[None, :]
        total = ln[:, None] + ln[None, :] + extra
        good = ((conj & neg) == 0) & (total <= max_length)
        good &= np.triu(np.ones_like(good), 1)
        ii, jj = np.nonzero(good)
        vv = conj[ii, jj]
        if name == "neg":
            vv = ~vv & full
        out[f"{name}_i"], out[f"{name}_j"] = ci[ii], ci[jj]
        out[f"{name}_vec"], out[f"{name}_len"] = vv, total[ii, jj]
    return out


def _lit_rule(k: int) -> Rule:
    return grammar().literal(int(k))


def separating_rules(sep: Mapping[str, np.ndarray], which: np.ndarray | None = None) -> list[Rule]:
    """Syntax trees of the rules in a :func:`separating` result (optionally a boolean subset)."""
    rules: list[Rule] = [_lit_rule(k) for k in sep["single"]]
    rules += [
        _canon(("and", (_lit_rule(i), _lit_rule(j))))
        for i, j in zip(sep["pair_i"], sep["pair_j"], strict=True)
    ]
    rules += [
        _canon(("not", ("and", (_lit_rule(i), _lit_rule(j)))))
        for i, j in zip(sep["neg_i"], sep["neg_j"], strict=True)
    ]
    if which is not None:
        rules = [r for r, w in zip(rules, which, strict=True) if w]
    return rules


def _all_sep(sep: Mapping[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    return (
        np.concatenate([sep["single_vec"], sep["pair_vec"], sep["neg_vec"]]),
        np.concatenate([sep["single_len"], sep["pair_len"], sep["neg_len"]]),
    )


# ------------------------------------------------------------------------------------------------
# Rule templates and panel construction
# ------------------------------------------------------------------------------------------------

_REPAIRS = 4
_FEATURAL_LENGTHS = (2, 3, 4, 5, 6)
_COUNT_LENGTHS = (1, 2, 3, 4, 5, 6)
_RELATIONAL_LENGTHS = (2, 3, 4, 5, 6)


class _Fail(Exception):
    pass


class _FastRng:
    """The few draws panel building needs, from Python's generator seeded by the item's rng.

    numpy's per-call overhead dominates for single draws; this keeps items deterministic.
    """

    def __init__(self, rng: np.random.Generator):
        self.r = random.Random(int(rng.integers(2**63)))

    def integers(self, lo: int, hi: int | None = None) -> int:
        if hi is None:
            lo, hi = 0, lo
        return self.r.randrange(lo, hi)

    def random(self) -> float:
        return self.r.random()

    def permutation(self, n: int) -> list[int]:
        return self.r.sample(range(n), n)

    def choice(self, n: int, k: int, replace: bool = False) -> list[int]:
        return self.r.sample(range(n), k)


class _Ctx:
    """Per-item generation context: the random generator and the allowed values."""

    def __init__(
        self, rng: np.random.Generator, allowed: list[list[int]], lo: int, hi: int, nest: bool
    ):
        self.rng = _FastRng(rng)
        self.rnd = self.rng.r.random
        self._np = rng
        self._pool: list[list[int]] = []
        self._cells: list[list[int]] = []
        self.allowed = allowed
        self.lo, self.hi = lo, hi
        self.nest = nest

    def new_cells(self) -> list[int]:
        """The nine cells in random order (drawn in blocks for speed)."""
        if not self._cells:
            self._cells = self._np.permuted(np.tile(np.arange(9), (64, 1)), axis=1).tolist()
        return self._cells.pop()

    def new_values(self) -> list[int]:
        """Random values of the five object attributes (drawn in blocks for speed)."""
        if not self._pool:
            tab = np.zeros((5, 4), dtype=np.int64)
            sizes = np.array([len(al) for al in self.allowed[:5]])
            for a, al in enumerate(self.allowed[:5]):
                tab[a, : len(al)] = al
            pick = (self._np.random((128, 5)) * sizes).astype(np.int64)
            self._pool = tab[np.arange(5), pick].tolist()
        return self._pool.pop()

    def pick(self, seq: Sequence[Any]) -> Any:
        return seq[int(self.rnd() * len(seq))]


def _attr_atoms(attr: str) -> list[int]:
    if attr == "position":
        return [k for k, (a, _) in enumerate(ATOMS) if ATTRIBUTES[a] in ("row", "col")]
    ai = ATTRIBUTES.index(attr)
    return [k for k, (a, _) in enumerate(ATOMS) if a == ai]


def _rule_attr(atom: int) -> str:
    name = ATTRIBUTES[ATOMS[atom][0]]
    return "position" if name in ("row", "col") else name


def _atoms_of(rule: Rule) -> list[int]:
    kind = rule[0]
    if kind == "q":
        return list(rule[2])
    if kind == "#":
        return [rule[1]]
    if kind == "r":
        return [a for a in rule[2:] if a is not None]
    if kind == "not":
        return _atoms_of(rule[1])
    if kind == "and":
        return [a for x in rule[1] for a in _atoms_of(x)]
    return []


def _relations_of(rule: Rule) -> list[str]:
    if rule[0] == "r":
        return [rule[1]]
    if rule[0] == "not":
        return _relations_of(rule[1])
    if rule[0] == "and":
        return [r for x in rule[1] for r in _relations_of(x)]
    return []


def relevant_attributes(rule: Rule) -> set[str]:
    """Object attributes a rule depends on (``position`` for rows, columns, above, leftof)."""
    out = {_rule_attr(a) for a in _atoms_of(rule)}
    for rel in _relations_of(rule):
        out.add("size" if rel in ("bigger", "inside") else "position")
    return out


def _feasible_rel(rel: str, a: int | None, b: int | None) -> bool:
    def val(atom: int | None, attr: int) -> int | None:
        if atom is None or ATOMS[atom][0] != attr:
            return None
        return ATOMS[atom][1]

    if rel in ("above", "leftof"):
        attr = ROW if rel == "above" else COL
        va, vb = val(a, attr), val(b, attr)
        return (
            (va is None or va < 2)
            and (vb is None or vb > 0)
            and (va is None or vb is None or va < vb)
        )
    va, vb = val(a, SIZE), val(b, SIZE)
    if rel == "bigger":
        return (
            (va is None or va > 0)
            and (vb is None or vb < 2)
            and (va is None or vb is None or va > vb)
        )
    # inside: a inside b, same cell, a smaller than b
    pa, pb = [val(a, ROW), val(a, COL)], [val(b, ROW), val(b, COL)]
    for x, y in zip(pa, pb, strict=True):
        if x is not None and y is not None and x != y:
            return False
    return (
        (va is None or va < 2) and (vb is None or vb > 0) and (va is None or vb is None or va < vb)
    )


def _binary(attr: str) -> bool:
    return attr in ("edge", "tilt")


def _template_ok(kind: str, attr: str, length: int) -> bool:
    if kind == "relational":
        return attr != "count" and length in _RELATIONAL_LENGTHS
    if attr == "count":
        return length in _COUNT_LENGTHS
    if length == 3 and (_binary(attr) or attr == "position"):
        # ~every[v] of a two-valued attribute is some[other value] (length 2); ~every[top]
        # cannot be false with more objects than a row holds
        return False
    return length in _FEATURAL_LENGTHS


def _make_rule(kind: str, attr: str, length: int, ctx: _Ctx) -> Rule:
    """A random rule of exactly ``length`` with its main atom about ``attr``."""
    pick = ctx.pick
    lo, hi = ctx.lo, ctx.hi

    def atom(a: str) -> int:
        return pick(_attr_atoms(a))

    def other(exclude: set[str], *, no_position: bool = False, many: bool = False) -> str:
        opts = [
            a
            for a in RULE_ATTRS
            if a not in exclude
            and not (no_position and a == "position")
            and not (many and _binary(a))
        ]
        return pick(opts)

    def quant(a: int, *, position_ok: bool = True) -> Rule:
        qs = QUANTS if (position_ok and _rule_attr(a) != "position") else ("some", "no")
        return ("q", pick(qs), (a,))

    def q2(x: int, y: int) -> Rule:
        qs = QUANTS if "position" not in (_rule_attr(x), _rule_attr(y)) else ("some", "no")
        return ("q", pick(qs), tuple(sorted((x, y), key=lambda k: ATOMS[k])))

    def at_least() -> Rule:
        if hi <= lo:
            raise _Fail("count cannot vary")
        return ("n", ">=", int(ctx.rng.integers(lo + 1, hi + 1)))

    def exactly() -> Rule:
        if hi <= lo:
            raise _Fail("count cannot vary")
        return ("n", "=", int(ctx.rng.integers(lo, hi + 1)))

    def count_of(a: int) -> Rule:
        return ("#", a, int(ctx.rng.integers(1, min(3, hi) + 1)))

    def rel(x: int | None, y: int | None) -> Rule:
        opts = [r for r in RELATIONS if _feasible_rel(r, x, y)]
        if not opts:
            raise _Fail("no feasible relation")
        return ("r", pick(opts), x, y)

    if kind == "relational":
        x = atom(attr)
        y = atom(other(set()))
        if length == 2:
            return rel(x, None) if ctx.rng.random() < 0.5 else rel(None, x)
        if length == 3:
            return rel(x, y)
        if length == 4:
            return (
                ("not", rel(x, y))
                if ctx.rng.random() < 0.5
                else ("and", (rel(x, None), at_least()))
            )
        z = atom(other({attr}))
        if length == 5:
            if ctx.rng.random() < 0.5:
                return ("and", (rel(x, None), quant(z)))
            return ("and", (rel(x, y), at_least()))
        return ("and", (rel(x, y), quant(z)))
    if attr == "count":
        y = atom(other(set()))
        if length == 1:
            return exactly() if ctx.rng.random() < 0.5 else at_least()
        if length == 2:
            return count_of(y)
        if length == 3:
            return ("not", count_of(y))
        if length == 4:
            return ("and", (quant(y), exactly()))
        z = atom(other({_rule_attr(y)}, many=length == 6, no_position=length == 6))
        if length == 5:
            return ("and", (count_of(y), quant(z)))
        return ("and", (count_of(y), ("not", ("q", "every", (z,)))))
    x = atom(attr)
    if length == 2:
        return quant(x)
    if length == 3:
        return ("not", ("q", "every", (x,)))
    y = atom(other({attr}))
    if length == 4:
        return q2(x, y) if ctx.rng.random() < 0.5 else ("and", (quant(x), at_least()))
    if length == 5:
        return ("and", (quant(x), quant(y)))
    if ctx.rng.random() < 0.5 and not _binary(attr) and attr != "position":
        return ("and", (("not", ("q", "every", (x,))), quant(y)))
    return ("and", (q2(x, y), at_least()))


# -- panel editing -------------------------------------------------------------------------------


def _cells(objs: Sequence[Sequence[int]], skip: Sequence[int] = ()) -> set[int]:
    return {o[ROW] * 3 + o[COL] for k, o in enumerate(objs) if o[INSIDE] < 0 and k not in skip}


def _sync(objs: list[list[int]], ctx: _Ctx) -> None:
    """Keep nested objects in their container's cell; un-nest where the nesting broke."""
    for k, o in enumerate(objs):
        c = o[INSIDE]
        if c < 0:
            continue
        host = objs[c] if 0 <= c < len(objs) else None
        if host is None or c == k or host[INSIDE] >= 0 or host[SIZE] <= o[SIZE]:
            o[INSIDE] = -1
            _place(objs, k, ctx)
        else:
            o[ROW], o[COL] = host[ROW], host[COL]


def _place(
    objs: list[list[int]], k: int, ctx: _Ctx, row: int | None = None, col: int | None = None
) -> None:
    """Move object ``k`` (un-nested) to a free cell, optionally in a given row/column."""
    o = objs[k]
    o[INSIDE] = -1
    used = _cells(objs, skip=(k,))
    free = [
        c
        for c in range(9)
        if c not in used and (row is None or c // 3 == row) and (col is None or c % 3 == col)
    ]
    if not free:
        raise _Fail("no free cell")
    c = ctx.pick(free)
    o[ROW], o[COL] = c // 3, c % 3
    for inner in objs:
        if inner[INSIDE] == k:
            inner[ROW], inner[COL] = o[ROW], o[COL]


def _set_atom(objs: list[list[int]], k: int, atom: int, ctx: _Ctx) -> None:
    attr, val = ATOMS[atom]
    o = objs[k]
    if o[attr] == val:
        return
    if attr == ROW:
        _place(
            objs,
            k,
            ctx,
            row=val,
            col=o[COL] if (val * 3 + o[COL]) not in _cells(objs, skip=(k,)) else None,
        )
    elif attr == COL:
        _place(
            objs,
            k,
            ctx,
            col=val,
            row=o[ROW] if (o[ROW] * 3 + val) not in _cells(objs, skip=(k,)) else None,
        )
    else:
        if val not in ctx.allowed[attr]:
            raise _Fail("value held constant")
        o[attr] = val


def _break_atom(objs: list[list[int]], k: int, atom: int, ctx: _Ctx) -> None:
    attr, val = ATOMS[atom]
    o = objs[k]
    if o[attr] != val:
        return
    if attr in (ROW, COL):
        others = [v for v in range(3) if v != val]
        if attr == ROW:
            _place(objs, k, ctx, row=ctx.pick(others))
        else:
            _place(objs, k, ctx, col=ctx.pick(others))
        return
    opts = [v for v in ctx.allowed[attr] if v != val]
    if not opts:
        raise _Fail("value held constant")
    o[attr] = ctx.pick(opts)


def _new_object(ctx: _Ctx) -> list[int]:
    o = ctx.new_values()
    o += (0, 0, -1)
    return o


def _add(objs: list[list[int]], ctx: _Ctx) -> None:
    if len(objs) >= ctx.hi:
        raise _Fail("too many objects")
    objs.append(_new_object(ctx))
    _place(objs, len(objs) - 1, ctx)


def _remove(objs: list[list[int]], ctx: _Ctx) -> None:
    hosts = {o[INSIDE] for o in objs}
    opts = [k for k in range(len(objs)) if k not in hosts]
    k = ctx.pick(opts)
    del objs[k]
    for o in objs:
        if o[INSIDE] > k:
            o[INSIDE] -= 1


def _set_count(objs: list[list[int]], n: int, ctx: _Ctx) -> None:
    if not 1 <= n <= ctx.hi:
        raise _Fail("count out of range")
    while len(objs) < n:
        _add(objs, ctx)
    while len(objs) > n:
        _remove(objs, ctx)


_CELL_RC = tuple(divmod(c, 3) for c in range(9))


def _random_panel(ctx: _Ctx) -> list[list[int]]:
    rng = ctx.rng
    n = ctx.lo + int(ctx.rnd() * (ctx.hi - ctx.lo + 1))
    objs = []
    for c in ctx.new_cells()[:n]:
        o = _new_object(ctx)
        o[ROW], o[COL] = _CELL_RC[c]
        objs.append(o)
    if ctx.nest and n >= 2 and rng.random() < 0.3:
        i, j = (int(v) for v in rng.choice(n, 2, replace=False))
        if objs[i][SIZE] < objs[j][SIZE]:
            objs[i][INSIDE] = j
            objs[i][ROW], objs[i][COL] = objs[j][ROW], objs[j][COL]
    return objs


def _force_rel(rule: Rule, objs: list[list[int]], want: bool, ctx: _Ctx) -> None:
    _, rel, a, b = rule
    if not want:
        for _ in range(4):
            pairs = _pairs(rule, objs)
            if not pairs:
                return
            for i, j in pairs:
                opts = (
                    (["move"] if rel == "inside" else [])
                    + (["a"] if a is not None else [])
                    + (["b"] if b is not None else [])
                )
                if not opts:
                    raise _Fail("cannot break a relation between any objects")
                how = ctx.pick(opts)
                if how == "move":
                    if objs[i][INSIDE] == j:
                        _place(objs, i, ctx)
                elif how == "a":
                    _break_atom(objs, i, a, ctx)  # type: ignore[arg-type]
                else:
                    _break_atom(objs, j, b, ctx)  # type: ignore[arg-type]
        return
    if _pairs(rule, objs):
        return
    if len(objs) < 2:
        _add(objs, ctx)
    n = len(objs)
    i = int(ctx.rnd() * n)
    j = int(ctx.rnd() * (n - 1))
    j += j >= i
    if a is not None:
        _set_atom(objs, i, a, ctx)
    if b is not None:
        _set_atom(objs, j, b, ctx)

    def fixed(atom: int | None, attr: int) -> int | None:
        return ATOMS[atom][1] if atom is not None and ATOMS[atom][0] == attr else None

    if rel in ("above", "leftof"):
        for k in (i, j):
            if objs[k][INSIDE] >= 0:
                _place(objs, k, ctx)
        used = _cells(objs, skip=(i, j))
        free = [c for c in range(9) if c not in used]
        ra, ca, rb, cb = fixed(a, ROW), fixed(a, COL), fixed(b, ROW), fixed(b, COL)
        cells: list[tuple[int, int]] = []
        for ci in free:
            if (ra is not None and ci // 3 != ra) or (ca is not None and ci % 3 != ca):
                continue
            for cj in free:
                if (
                    cj == ci
                    or (rb is not None and cj // 3 != rb)
                    or (cb is not None and cj % 3 != cb)
                ):
                    continue
                if (ci // 3 < cj // 3) if rel == "above" else (ci % 3 < cj % 3):
                    cells.append((ci, cj))
        if not cells:
            raise _Fail("no cells for the relation")
        ci, cj = ctx.pick(cells)
        for k, c in ((i, ci), (j, cj)):
            objs[k][ROW], objs[k][COL] = c // 3, c % 3
            for inner in objs:
                if inner[INSIDE] == k:
                    inner[ROW], inner[COL] = c // 3, c % 3
        return
    sa, sb = fixed(a, SIZE), fixed(b, SIZE)
    sizes = ctx.allowed[SIZE]
    pairs = [
        (x, y)
        for x in sizes
        for y in sizes
        if (sa is None or x == sa)
        and (sb is None or y == sb)
        and ((x > y) if rel == "bigger" else (x < y))
    ]
    if not pairs:
        raise _Fail("no sizes for the relation")
    objs[i][SIZE], objs[j][SIZE] = ctx.pick(pairs)
    if rel == "bigger":
        _sync(objs, ctx)
        return
    # i inside j: j must be un-nested, i must hold nothing
    if objs[j][INSIDE] >= 0:
        _place(objs, j, ctx)
    for k, o in enumerate(objs):
        if o[INSIDE] == i:
            _place(objs, k, ctx)
    objs[i][INSIDE] = j
    objs[i][ROW], objs[i][COL] = objs[j][ROW], objs[j][COL]
    _sync(objs, ctx)


def _force(rule: Rule, objs: list[list[int]], want: bool, ctx: _Ctx) -> None:
    """Edit a panel in place so that ``rule`` is ``want`` on it (best effort; verified later)."""
    if _ev(rule, objs) == want:
        return
    kind = rule[0]
    rng = ctx.rng
    if kind == "not":
        _force(rule[1], objs, not want, ctx)
    elif kind == "and":
        if want:
            for _ in range(3):
                for x in rule[1]:
                    _force(x, objs, True, ctx)
                if _ev(rule, objs):
                    return
        else:
            _force(ctx.pick(rule[1]), objs, False, ctx)
    elif kind == "n":
        k, n = rule[2], len(objs)
        if rule[1] == "=":
            target = (
                k
                if want
                else ctx.pick([v for v in range(max(1, ctx.lo - 1), ctx.hi + 1) if v != k] or [0])
            )
        elif want:
            target = int(rng.integers(k, max(k, ctx.hi) + 1))
        else:
            target = int(rng.integers(max(1, min(ctx.lo, k - 1)), k)) if k > 1 else 0
        if target != n:
            _set_count(objs, target, ctx)
    elif kind == "q":
        q, d = rule[1], rule[2]
        if (q == "every") == want:  # make every object fit / one object fit
            ks = range(len(objs)) if q == "every" else [ctx.pick(range(len(objs)))]
            for k in ks:
                for a in d:
                    _set_atom(objs, k, a, ctx)
        elif q == "every":  # break one object
            k = ctx.pick(range(len(objs)))
            _break_atom(objs, k, ctx.pick(d), ctx)
        else:  # no object may fit
            for k in range(len(objs)):
                if _has(objs[k], d):
                    _break_atom(objs, k, ctx.pick(d), ctx)
        _sync(objs, ctx)
    elif kind == "#":
        a, k = rule[1], rule[2]
        having = [i for i, o in enumerate(objs) if _has(o, (a,))]
        target = k
        if not want:
            target = k + 1 if (k == 0 or not having or rng.random() < 0.5) else k - 1
        while len(having) > target:
            i = having.pop(int(rng.integers(len(having))))
            _break_atom(objs, i, a, ctx)
        while len(having) < target:
            rest = [i for i, o in enumerate(objs) if not _has(o, (a,))]
            if not rest:
                _add(objs, ctx)
            else:
                _set_atom(objs, ctx.pick(rest), a, ctx)
            having = [i for i, o in enumerate(objs) if _has(o, (a,))]
        _sync(objs, ctx)
    else:
        _force_rel(rule, objs, want, ctx)


def _build_panel(
    rule: Rule, want: bool, ctx: _Ctx, *, base: list[list[int]] | None = None
) -> list[list[int]]:
    for _ in range(6):
        objs = [list(o) for o in base] if base is not None else _random_panel(ctx)
        try:
            _force(rule, objs, want, ctx)
            _sync(objs, ctx)
        except _Fail:
            continue
        if objs and _ev(rule, objs) == want:
            return objs
    raise Rejected("could not build a panel")


def _near_miss(rule: Rule, ctx: _Ctx) -> list[list[int]]:
    """A panel close to one that follows the rule, edited so that it does not."""
    return _build_panel(rule, False, ctx, base=_build_panel(rule, True, ctx))


# ------------------------------------------------------------------------------------------------
# Validity, related rules and labels
# ------------------------------------------------------------------------------------------------


def _masks(n_a: int, n_b: int, n_test: int) -> tuple[int, int, int]:
    a = (1 << n_a) - 1
    b = ((1 << n_b) - 1) << n_a
    t = ((1 << n_test) - 1) << (n_a + n_b)
    return a, b, t


def _labels(vec: int, n_a: int, n_b: int, n_test: int) -> str:
    off = n_a + n_b
    return "".join("A" if vec >> (off + k) & 1 else "B" for k in range(n_test))


def _validity(
    panels: list[list[list[int]]],
    rule: Rule,
    n_a: int,
    n_b: int,
    *,
    minimal: bool,
    length: int | None = None,
    truth: int | None = None,
    vec: np.ndarray | None = None,
) -> tuple[str | None, list[Rule], dict[str, np.ndarray]]:
    """Reason to reject (or None), up to three offending rules and the separating rules.

    Valid means: the hidden rule separates the training sets, and no enumerated rule of equal or
    shorter description length (``length``, default the hidden rule's) separates them but
    classifies a test panel differently (with ``minimal``, no strictly shorter rule separates
    them at all). ``vec``: the panels' leaf vectors when already known.
    """
    n_test = len(panels) - n_a - n_b
    am, bm, tm = _masks(n_a, n_b, n_test)
    length = rule_length(rule) if length is None else length
    if vec is None:
        vec = leaf_vectors(panels)
    sep = separating(vec, a_mask=am, b_mask=bm, max_length=length)
    h = rule_vector(rule, panels) if truth is None else truth  # truth: known by construction
    if (h & (am | bm)) != am:
        return "hidden rule does not separate the sets", [], sep
    vv, ll = _all_sep(sep)
    bad = (vv & np.uint64(tm)) != np.uint64(h & tm)
    reason = None
    if np.any(bad):
        reason = "another rule as short separates the sets but classifies a test panel otherwise"
    if minimal:
        short = ll < length
        if reason is None and np.any(short):
            reason = "a shorter rule separates the sets"
        bad |= short
    if reason is None:
        return None, [], sep
    return reason, _offenders(sep, bad, 3), sep


def _offenders(sep: Mapping[str, np.ndarray], bad: np.ndarray, most: int) -> list[Rule]:
    """Up to ``most`` offending rules with distinct truth vectors."""
    vv, _ = _all_sep(sep)
    idx = np.flatnonzero(bad)
    _, first = np.unique(vv[idx], return_index=True)
    return [_rule_at(sep, int(idx[k])) for k in sorted(first)[:most]]


def _rule_at(sep: Mapping[str, np.ndarray], k: int) -> Rule:
    n1, n2 = len(sep["single"]), len(sep["pair_i"])
    if k < n1:
        return _lit_rule(sep["single"][k])
    if k < n1 + n2:
        return ("and", (_lit_rule(sep["pair_i"][k - n1]), _lit_rule(sep["pair_j"][k - n1])))
    k -= n1 + n2
    return ("not", ("and", (_lit_rule(sep["neg_i"][k]), _lit_rule(sep["neg_j"][k]))))


def _discriminating(rule: Rule, other: Rule, ctx: _Ctx) -> tuple[bool, list[list[int]]] | None:
    """A panel on which ``rule`` and ``other`` disagree, and the truth of ``rule`` on it."""
    for want in (True, False) if ctx.rnd() < 0.5 else (False, True):
        for _ in range(3):
            objs = _random_panel(ctx)
            try:
                _force(other, objs, not want, ctx)
                _force(rule, objs, want, ctx)
            except _Fail:
                continue
            try:
                _sync(objs, ctx)
            except _Fail:
                continue
            if objs and _ev(rule, objs) == want and _ev(other, objs) != want:
                return want, objs
    return None


# ------------------------------------------------------------------------------------------------
# The family
# ------------------------------------------------------------------------------------------------

_FILL = {0: "#f3efe4", 1: "#8d94a6", 2: "#24263a"}  # light, mid, dark (lightness steps)
_SET_COLOUR = {"A": "#2f6db3", "B": "#c2711c", "T": "#4a4a4a"}  # blue / orange / grey frames


class ContrastFamily(Family):
    """Two sets of panels split by a hidden rule; classify test panels or state the rule."""

    name = "contrast"
    prefix = "con"
    version = "1"
    modes = ("select", "generate")
    params = (
        ParamSpec("length", "int", 3, "description length of the hidden rule", low=1, high=6),
        ParamSpec(
            "kind",
            "choice",
            "any",
            "featural or relational rule",
            options=("any", "featural", "relational"),
        ),
        ParamSpec(
            "attribute",
            "choice",
            "any",
            "attribute the rule is about",
            options=("any", *RULE_ATTRS, "count"),
        ),
        ParamSpec("distractors", "int", 2, "irrelevant object attributes that vary", low=0, high=4),
        ParamSpec(
            "objects",
            "int",
            4,
            "most objects per panel (panels hold objects-2..objects)",
            low=1,
            high=6,
        ),
        ParamSpec("per_set", "int", 6, "panels in each of set A and set B", low=2, high=12),
        ParamSpec("n_test", "int", 4, "test panels to classify", low=2, high=10),
        ParamSpec(
            "minimal",
            "bool",
            True,
            "reject items where a shorter rule than the hidden one separates the sets",
        ),
    )
    factors = ("rule_length", "attribute", "relational", "distractors", "objects")
    distractor_schemes = {
        "per-panel": "each test panel is classified A or B; no whole-item choices (null)",
    }
    variant_operators = {
        "swap-sets": "exchange sets A and B; the rule becomes its negation (validity is "
        "checked up to the shorter of the rule and its negation)",
        "change-irrelevant": "redraw the values of the attributes the rule does not use",
        "change-surface": "swap two values of an attribute the rule names (e.g. two shapes)",
        "mirror": "mirror every panel left to right (left and right swap in the rule)",
    }
    error_types = {
        "reversed-sets": "classified every test panel the other way (the negated rule)",
        "over-general": "applied a shorter, more general rule that also admits panels of set B",
        "over-specific": "applied a narrower rule that fits both sets but rejects some panels "
        "the hidden rule admits",
        "irrelevant-attribute": "followed a rule about a salient attribute the hidden rule "
        "does not use",
        "other": "any other wrong response",
    }
    default_choices = 2
    answer_format = (
        "select: one letter A or B per test panel in order (e.g. ABBA); generate: the rule in "
        f"the contrast notation (e.g. {_EXAMPLE_RULE})"
    )

    # -- generation ------------------------------------------------------------------------------
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
        length, kind, attr = int(p["length"]), p["kind"], p["attribute"]
        objects = int(p["objects"])
        kinds = ["featural", "relational"] if kind == "any" else [kind]
        if objects < 2 and "relational" in kinds:
            if kind == "relational":
                raise SpecError(
                    f"field 'objects': got {objects}; accepted: at least 2 for relational rules.",
                    field="objects",
                )
            kinds = ["featural"]
        attrs = [*RULE_ATTRS, "count"] if attr == "any" else [attr]
        combos = [
            (k, a)
            for k in kinds
            for a in attrs
            if _template_ok(k, a, length) and not (a == "count" and objects < 2)
        ]
        if not combos:
            raise SpecError(
                f"field 'length': got {length}; accepted: a length with a rule template for kind "
                f"{kind} and attribute {attr} (featural 2-6, count 1-6, relational 2-6; not 3 "
                "for two-valued edge/tilt; count needs objects >= 2).",
                field="length",
            )
        k_kind, k_attr = combos[int(rng.integers(len(combos)))]
        hi = objects
        lo = max(1, objects - 2)
        # attributes the rule uses vary; of the others, `distractors` vary and the rest are fixed
        tmp = _Ctx(rng, [list(range(c)) for c in CARD], lo, hi, True)
        try:
            rule = _canon(_make_rule(k_kind, k_attr, length, tmp))
        except _Fail as err:
            raise Rejected(str(err)) from None
        used = relevant_attributes(rule)
        free = [a for a in OBJECT_ATTRS if a not in used]
        order = list(rng.permutation(len(free)))
        varied = set(used) | {free[int(i)] for i in order[: int(p["distractors"])]}
        allowed = [
            list(range(c)) if (ATTRIBUTES[ai] in varied or ai >= ROW) else [int(rng.integers(c))]
            for ai, c in enumerate(CARD)
        ]
        ctx = _Ctx(rng, allowed, lo, hi, "size" in varied)
        return self._assemble(
            rule,
            ctx,
            p,
            seed=seed,
            modes=modes,
            k_attr=k_attr,
            relational=k_kind == "relational",
            distractors=len(varied - used - {"position"}),
            minimal=bool(p["minimal"]),
        )

    def _assemble(
        self,
        rule: Rule,
        ctx: _Ctx,
        p: Mapping[str, Any],
        *,
        seed: int,
        modes: Sequence[str],
        k_attr: str,
        relational: bool,
        distractors: int,
        minimal: bool,
    ) -> Item:
        per, n_test = int(p["per_set"]), int(p["n_test"])
        set_a = [_build_panel(rule, True, ctx) for _ in range(per)]
        set_b = [
            (_near_miss(rule, ctx) if k % 2 == 0 else _build_panel(rule, False, ctx))
            for k in range(per)
        ]
        n_a_test = int(ctx.rng.integers(1, n_test))
        tests = [_build_panel(rule, True, ctx) for _ in range(n_a_test)]
        tests += [
            (_near_miss(rule, ctx) if k % 2 == 0 else _build_panel(rule, False, ctx))
            for k in range(n_test - n_a_test)
        ]
        order = ctx.rng.permutation(n_test)
        tests = [tests[int(i)] for i in order]
        # every panel was built and checked to be `want`: the rule's truth vector is known
        truth = (1 << per) - 1
        for k, i in enumerate(order):
            if int(i) < n_a_test:
                truth |= 1 << (2 * per + k)
        # repair: where another rule also separates the sets, swap in a training panel on which
        # the two disagree, then check again (items still failing are rejected)
        checked = None
        kept: set[tuple[bool, int]] = set()  # panels swapped in by earlier repairs stay
        table = _leaf_truth([*set_a, *set_b, *tests])  # rows of swapped panels are redone
        changed: list[int] = []
        for _ in range(_REPAIRS + 2 * rule_length(rule) + 1):
            if changed:
                rows = sorted(set(changed))
                table[rows] = _leaf_truth([(set_a + set_b)[r] for r in rows])
                changed = []
            reason, others, sep = _validity(
                [*set_a, *set_b, *tests],
                rule,
                per,
                per,
                minimal=minimal,
                truth=truth,
                vec=_pack(table),
            )
            if reason is None:
                checked = sep
                break
            if not others:
                raise Rejected(reason)
            repaired = False
            for other in others:
                found = _discriminating(rule, other, ctx)
                if found is None:
                    continue
                want, panel = found
                target = set_a if want else set_b
                free = [k for k in range(per) if (want, k) not in kept] or list(range(per))
                k = ctx.pick(free)
                kept.add((want, k))
                target[k] = panel
                changed.append(k if want else per + k)
                repaired = True
            if not repaired:
                break
        if checked is None:
            raise Rejected(reason or "no valid item")
        factors = {
            "rule_length": rule_length(rule),
            "attribute": k_attr,
            "relational": relational,
            "distractors": distractors,
            "objects": int(p["objects"]),
        }
        return self._finish(
            rule,
            set_a,
            set_b,
            tests,
            params=p,
            factors=factors,
            seed=seed,
            modes=modes,
            minimal=minimal,
            checked=checked,
            truth=truth,
        )

    def _finish(
        self,
        rule: Rule,
        set_a: list,
        set_b: list,
        tests: list,
        *,
        params: Mapping[str, Any],
        factors: Mapping[str, Any],
        seed: int,
        modes: Sequence[str],
        minimal: bool,
        variant_of: str | None = None,
        variant_operator: str | None = None,
        checked: dict[str, np.ndarray] | None = None,
        truth: int | None = None,
    ) -> Item:
        set_a, set_b, tests = ([_hosts_first(p) for p in group] for group in (set_a, set_b, tests))
        panels = [*set_a, *set_b, *tests]
        sep = checked
        if sep is None:
            reason, _, sep = _validity(
                panels,
                rule,
                len(set_a),
                len(set_b),
                minimal=minimal,
                length=_check_length(rule, variant_operator),
            )
            if reason:
                raise Rejected(reason)
        text = format_rule(rule)
        h = rule_vector(rule, panels) if truth is None else truth
        accepted = []
        seen = {text}
        order = np.argsort(sep["single_len"], kind="stable")
        mask = np.uint64((1 << len(panels)) - 1)
        full_equal = (sep["single_vec"][order] & mask) == np.uint64(h)
        for k in sep["single"][order][full_equal]:
            alt = format_rule(_canon(_lit_rule(k)))
            if alt not in seen:
                seen.add(alt)
                accepted.append({"answer": alt, "label": "equivalent-rule"})
            if len(accepted) >= 3:
                break
        labels = _labels(h, len(set_a), len(set_b), len(tests))
        stimulus = {
            "sets": {
                "A": [[_obj_code(o) for o in pnl] for pnl in set_a],
                "B": [[_obj_code(o) for o in pnl] for pnl in set_b],
            },
            "test": [[_obj_code(o) for o in pnl] for pnl in tests],
        }
        select = "select" in modes
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors=dict(factors),
            modes=list(modes),
            stimulus=stimulus,
            answer={"rule": text, "labels": labels},
            accepted=accepted,
            choices=None,
            distractor_scheme="per-panel" if select else None,
            variant_of=variant_of,
            variant_operator=variant_operator,
            seed=seed,
        )

    # -- variants --------------------------------------------------------------------------------
    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        if operator not in self.variant_operators:
            raise SpecError(
                f"field 'operator': got {operator!r}; accepted: one of "
                + ", ".join(self.variant_operators)
                + ".",
                field="operator",
            )
        rule = parse_rule(item.answer["rule"])
        panels, n_a, n_b = panels_from_stimulus(item.stimulus)
        set_a, set_b, tests = panels[:n_a], panels[n_a : n_a + n_b], panels[n_a + n_b :]
        used = relevant_attributes(rule)
        factors = dict(item.factors)
        if operator == "swap-sets":
            rule = _negate(rule)
            set_a, set_b = set_b, set_a
            factors["rule_length"] = rule_length(rule)
        elif operator == "mirror":
            rule = _mirror_rule(rule)
            for pnl in panels:
                for o in pnl:
                    o[COL] = 2 - o[COL]
        elif operator == "change-surface":
            # attributes whose values the rule names, unless a relation reads their order
            rels = set(_relations_of(rule))
            blocked = (
                ({SIZE} if rels & {"bigger", "inside"} else set())
                | ({ROW} if "above" in rels else set())
                | ({COL} if "leftof" in rels else set())
            )
            named = sorted({ATOMS[a][0] for a in _atoms_of(rule)} - blocked)
            if not named:
                raise Rejected("no attribute value in the rule can change")
            ai = named[int(rng.integers(len(named)))]
            in_rule = sorted({ATOMS[a][1] for a in _atoms_of(rule) if ATOMS[a][0] == ai})
            outside = [v for v in range(CARD[ai]) if v not in in_rule]
            v1 = in_rule[int(rng.integers(len(in_rule)))]
            pool = outside or [v for v in range(CARD[ai]) if v != v1]
            v2 = pool[int(rng.integers(len(pool)))]
            perm = list(range(CARD[ai]))
            perm[v1], perm[v2] = v2, v1
            rule = _map_atoms(
                rule,
                lambda a: (
                    ATOM_INDEX[VALUES[ATTRIBUTES[ai]][perm[ATOMS[a][1]]]]
                    if ATOMS[a][0] == ai
                    else a
                ),
            )
            for pnl in panels:
                for o in pnl:
                    o[ai] = perm[o[ai]]
                if any(o[INSIDE] >= 0 and pnl[o[INSIDE]][SIZE] <= o[SIZE] for o in pnl):
                    raise Rejected("new sizes break a nesting")
        else:  # change-irrelevant
            free = [ATTRIBUTES.index(a) for a in OBJECT_ATTRS if a not in used]
            if not free:
                raise Rejected("every object attribute is relevant")
            for ai in free:
                present = {o[ai] for pnl in panels for o in pnl}
                if len(present) <= 1:
                    newv = int(rng.integers(CARD[ai]))
                    for pnl in panels:
                        for o in pnl:
                            o[ai] = newv
                else:
                    for pnl in panels:
                        for o in pnl:
                            o[ai] = int(rng.integers(CARD[ai]))
            # nesting needs the inner object smaller; sizes change only when size is irrelevant
            for pnl in panels:
                for o in pnl:
                    c = o[INSIDE]
                    if c >= 0 and pnl[c][SIZE] <= o[SIZE]:
                        o[SIZE] = max(0, pnl[c][SIZE] - 1)
                        if pnl[c][SIZE] == 0:
                            raise Rejected("nesting broken by new sizes")
        return self._finish(
            _canon(rule),
            set_a,
            set_b,
            tests,
            params=item.params,
            factors=factors,
            seed=item.seed,
            modes=item.modes,
            minimal=False,
            variant_of=item.id,
            variant_operator=operator,
        )

    def check(self, item: Item) -> list[str]:
        problems = []
        try:
            rule = parse_rule(item.answer["rule"])
            panels, n_a, n_b = panels_from_stimulus(item.stimulus)
        except (ResponseError, KeyError, TypeError) as err:
            return [f"unreadable item: {err}"]
        n_test = len(panels) - n_a - n_b
        h = rule_vector(rule, panels)
        if _labels(h, n_a, n_b, n_test) != item.answer["labels"]:
            problems.append("stored labels differ from the rule's classification")
        reason, _, _ = _validity(
            panels, rule, n_a, n_b, minimal=False, length=_check_length(rule, item.variant_operator)
        )
        if reason:
            problems.append(reason)
        for k, pnl in enumerate(panels):
            if not 1 <= len(pnl) <= MAX_OBJECTS:
                problems.append(f"panel {k}: {len(pnl)} objects")
            cells = [o[ROW] * 3 + o[COL] for o in pnl if o[INSIDE] < 0]
            if len(set(cells)) != len(cells):
                problems.append(f"panel {k}: two objects share a cell")
            for o in pnl:
                c = o[INSIDE]
                if c >= 0 and (
                    c >= len(pnl)
                    or pnl[c][INSIDE] >= 0
                    or pnl[c][SIZE] <= o[SIZE]
                    or pnl[c][ROW] != o[ROW]
                    or pnl[c][COL] != o[COL]
                ):
                    problems.append(f"panel {k}: an object is nested in an invalid container")
        return problems

    # -- responses -------------------------------------------------------------------------------
    def _n_test(self, item: Item) -> int:
        return len(item.stimulus["test"])

    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        """Canonical response: the label string (select) or the rule's canonical notation.

        A mapping shaped like the item's answer (``{"labels": ..., "rule": ...}``) is read for
        the part that belongs to ``mode``.
        """
        n = self._n_test(item)
        if isinstance(response, Mapping):
            key = "labels" if mode == "select" else "rule"
            if key not in response:
                raise ResponseError(
                    f"item {item.id}: field 'response': got {response!r}; accepted: a str, or a "
                    f"mapping with '{key}'.",
                    field="response",
                )
            response = response[key]
        if mode == "select":
            if isinstance(response, list | tuple):
                response = "".join(str(r) for r in response)
            if isinstance(response, str):
                labels = re.sub(r"[\s,;/|]+", "", response).upper()
                if len(labels) == n and set(labels) <= {"A", "B"}:
                    return labels
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: {n} letters A "
                f"or B, one per test panel in order (e.g. {'AB' * (n // 2) + 'A' * (n % 2)}).",
                field="response",
            )
        if not isinstance(response, str):
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a rule in the "
                "contrast notation (a str).",
                field="response",
            )
        try:
            return format_rule(parse_rule(response))
        except ResponseError as err:
            raise ResponseError(
                f"item {item.id}: the response is not a rule in the contrast notation, so it is "
                f"not automatically scorable (keep it for hand coding). {err}",
                field="response",
            ) from None

    def score(self, item: Item, response: Any, mode: str) -> Score:
        resp = self.normalize(item, response, mode)
        if mode == "select":
            if resp == item.answer["labels"]:
                return Score(True, None, "intended")
            return Score(False, self.classify_error(item, resp, mode), None)
        if resp == item.answer["rule"]:
            return Score(True, None, "intended")
        panels, h = self._truth(item)
        if rule_vector(parse_rule(resp), panels) == h:
            for acc in item.accepted:
                if acc["answer"] == resp:
                    return Score(True, None, acc["label"])
            return Score(True, None, "equivalent-rule")
        return Score(False, self.classify_error(item, resp, mode), None)

    def _related(self, item: Item) -> dict[str, Any]:
        """Label strings (test panels) of related rules, by error type, plus context.

        Cached per item (scoring a respondent asks for the same item many times); a cached
        entry is used only while the item's id, answer and stimulus are unchanged. The result
        is shared: callers must not modify it.
        """
        return _per_item(_RELATED_CACHE, item, self._compute_related)

    def _truth(self, item: Item) -> tuple[list[list[list[int]]], int]:
        """The item's panels and the hidden rule's truth vector on them (cached per item)."""

        def compute(it: Item) -> tuple[list[list[list[int]]], int]:
            panels, _, _ = panels_from_stimulus(it.stimulus)
            return panels, rule_vector(parse_rule(it.answer["rule"]), panels)

        return _per_item(_TRUTH_CACHE, item, compute)

    def _compute_related(self, item: Item) -> dict[str, Any]:
        panels, n_a, n_b = panels_from_stimulus(item.stimulus)
        rule = parse_rule(item.answer["rule"])
        n_test = len(panels) - n_a - n_b
        am, bm, tm = _masks(n_a, n_b, n_test)
        full = (1 << len(panels)) - 1
        g = grammar()
        h = rule_vector(rule, panels)
        length = rule_length(rule)
        vec = leaf_vectors(panels)
        lits = np.concatenate([vec, ~vec & np.uint64(full)])
        lens = g.lit_lengths
        hu = np.uint64(h)
        # over-general: shorter literals admitting every panel the rule admits, and some B panel
        gen = ((lits & hu) == hu) & (lens < length) & ((lits & np.uint64(bm)) != 0)
        # over-specific: the rule narrowed by a literal true of all A panels
        spec_ok = ((lits & np.uint64(am)) == np.uint64(am)) & (
            (lits & hu & np.uint64(tm)) != (hu & np.uint64(tm))
        )
        spec_vecs = lits[spec_ok] & hu
        # irrelevant: short literals about attributes the rule does not use, best fit to training
        used = relevant_attributes(rule)
        lit_attrs, attr_bit = _literal_attribute_bits()
        used_bits = np.int64(sum(attr_bit.get(a, 0) for a in used))
        irr_idx = np.flatnonzero(
            (lens <= 3) & (lit_attrs != 0) & ((lit_attrs & used_bits) == 0)
        ).tolist()
        labels: dict[str, set[str]] = {}

        def lab(vs: np.ndarray) -> set[str]:
            return {_labels(int(v), n_a, n_b, n_test) for v in np.unique(vs)}

        labels["reversed-sets"] = {_labels(~h & full, n_a, n_b, n_test)}
        labels["over-general"] = lab(lits[gen])
        labels["over-specific"] = lab(spec_vecs)
        if irr_idx:
            iv = lits[np.array(irr_idx)]
            fit = _popcount((iv ^ np.uint64(am)) & np.uint64(am | bm))
            keep = fit == fit.min() if fit.min() <= (n_a + n_b) // 3 else np.zeros_like(fit, bool)
            best = iv[keep]
            irr_best = np.array(irr_idx)[keep]
            labels["irrelevant-attribute"] = lab(best)
        else:
            labels["irrelevant-attribute"] = set()
            irr_best = np.zeros(0, dtype=np.int64)
        return {
            "labels": labels,
            "h": h,
            "panels": panels,
            "used": used,
            "length": length,
            "general": np.flatnonzero(gen),
            "specific": np.flatnonzero(spec_ok),
            "irrelevant": irr_best,
            "rule": rule,
            "masks": (am, bm, tm),
            "sizes": (n_a, n_b, n_test),
            "full": full,
        }

    _PRIORITY = ("reversed-sets", "over-general", "over-specific", "irrelevant-attribute")

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        rel = self._related(item)
        correct = item.answer["labels"]
        if mode == "select":
            for name in self._PRIORITY:
                if response != correct and response in rel["labels"][name]:
                    return name
            return "other"
        rule = parse_rule(response)
        v = rule_vector(rule, rel["panels"])
        h, full = rel["h"], rel["full"]
        if v == h:
            return "other"  # not an error; score() never asks
        if v == (~h & full):
            return "reversed-sets"
        if (v & h) == h and rule_length(rule) < rel["length"]:
            return "over-general"
        if (v & h) == v and (v & rel["masks"][0]) == rel["masks"][0]:
            return "over-specific"
        if relevant_attributes(rule) and not (relevant_attributes(rule) & rel["used"]):
            return "irrelevant-attribute"
        return "other"

    def sample_error(self, item: Item, mode: str, rng: np.random.Generator) -> tuple[Any, str]:
        correct = item.answer["labels"]
        rel = self._related(item)
        if mode == "select":
            opts = sorted({lab for labs in rel["labels"].values() for lab in labs} - {correct})
            n = len(correct)
            if rng.random() < 0.2 or not opts:
                # a random wrong labelling (its type is whatever the classifier says)
                for _ in range(50):
                    resp = "".join("AB"[int(b)] for b in rng.integers(0, 2, n))
                    if resp != correct:
                        break
            else:
                resp = opts[int(rng.integers(len(opts)))]
            return resp, self.classify_error(item, resp, mode)
        rule = rel["rule"]
        g = grammar()
        kinds: dict[str, list[str]] = {"reversed-sets": [format_rule(_negate(rule))]}
        for name, idx in (
            ("over-general", rel["general"]),
            ("irrelevant-attribute", rel["irrelevant"]),
        ):
            if len(idx):
                kinds[name] = [
                    format_rule(_canon(g.literal(int(k))))
                    for k in rng.choice(idx, min(3, len(idx)), replace=False)
                ]
        if len(rel["specific"]):
            kinds["over-specific"] = [
                format_rule(_canon(("and", (rule, g.literal(int(k))))))
                for k in rng.choice(rel["specific"], min(3, len(rel["specific"])), replace=False)
            ]
        for name in list(kinds):  # a rule equivalent on every panel would be correct
            kinds[name] = [
                r for r in kinds[name] if rule_vector(parse_rule(r), rel["panels"]) != rel["h"]
            ]
            if not kinds[name]:
                del kinds[name]
        names = sorted(kinds)
        pool = kinds[names[int(rng.integers(len(names)))]]
        resp = pool[int(rng.integers(len(pool)))]
        return resp, self.classify_error(item, resp, mode)

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        body = re.sub(r"```[a-zA-Z]*", "\n", text).replace("`", " ")
        if mode == "select":
            n = self._n_test(item)
            tagged = dict(
                re.findall(
                    r"\bT\s*(\d+)\s*(?:[:=)\-]|is|->|→)?\s*(?:set\s*)?([AB])\b",
                    body,
                    flags=re.IGNORECASE,
                )
            )
            if all(str(k) in tagged for k in range(1, n + 1)):
                return "".join(tagged[str(k)].upper() for k in range(1, n + 1))
            runs = re.findall(r"(?<![A-Za-z])([AB](?:[ \t,;/|-]*[AB])*)(?![A-Za-z])", body)
            runs = [re.sub(r"[^AB]", "", r) for r in runs]
            hits = [r for r in runs if len(r) == n]
            if not hits:
                low = re.findall(rf"(?<![A-Za-z])([abAB]{{{n}}})(?![A-Za-z])", body)
                hits = [h.upper() for h in low]
            if hits:
                return hits[-1]
            raise ResponseError(
                f"item {item.id}: no run of {n} letters A/B (one per test panel) found in reply.",
                field="response",
            )
        lines = [ln.strip().strip("\"'*") for ln in body.splitlines() if ln.strip()]
        for line in reversed(lines):
            cand = re.sub(r"^(?:final\s+)?(?:rule|answer)\s*[:=]\s*", "", line, flags=re.I)
            cand = cand.strip().strip("\"'*.").strip()
            found = _rule_in(cand)
            if found is not None:
                return found
        raise ResponseError(
            f"item {item.id}: no rule in the contrast notation found in reply.", field="response"
        )

    # -- rendering -------------------------------------------------------------------------------
    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        st = item.stimulus
        view: dict[str, Any] = {
            "item": item.id,
            "family": self.name,
            "mode": mode,
            "sets": {s: [[_obj_dict(o) for o in pnl] for pnl in st["sets"][s]] for s in "AB"},
            "test": [[_obj_dict(o) for o in pnl] for pnl in st["test"]],
            "grid": {"rows": list(VALUES["row"]), "cols": list(VALUES["col"])},
            "attributes": {a: list(VALUES[a]) for a in ATTRIBUTES},
            "labels": ["A", "B"],
            "answer_format": (
                f"{len(st['test'])} letters A or B, one per test panel in order"
                if mode == "select"
                else "a rule in the contrast notation"
            ),
        }
        if mode == "select":
            view["choices"] = ["A", "B"]  # the labels offered for every test panel
        return view

    def _panel_words(self, objs: Sequence[Any]) -> str:
        parts = []
        for k, o in enumerate((_obj_dict(x) for x in objs), start=1):
            where = (
                f"inside object {o['inside'] + 1}"
                if o["inside"] is not None
                else f"cell {o['row']}-{o['col']}"
            )
            parts.append(
                f"({k}) {o['size']} {o['shade']} {o['shape']}, {o['edge']} edge, "
                f"{o['tilt']}, {where}"
            )
        return "; ".join(parts)

    def render_text(self, item: Item, mode: str) -> str:
        st = item.stimulus
        n = len(st["test"])
        lines = [
            "Every panel in set A follows a hidden rule; no panel in set B follows it.",
            "Each panel is a 3x3 grid of cells (rows top/middle/bottom, columns "
            "left/centre/right) holding objects described by size, shade, shape, edge and tilt.",
            "",
        ]
        for s in ("A", "B"):
            for k, pnl in enumerate(st["sets"][s], start=1):
                lines.append(f"{s}{k}: {self._panel_words(pnl)}")
            lines.append("")
        for k, pnl in enumerate(st["test"], start=1):
            lines.append(f"T{k}: {self._panel_words(pnl)}")
        lines.append("")
        if mode == "select":
            lines.append(
                f"Classify each test panel T1..T{n} as A (follows the rule) or B (does not). "
                f"Answer with exactly {n} letters in order on the last line, as in "
                f"{_example_labels(n)}."
            )
        else:
            lines += [
                "State the hidden rule in this notation:",
                "  values: " + ", ".join(ATOM_NAME),
                "  n=3, n>=3 (number of objects); every[D], some[D], no[D] where D is a value "
                "or two values joined by + (e.g. dome+large);",
                "  #[v]=2 (exactly 2 objects with value v); above[a,b], leftof[a,b], bigger[a,b], "
                "inside[a,b] (an object a is above/left of/larger than/inside an object b; "
                "* means any object);",
                "  ~F (not F), F & G (both), parentheses group.",
                f"Answer with the rule alone on the last line, as in 'Rule: {_EXAMPLE_RULE}' "
                "(an example of the form only).",
            ]
        return "\n".join(lines)

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        from matplotlib import patches

        st = item.stimulus
        groups = [("A", st["sets"]["A"]), ("B", st["sets"]["B"]), ("T", st["test"])]
        n_set = max(len(st["sets"]["A"]), len(st["sets"]["B"]))
        cols_set = 2 if n_set <= 8 else 3
        rows_set = -(-n_set // cols_set)
        n_t = len(st["test"])
        cols_t = min(n_t, 2 * cols_set + 1)
        rows_t = -(-n_t // cols_t)
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_axis_off()
        top_h = 0.62 if rows_t == 1 else 0.5
        cell = min(0.45 / cols_set, (top_h - 0.06) / rows_set)
        ax.text(
            0.25,
            0.975,
            "Set A",
            ha="center",
            va="top",
            fontsize=11,
            weight="bold",
            color=_SET_COLOUR["A"],
        )
        ax.text(
            0.75,
            0.975,
            "Set B",
            ha="center",
            va="top",
            fontsize=11,
            weight="bold",
            color=_SET_COLOUR["B"],
        )
        boxes = []
        for gi, (name, pnls) in enumerate(groups[:2]):
            x0 = 0.03 + 0.5 * gi
            for k in range(len(pnls)):
                r, c = divmod(k, cols_set)
                boxes.append((name, k, x0 + c * cell, 0.93 - (r + 1) * cell, cell))
        y_test = 0.93 - rows_set * cell - 0.06
        ax.text(
            0.5,
            y_test + 0.035,
            "Test panels: A or B?",
            ha="center",
            va="center",
            fontsize=11,
            weight="bold",
            color=_SET_COLOUR["T"],
        )
        t_cell = min(0.94 / cols_t, (y_test - 0.02) / rows_t)
        for k in range(n_t):
            r, c = divmod(k, cols_t)
            x0 = 0.5 - cols_t * t_cell / 2 + c * t_cell
            boxes.append(("T", k, x0, y_test - (r + 1) * t_cell, t_cell))
        for name, k, x, y, s in boxes:
            pnls = dict(groups)[name]
            self._draw_panel(ax, patches, pnls[k], x, y, s, f"{name}{k + 1}", _SET_COLOUR[name])

    def _draw_panel(
        self,
        ax: Any,
        patches: Any,
        objs: Sequence[Mapping[str, Any]],
        x: float,
        y: float,
        s: float,
        label: str,
        colour: str,
    ) -> None:
        pad = s * 0.06
        w = s - 2 * pad
        ax.add_patch(
            patches.Rectangle(
                (x + pad, y + pad),
                w,
                w,
                fill=False,
                lw=1.4,
                edgecolor=colour,
                linestyle="-" if label[0] != "B" else (0, (4, 1.5)),
            )
        )
        ax.text(
            x + pad + w * 0.03,
            y + pad + w * 0.97,
            label,
            fontsize=6,
            va="top",
            ha="left",
            color=colour,
        )
        c = w / 3
        scale = {"small": 0.2, "medium": 0.3, "large": 0.42}
        dicts = [_obj_dict(x) for x in objs]
        # containers first, so that nested objects are drawn on top of them
        for o in sorted(dicts, key=lambda d: d["inside"] is not None):
            ci, ri = VALUES["col"].index(o["col"]), VALUES["row"].index(o["row"])
            cx = x + pad + (ci + 0.5) * c
            cy = y + pad + (2 - ri + 0.5) * c
            rad = scale[o["size"]] * c
            if o["inside"] is not None:
                host = dicts[o["inside"]]
                rad = min(rad, scale[host["size"]] * c * 0.45)
            self._shape(ax, patches, o, cx, cy, rad)

    def _shape(
        self, ax: Any, patches: Any, o: Mapping[str, Any], cx: float, cy: float, r: float
    ) -> None:
        import math

        ang = math.radians(45 if o["tilt"] == "tilted" else 0)
        shape = o["shape"]
        pts: list[tuple[float, float]]
        if shape == "square":
            pts = [(-0.8, -0.8), (0.8, -0.8), (0.8, 0.8), (-0.8, 0.8)]
        elif shape == "triangle":
            pts = [(-1, -0.8), (1, -0.8), (0, 1)]
        elif shape == "cross":
            t = 0.35
            pts = [
                (-t, 1),
                (t, 1),
                (t, t),
                (1, t),
                (1, -t),
                (t, -t),
                (t, -1),
                (-t, -1),
                (-t, -t),
                (-1, -t),
                (-1, t),
                (-t, t),
            ]
        else:  # dome: a half disc on a flat base
            pts = [
                (math.cos(math.pi * k / 16), math.sin(math.pi * k / 16) * 1.0 - 0.4)
                for k in range(17)
            ]
        rot = [
            (px * math.cos(ang) - py * math.sin(ang), px * math.sin(ang) + py * math.cos(ang))
            for px, py in pts
        ]
        xy = [(cx + px * r, cy + py * r) for px, py in rot]
        fill = _FILL[VALUES["shade"].index(o["shade"])]
        if o["edge"] == "dashed":
            # a dashed outline set slightly outside the shape reads on light and dark fills alike
            ax.add_patch(patches.Polygon(xy, closed=True, facecolor=fill, edgecolor="none"))
            halo = [(cx + px * r * 1.22, cy + py * r * 1.22) for px, py in rot]
            ax.add_patch(
                patches.Polygon(
                    halo,
                    closed=True,
                    fill=False,
                    edgecolor="#111111",
                    lw=1.0,
                    linestyle=(0, (2.5, 1.5)),
                )
            )
        else:
            ax.add_patch(
                patches.Polygon(xy, closed=True, facecolor=fill, edgecolor="#111111", lw=1.1)
            )


_RULE_START = re.compile(
    r"(?:~\s*|\(\s*|\bnot\s+)*(?:\b(?:every|some|no|all|none|n|count|above|leftof|bigger|"
    r"inside)\s*(?:\[|>=|=)|#\s*\[)",
    re.I,
)


def _rule_in(text: str) -> str | None:
    """The last, longest rule in the notation inside ``text`` (canonical), or None."""
    try:
        return format_rule(parse_rule(text))
    except ResponseError:
        pass
    spans: list[tuple[int, int, str]] = []
    for m in _RULE_START.finditer(text):
        rest = text[m.start() :]
        for e in reversed([x.end() for x in re.finditer(r"[\])\d]", rest)]):
            try:
                spans.append((m.start(), m.start() + e, format_rule(parse_rule(rest[:e]))))
                break
            except ResponseError:
                continue
    # keep maximal spans (not inside another), then take the last one
    outer = [
        sp for sp in spans if not any(o[0] <= sp[0] and sp[1] <= o[1] and o != sp for o in spans)
    ]
    return outer[-1][2] if outer else None


def _hosts_first(objs: list[list[int]]) -> list[list[int]]:
    """The panel with un-nested objects listed before nested ones (so drawers meet every
    container before what it holds); container indices are renumbered."""
    if all(o[INSIDE] < 0 for o in objs):
        return objs
    order = [k for k, o in enumerate(objs) if o[INSIDE] < 0]
    order += [k for k, o in enumerate(objs) if o[INSIDE] >= 0]
    new = {old: k for k, old in enumerate(order)}
    out = []
    for k in order:
        o = list(objs[k])
        if o[INSIDE] >= 0:
            o[INSIDE] = new[o[INSIDE]]
        out.append(o)
    return out


def _check_length(rule: Rule, operator: str | None) -> int:
    """Length up to which validity is checked: the rule's, or for swapped sets the shorter of
    the rule and its negation (which set is called A is arbitrary; the negation sign is free)."""
    if operator == "swap-sets":
        return min(rule_length(rule), rule_length(_negate(rule)))
    return rule_length(rule)


@lru_cache(maxsize=1)
def _literal_attribute_bits() -> tuple[np.ndarray, dict[str, int]]:
    """Per literal of :func:`grammar`, the attributes it uses as a bit set, and the bit of each
    attribute name (a literal and its negation use the same attributes)."""
    g = grammar()
    per_leaf = [relevant_attributes(leaf) for leaf in g.leaves]
    names = sorted(set().union(*per_leaf))
    bit = {a: 1 << k for k, a in enumerate(names)}
    leaf_bits = np.array([sum(bit[a] for a in attrs) for attrs in per_leaf], dtype=np.int64)
    return np.concatenate([leaf_bits, leaf_bits]), bit


# per-item results of recently scored items (see ContrastFamily._related and _truth)
_RELATED_CACHE: dict[str, tuple[Any, Any, Any]] = {}
_TRUTH_CACHE: dict[str, tuple[Any, Any, Any]] = {}
_CACHE_SIZE = 512


def _per_item(store: dict[str, tuple[Any, Any, Any]], item: Item, compute: Any) -> Any:
    """``compute(item)``, kept in ``store`` under the item id while the item's answer and
    stimulus are unchanged (the oldest entries are dropped first). The result is shared:
    callers must not modify it."""
    key = item.id
    hit = store.get(key)
    if hit is not None and hit[0] == item.answer and hit[1] == item.stimulus:
        return hit[2]
    value = compute(item)
    store.pop(key, None)  # (re)inserted last
    store[key] = (copy.deepcopy(item.answer), copy.deepcopy(item.stimulus), value)
    while len(store) > _CACHE_SIZE:
        store.pop(next(iter(store)), None)
    return value


def _negate(rule: Rule) -> Rule:
    """The negation, written simply where the grammar allows (~some[D] is no[D])."""
    if rule[0] == "not":
        return rule[1]
    if rule[0] == "q" and rule[1] in ("some", "no"):
        return ("q", "no" if rule[1] == "some" else "some", rule[2])
    return ("not", rule)


def _map_atoms(rule: Rule, f: Any) -> Rule:
    kind = rule[0]
    if kind == "q":
        return ("q", rule[1], tuple(sorted((f(a) for a in rule[2]), key=lambda k: ATOMS[k])))
    if kind == "#":
        return ("#", f(rule[1]), rule[2])
    if kind == "r":
        return (
            "r",
            rule[1],
            None if rule[2] is None else f(rule[2]),
            None if rule[3] is None else f(rule[3]),
        )
    if kind == "not":
        return ("not", _map_atoms(rule[1], f))
    if kind == "and":
        return ("and", tuple(_map_atoms(x, f) for x in rule[1]))
    return rule


def _mirror_rule(rule: Rule) -> Rule:
    left, right = ATOM_INDEX["left"], ATOM_INDEX["right"]
    swap = {left: right, right: left}
    rule = _map_atoms(rule, lambda a: swap.get(a, a))

    def flip(r: Rule) -> Rule:
        if r[0] == "r" and r[1] == "leftof":
            return ("r", "leftof", r[3], r[2])
        if r[0] == "not":
            return ("not", flip(r[1]))
        if r[0] == "and":
            return ("and", tuple(flip(x) for x in r[1]))
        return r

    return flip(rule)


register(ContrastFamily())
