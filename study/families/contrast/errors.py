"""Error types of the ``contrast`` family: related rules, classification of wrong responses
and sampling of plausible wrong ones."""

from __future__ import annotations

import copy
from functools import lru_cache
from typing import Any

import numpy as np

from ...item import Item
from .._base import Family
from .enumeration import _popcount, grammar, leaf_vectors, rule_vector
from .evaluation import panels_from_stimulus
from .generation import _labels, _masks, relevant_attributes
from .notation import _canon, _negate, format_rule, parse_rule, rule_length


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


class ContrastErrors(Family):
    """Error types of the contrast family: classifying wrong responses and sampling plausible
    ones (a part of :class:`ContrastFamily`)."""

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
