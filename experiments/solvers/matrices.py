"""``matrices-ref``: the reference solver of the ``matrices`` family.

For each attribute (in an order drawn from ``seed``) the solver tries the family's row rules one
by one, simplest first (:data:`twofold.study.families.matrices.HYPOTHESES`), on the eight visible
panels, and keeps the first rule that fits. Every rule tried costs one unit of effort; ``budget``
caps the rules it may try on one item. When the budget runs out, the attributes not yet solved are
guessed: in generate mode the value of the panel left of the gap is copied; in select mode they
are ignored and ties between the choices are broken at random. An attribute that fits no rule is
treated as free (any value). More rule-governed attributes, attributes that vary under no rule and
harder rules (tried later) all cost more effort, so accuracy at a fixed budget falls with them.

The attributes are read from the view, so items of every family version are solved (version 1
items have five attributes, version 2 items six); rules are named as in ``HYPOTHESES``.
"""

from __future__ import annotations

from typing import Any

from twofold.study.exceptions import InputError
from twofold.study.families.matrices import HYPOTHESES, rule_fits

from ._base import Answer, ItemSeeded, register_solver

__all__ = ["MatricesReference"]


class MatricesReference(ItemSeeded):
    """Rule-by-rule inference on the structured view (see the module docstring).

    Parameters
    ----------
    seed : int, default 0
        Session seed: the order in which attributes are examined and the random tie breaks are
        drawn from a stream seeded by (seed, item id, mode), so an item's answer does not depend
        on which items were solved before it or in which process.
    budget : int, default 24
        Most rule hypotheses tried on one item (over all attributes).
    """

    medium = "structured"
    #: declared solver version (part of the trial-cache key)
    version = "3"

    def __init__(self, *, seed: int = 0, budget: int = 24):
        if isinstance(budget, bool) or not isinstance(budget, int) or budget < 0:
            raise InputError(
                f"field 'budget': got {budget!r}; accepted: an integer >= 0 (rule hypotheses "
                "tried per item).",
                field="budget",
            )
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise InputError(
                f"field 'seed': got {seed!r}; accepted: an integer >= 0.", field="seed"
            )
        self.seed = seed
        self.budget = budget

    def solve(self, view: dict[str, Any], mode: str) -> Answer:
        """Infer each attribute's row rule and predict (or pick) the missing panel."""
        levels = view["attributes"]
        numeric = set(view.get("numeric", ()))
        panels = view["panels"]
        visible = [panels[r][c] for r in range(3) for c in range(3) if (r, c) != (2, 2)]
        rng = self._trial_rng(view, mode)
        attributes = list(levels)
        order = [attributes[int(j)] for j in rng.permutation(len(attributes))]
        effort = 0
        predicted: dict[str, Any] = {}
        notes = []
        for attr in order:
            lv = list(levels[attr])
            cells = [lv.index(p[attr]) for p in visible]
            found = None
            for rule in HYPOTHESES:
                if effort >= self.budget:
                    break
                effort += 1
                pred = rule_fits(rule, cells, len(lv), numeric=attr in numeric)
                if pred is not None:
                    found = rule
                    predicted[attr] = lv[pred]
                    break
            else:
                notes.append(f"{attr}: no rule fits (free)")
                continue
            if found is not None:
                notes.append(f"{attr}: {found} -> {predicted[attr]}")
            else:
                notes.append(f"{attr}: not solved (budget spent)")
        expl = "; ".join(notes) + f". Tried {effort} rule hypotheses."
        if mode == "select":
            choices = view["choices"]
            agree = [sum(ch[a] == v for a, v in predicted.items()) for ch in choices]
            best = max(agree)
            tied = [k for k, s in enumerate(agree) if s == best]
            pick = tied[int(rng.integers(len(tied)))] + 1
            return Answer(pick, effort=float(effort), effort_unit="rules", explanation=expl)
        guess = dict(visible[-1])
        guess.update(predicted)
        return Answer(guess, effort=float(effort), effort_unit="rules", explanation=expl)


@register_solver("matrices-ref", "matrices: row-rule inference per attribute; budget = rules tried")
def _make(*, seed: int = 0, budget: int = 24) -> MatricesReference:
    return MatricesReference(seed=seed, budget=budget)
