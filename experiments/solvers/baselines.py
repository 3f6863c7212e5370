"""Context-free baselines: ``random``, ``choices-only`` and ``position-only``.

Both read the structured view and use nothing but its ``choices`` (select mode), so they give the
floor a real solver must beat and show how much the choices alone give away. Where a select
trial asks for one label per test panel (the view has a ``test`` list and the choices are label
strings, as in ``contrast``), both answer one random label per panel.

Generate mode
-------------
Neither baseline answers in generate mode: a family-valid random guess would need the item itself
(the family's ``sample_error`` takes the item, answer included), and a baseline that sees the
answer is no baseline. Both therefore *abstain*: they return ``Answer(answer=None)`` with an
explanation, which the machine runner logs as status ``invalid`` with ``correct = false``. Their
generate-mode accuracy is zero by construction, which is the chance level of an open answer.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from typing import Any

from twofold.study.exceptions import SolverError
from twofold.study.item import canonical_json

from ._base import Answer, ItemSeeded, register_solver

__all__ = ["ChoicesOnlySolver", "PositionOnlySolver", "RandomSolver", "flatten_payload"]

_ABSTAIN = "baseline abstains in generate mode (no answer without the item)"


def _choices(view: Any) -> list[Any]:
    if not isinstance(view, Mapping) or not isinstance(view.get("choices"), list | tuple):
        got = sorted(view) if isinstance(view, Mapping) else type(view).__name__
        raise SolverError(
            f"baseline: field 'choices': got a view without choices ({got}); accepted: a "
            "structured select-mode view holding a 'choices' list."
        )
    return list(view["choices"])


def _panels(view: Mapping[str, Any], choices: list[Any]) -> int | None:
    """Number of test panels when a select view asks for one label per panel, else None.

    Some families (contrast) classify several test panels in one select trial: the choices are
    label strings and the response is one label per panel, in order (e.g. ``"ABBA"``).
    """
    test = view.get("test")
    if isinstance(test, list) and test and all(isinstance(c, str) for c in choices):
        return len(test)
    return None


def _check_seed(seed: Any, where: str) -> int:
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise SolverError(f"{where}: field 'seed': got {seed!r}; accepted: an integer >= 0.")
    return seed


class RandomSolver(ItemSeeded):
    """Pick a choice uniformly at random (select); abstain (generate).

    Parameters
    ----------
    seed : int, default 0
        Session seed; each trial draws from a stream seeded by (seed, item id, mode)
        (:func:`~twofold.experiments.solvers.trial_rng`), so answers do not depend on the order
        or the process in which items are solved.
    """

    medium = "structured"
    #: declared solver version (part of the trial-cache key)
    version = "2"

    def __init__(self, *, seed: int = 0):
        self.seed = _check_seed(seed, "random")

    def solve(self, view: Any, mode: str) -> Answer:
        if mode != "select":
            return Answer(None, effort=0.0, effort_unit="choices", explanation=_ABSTAIN)
        choices = _choices(view)
        n = len(choices)
        panels = _panels(view, choices)
        rng = self._trial_rng(view, mode)
        if panels is not None:
            labels = "".join(choices[int(i)] for i in rng.integers(0, n, panels))
            return Answer(
                labels,
                effort=float(panels),
                effort_unit="choices",
                explanation=f"a random label for each of {panels} panels",
            )
        k = int(rng.integers(1, n + 1))
        return Answer(k, effort=1.0, effort_unit="choices", explanation=f"random pick of {n}")


def flatten_payload(value: Any, prefix: str = "") -> dict[str, str]:
    """Flatten a JSON payload into ``{path: canonical JSON of the leaf}``.

    Objects descend by key, arrays by index; a scalar payload is the single path ``""``.

    Examples
    --------
    >>> flatten_payload({"shape": "ring", "size": [1, 2]})
    {'shape': '"ring"', 'size.0': '1', 'size.1': '2'}
    """
    if isinstance(value, Mapping):
        out: dict[str, str] = {}
        for k in sorted(value):
            out.update(flatten_payload(value[k], f"{prefix}.{k}" if prefix else str(k)))
        return out
    if isinstance(value, list | tuple):
        out = {}
        for i, v in enumerate(value):
            out.update(flatten_payload(v, f"{prefix}.{i}" if prefix else str(i)))
        return out
    return {prefix: canonical_json(value)}


class ChoicesOnlySolver(ItemSeeded):
    """Pick the choice that agrees most with the attribute-wise majority of all choices.

    Context-blind: the stimulus is never looked at. Each choice's JSON payload is flattened into
    attribute paths (:func:`flatten_payload`); for each path the most common value among the
    choices is the majority value; a choice scores one point per path where it holds the majority
    value, and the best-scoring choice is picked (ties broken at random with ``seed``). Distractor
    schemes that build each distractor by changing one attribute of the answer leave the answer as
    the attribute-wise mode, which is what this baseline detects.

    Parameters
    ----------
    seed : int, default 0
        Session seed for breaking ties (a stream per trial, as in :class:`RandomSolver`).
    """

    medium = "structured"
    #: declared solver version (part of the trial-cache key)
    version = "2"

    def __init__(self, *, seed: int = 0):
        self.seed = _check_seed(seed, "choices-only")

    def solve(self, view: Any, mode: str) -> Answer:
        if mode != "select":
            return Answer(None, effort=0.0, effort_unit="attributes", explanation=_ABSTAIN)
        choices = _choices(view)
        panels = _panels(view, choices)
        rng = self._trial_rng(view, mode)
        if panels is not None:  # bare labels carry no attributes: every label ties
            labels = "".join(choices[int(i)] for i in rng.integers(0, len(choices), panels))
            return Answer(
                labels,
                effort=0.0,
                effort_unit="attributes",
                explanation="labels carry no attributes; random label per panel",
            )
        flat = [flatten_payload(c) for c in choices]
        paths = sorted(set().union(*flat))
        majority = {}
        for p in paths:
            counts = Counter(f[p] for f in flat if p in f)
            majority[p] = counts.most_common(1)[0][0]
        scores = [sum(f.get(p) == majority[p] for p in paths) for f in flat]
        best = max(scores)
        tied = [k for k, s in enumerate(scores, start=1) if s == best]
        k = tied[0] if len(tied) == 1 else int(rng.choice(tied))
        return Answer(
            k,
            effort=float(len(paths) * len(flat)),
            effort_unit="attributes",
            explanation=f"choice {k} holds the majority value on {best} of {len(paths)} attributes",
        )


@register_solver("random", "baseline: a random choice in select mode; abstains in generate mode")
def _random(**options: Any) -> RandomSolver:
    return RandomSolver(**options)


@register_solver(
    "choices-only",
    "baseline: the choice nearest the attribute-wise majority of all choices (context-blind)",
)
def _choices_only(**options: Any) -> ChoicesOnlySolver:
    return ChoicesOnlySolver(**options)


class PositionOnlySolver:
    """Always answer one choice position (select); abstain (generate).

    Sees neither the stimulus nor the choices' content: it shows what a respondent gains from
    where answers tend to sit. Given the bank's commonest position per family
    (:func:`twofold.study.audit.commonest_positions`), its accuracy is the share of that
    position, the position-only baseline of the bank audit. Trials that ask for one label per
    test panel (``contrast``) get the first label for every panel.

    Parameters
    ----------
    position : int, default 1
        The 1-based choice to answer (wrapped into range when an item has fewer choices).
    positions : dict, optional
        Per-family positions, e.g. ``{"matrices": 3}``; families not listed use ``position``.
    seed : int, default 0
        Accepted for a uniform solver interface; the answers do not depend on it.
    """

    medium = "structured"
    #: declared solver version (part of the trial-cache key)
    version = "1"

    def __init__(
        self, *, position: int = 1, positions: Mapping[str, int] | None = None, seed: int = 0
    ):
        _check_seed(seed, "position-only")
        self.seed = seed
        self.position = self._check_position(position, "position")
        self.positions = {
            str(fam): self._check_position(k, f"positions.{fam}")
            for fam, k in dict(positions or {}).items()
        }

    @staticmethod
    def _check_position(k: Any, field: str) -> int:
        if isinstance(k, bool) or not isinstance(k, int) or k < 1:
            raise SolverError(
                f"position-only: field '{field}': got {k!r}; accepted: an integer >= 1."
            )
        return k

    def solve(self, view: Any, mode: str) -> Answer:
        if mode != "select":
            return Answer(None, effort=0.0, effort_unit="choices", explanation=_ABSTAIN)
        choices = _choices(view)
        panels = _panels(view, choices)
        if panels is not None:
            return Answer(
                choices[0] * panels,
                effort=0.0,
                effort_unit="choices",
                explanation="position only: the first label for every panel",
            )
        k = self.positions.get(str(view.get("family")), self.position)
        k = (k - 1) % len(choices) + 1
        return Answer(
            k, effort=0.0, effort_unit="choices", explanation=f"position only: always choice {k}"
        )


@register_solver(
    "position-only",
    "baseline: always the same choice position (set position, or positions per family)",
)
def _position_only(**options: Any) -> PositionOnlySolver:
    return PositionOnlySolver(**options)
