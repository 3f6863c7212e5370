"""The ``contrast`` family class: parameters, generation, checks, scoring, reading replies and
rendering as text. Its other parts are mixins: :mod:`~twofold.study.families.contrast.assembly`
(items around a rule), :mod:`~twofold.study.families.contrast.variants`,
:mod:`~twofold.study.families.contrast.errors` (error types) and
:mod:`~twofold.study.families.contrast.scene` (what is drawn)."""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ...exceptions import ResponseError, SpecError
from ...item import Item
from .._base import Family, ParamSpec, Rejected, Score
from .assembly import ContrastAssembly
from .enumeration import rule_vector
from .errors import ContrastErrors
from .evaluation import _obj_dict, panels_from_stimulus
from .generation import (
    _check_length,
    _Ctx,
    _Fail,
    _labels,
    _make_rule,
    _template_ok,
    _validity,
    relevant_attributes,
)
from .notation import (
    _EXAMPLE_RULE,
    ATOM_NAME,
    ATTRIBUTES,
    CARD,
    COL,
    INSIDE,
    MAX_OBJECTS,
    OBJECT_ATTRS,
    ROW,
    RULE_ATTRS,
    SIZE,
    VALUES,
    _canon,
    _example_labels,
    _rule_in,
    format_rule,
    parse_rule,
)
from .scene import ContrastScene
from .variants import ContrastVariants


class ContrastFamily(ContrastVariants, ContrastAssembly, ContrastErrors, ContrastScene, Family):
    """Two sets of panels split by a hidden rule; classify test panels or state the rule."""

    name = "contrast"
    prefix = "con"
    reference_solver = "contrast-ref"
    typical_rt_ms = 18000.0
    version = "2"
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
        ParamSpec("per_set", "int", 5, "panels in each of set A and set B", low=2, high=12),
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
