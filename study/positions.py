"""Where the answer sits among the choices: balanced placement and isomorph reshuffling.

Families build the choices of a select-mode item; this module decides the *order* they are
offered in, for every family alike, so that no family can leak the answer through its position:

* :func:`balanced_positions` -- a seeded sequence of answer positions in which every position
  occurs equally often (counts differ by at most one), in random order;
* :func:`place_answer` -- the same item with its choices reordered so the answer sits at a given
  position (the other choices keep a seeded random order);
* :func:`variant_positions` -- answer positions for the isomorphs of a list of parents: balanced
  as a whole and, wherever possible, never the parent's position;
* :func:`reshuffle_variant` -- the isomorph with its choices reordered (the one place where
  variants get their own choice order; bank generation and ``vary_bank`` both call it).

Reordering choices changes the item's content and therefore its id; it never changes the answer,
the accepted answers or the stimulus, so the answer still scores correct.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .item import FIELDS, Item

__all__ = [
    "PLACEMENT",
    "balanced_positions",
    "place_answer",
    "reshuffle_variant",
    "variant_positions",
]

#: Name of the placement procedure, recorded in a bank's generation metadata.
PLACEMENT = "balanced-v1"


def balanced_positions(n: int, n_choices: int, rng: np.random.Generator) -> list[int]:
    """``n`` answer positions (1-based) with every position equally often, in random order.

    The first ``n // n_choices * n_choices`` entries hold each position the same number of
    times; the remainder takes distinct positions drawn at random, so counts differ by at most
    one.

    Examples
    --------
    >>> sorted(balanced_positions(6, 3, np.random.default_rng(0)))
    [1, 1, 2, 2, 3, 3]
    """
    full, rest = divmod(n, n_choices)
    pos = [k for k in range(1, n_choices + 1) for _ in range(full)]
    pos += [int(k) + 1 for k in rng.permutation(n_choices)[:rest]]
    return [pos[int(i)] for i in rng.permutation(len(pos))]


def variant_positions(
    parent_positions: Sequence[int], n_choices: int, rng: np.random.Generator
) -> list[int]:
    """Answer positions for one isomorph per parent: balanced, and unlike the parent's.

    The positions are a :func:`balanced_positions` sequence, matched to the parents so that an
    isomorph's answer sits where its parent's does not (a swap repairs each clash; a clash
    that no swap can repair -- e.g. a single parent with two choices -- is left, and the
    choice order around it still changes where there are more than two choices).
    """
    n = len(parent_positions)
    out = balanced_positions(n, n_choices, rng)
    for i in range(n):
        if out[i] != parent_positions[i]:
            continue
        for j in (int(x) for x in rng.permutation(n)):
            if out[j] != parent_positions[i] and out[i] != parent_positions[j]:
                out[i], out[j] = out[j], out[i]
                break
    return out


def place_answer(item: Item, position: int, rng: np.random.Generator) -> Item:
    """``item`` with its choices reordered so that the answer is choice ``position`` (1-based).

    The other choices take a random order from ``rng``. A position beyond the number of
    choices wraps around (for a family that offers fewer choices than a spec asked for). Items
    without choices (or whose answer is not among them) are returned unchanged.
    """
    current = item.answer_choice
    if item.choices is None or current is None:
        return item
    if position < 1:
        raise ValueError(f"answer position {position} is not 1-based")
    position = (position - 1) % len(item.choices) + 1
    others = [c for k, c in enumerate(item.choices, start=1) if k != current]
    others = [others[int(i)] for i in rng.permutation(len(others))]
    choices = [*others[: position - 1], item.choices[current - 1], *others[position - 1 :]]
    return _with_choices(item, choices)


def reshuffle_variant(
    variant: Item, parent: Item, position: int | None, rng: np.random.Generator
) -> Item:
    """The isomorph ``variant`` with a choice order of its own.

    The answer goes to ``position`` (from :func:`variant_positions`), or to a random position
    other than the parent's when ``position`` is ``None``; the other choices are shuffled. When
    the result would still list the choices in the parent's order (possible only with two
    choices and a clash), the variant is returned as it is.
    """
    if variant.choices is None or variant.answer_choice is None:
        return variant
    n = len(variant.choices)
    if position is None:
        avoid = parent.answer_choice
        options = [k for k in range(1, n + 1) if k != avoid] or list(range(1, n + 1))
        position = options[int(rng.integers(len(options)))]
    return place_answer(variant, position, rng)


def _with_choices(item: Item, choices: Sequence[object]) -> Item:
    record = item.to_record()
    fields = {f: record[f] for f in FIELDS if f != "id"}
    fields["choices"] = list(choices)
    return Item.create(prefix=item.id.rsplit("-", 1)[0], **fields)
