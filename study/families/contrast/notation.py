"""Attributes, values and the rule notation of the ``contrast`` family: syntax trees,
formatting, parsing, plain-words descriptions and rule algebra (negation, mirroring)."""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Any

import numpy as np

from ...exceptions import ResponseError

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
