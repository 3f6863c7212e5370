"""Make isomorphs of a whole bank with one variant operator.

Every isomorph gets a choice order of its own (:func:`~twofold.study.positions.reshuffle_variant`):
the answer positions of a family's new isomorphs are balanced and differ from their parents'.
"""

from __future__ import annotations

import os
from typing import Any

from .bank import Bank, load_bank
from .checks import check_choice
from .exceptions import SpecError
from .families import Rejected, get_family, known_families
from .generate import item_rng
from .item import Item
from .positions import reshuffle_variant, variant_positions

__all__ = ["vary_bank"]


def vary_bank(
    bank: Bank | str | os.PathLike[str], operator: str, *, family: str | None = None, seed: int = 0
) -> tuple[Bank, dict[str, Any]]:
    """A new bank: every item of ``bank`` plus one isomorph made by ``operator`` per parent.

    Only parents (items that are not themselves variants) of families that have ``operator``
    are varied; ``family`` restricts to one family.

    Returns
    -------
    (Bank, dict)
        The new bank (not yet written) and counts ``made`` and ``skipped``.
    """
    src = bank if isinstance(bank, Bank) else load_bank(bank)
    if family is not None:
        check_choice("--family", family, known_families(), error=SpecError)
    fams = [f for f in src.families() if family in (None, f)]
    having = [f for f in fams if operator in get_family(f).variant_operators]
    if not having:
        ops = sorted({op for f in fams for op in get_family(f).variant_operators})
        check_choice("--operator", operator, ops, error=SpecError)
    items = list(src.items)
    seen = {it.id for it in items}
    parents = [it for it in src.items if it.family in having and it.variant_of is None]
    targets = _targets(parents, operator, seed)
    made = skipped = 0
    for it in parents:
        _, rng = item_rng(seed, it.id, operator)
        try:
            var = get_family(it.family).vary(it, operator, rng)
        except Rejected:
            skipped += 1
            continue
        var = reshuffle_variant(var, it, targets.get(it.id), rng)
        if var.id in seen:
            skipped += 1
            continue
        seen.add(var.id)
        items.append(var)
        made += 1
    meta = dict(src.meta)
    gen = dict(meta.get("generation") or {})
    gen.setdefault("varied", []).append(
        {"operator": operator, "family": family, "seed": seed, "from_bank": src.hash, "made": made}
    )
    new = Bank.from_items(items, spec=meta.get("spec"), seed=meta.get("seed"), generation=gen)
    return new, {"made": made, "skipped": skipped}


def _targets(parents: list[Item], operator: str, seed: int) -> dict[str, int]:
    """Balanced answer positions for the isomorphs, per family and number of choices."""
    groups: dict[tuple[str, int], list[Item]] = {}
    for it in parents:
        if it.choices is not None and it.answer_choice is not None:
            groups.setdefault((it.family, len(it.choices)), []).append(it)
    out: dict[str, int] = {}
    for (fam, n_choices), group in sorted(groups.items()):
        _, rng = item_rng(seed, fam, operator, "answer-positions")
        pos = variant_positions([int(it.answer_choice or 1) for it in group], n_choices, rng)
        out.update((it.id, p) for it, p in zip(group, pos, strict=True))
    return out
