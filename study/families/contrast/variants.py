"""The variant operators of the ``contrast`` family: swapped sets, redrawn irrelevant
attributes, swapped surface values and mirrored panels."""

from __future__ import annotations

import numpy as np

from ...exceptions import SpecError
from ...item import Item
from .._base import Rejected
from .assembly import ContrastAssembly
from .evaluation import panels_from_stimulus
from .generation import (
    _atoms_of,
    _relations_of,
    relevant_attributes,
)
from .notation import (
    ATOM_INDEX,
    ATOMS,
    ATTRIBUTES,
    CARD,
    COL,
    INSIDE,
    OBJECT_ATTRS,
    ROW,
    SIZE,
    VALUES,
    _canon,
    _map_atoms,
    _mirror_rule,
    _negate,
    parse_rule,
    rule_length,
)


class ContrastVariants(ContrastAssembly):
    """The variant operators of the contrast family (a part of :class:`ContrastFamily`)."""

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
