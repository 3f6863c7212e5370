"""Assembling ``contrast`` items: panels, labels, the validity check and the repairs around a
chosen rule, and the finished item record."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ...item import Item
from .._base import Family, Rejected
from .enumeration import _leaf_truth, _lit_rule, _pack, rule_vector
from .evaluation import _hosts_first, _obj_code
from .generation import (
    _REPAIRS,
    _build_panel,
    _check_length,
    _Ctx,
    _discriminating,
    _labels,
    _near_miss,
    _validity,
)
from .notation import (
    INSIDE,
    SIZE,
    VALUES,
    Rule,
    _canon,
    format_rule,
    rule_length,
)

#: what may hold another object: a large square or dome. The room inside a triangle or a cross
#: (the circle within it), or inside anything of medium size, leaves a nested object 5 to 9
#: units across on screen at 5 panels a set, too small to tell its shape
_HOST_SHAPES = tuple(VALUES["shape"].index(s) for s in ("square", "dome"))
_HOST_SIZE = VALUES["size"].index("large")
_NARROW_REASON = (
    "an object nested in a triangle, a cross or a medium-sized object (too little room to see it)"
)


def _cramped(host: Sequence[int]) -> bool:
    return host[0] not in _HOST_SHAPES or host[SIZE] != _HOST_SIZE


class ContrastAssembly(Family):
    """Assembly of items around a chosen rule (a part of :class:`ContrastFamily`)."""

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
        if any(_cramped(pnl[o[INSIDE]]) for pnl in panels for o in pnl if o[INSIDE] >= 0):
            raise Rejected(_NARROW_REASON)
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
