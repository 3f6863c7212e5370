"""``contrast-ref``: Bayesian rule induction over the ``contrast`` family's feature grammar.

The hypothesis space is the family's enumerated rule space (every leaf rule, its negation, the
conjunction of two such literals and the negation of such a conjunction; see
:mod:`twofold.study.families.contrast`). Each rule ``h`` of description length ``|h|`` has prior
weight ``prior ** |h|`` (falling with length). Its likelihood on the training panels is
``(1 - noise) ** agree * noise ** disagree``, where a panel agrees when ``h`` is true of it exactly
when it belongs to set A; with ``noise = 0`` only rules consistent with both sets keep any mass.

The search deepens by length: it finds the shortest length at which a consistent rule exists
(``l_min``) and weighs every rule up to ``l_min + 1``, never beyond the longest length whose whole
space fits in ``budget`` (the most rules enumerated). Test panels are
classified by the posterior predictive (``A`` when the posterior mass of rules true of the panel
is at least one half); in generate mode the answer is the most probable single rule (the MAP rule)
in the grammar's notation, ties broken by the seeded generator. The explanation is the MAP rule in
words. Effort is the number of rules in the space up to the depth reached (unit ``rules``).

When no rule within the budget is consistent (the budget is too small, or the sets are noisy), the
solver falls back to ``noise = max(noise, 0.1)`` so that the best-fitting short rules decide.
Conjunctions under noise are built from every pair of short enough literals when there are at
most 600 of them, else only from literals that miss at most one panel of the set they must cover
(an approximation that keeps the pair step small).

Longer hidden rules leave more consistent rules of nearby length, so the predictive is split more
often; a budget that does not reach the hidden rule's length leaves only inconsistent rules, so at
the default budget rules of length 6 are mostly missed and accuracy falls.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
from twofold.study.exceptions import SolverError
from twofold.study.families.contrast import (
    describe_rule,
    format_rule,
    grammar,
    leaf_vectors,
    panels_from_stimulus,
)

from ._base import Answer, register_solver

__all__ = ["ContrastReference"]

_FALLBACK_NOISE = 0.1
_MAX_LENGTH = 8
_MAX_CANDIDATES = 600


def _popcount(x: np.ndarray) -> np.ndarray:
    return np.bitwise_count(x).astype(np.int64)


class ContrastReference:
    """Bayesian rule induction for ``contrast`` items.

    Parameters
    ----------
    seed : int, default 0
        Seed for breaking ties between equally probable rules.
    budget : int, default 100000
        Most rules the search may enumerate. The search deepens by description length while the
        whole space up to the next length fits in the budget (at least length 1): 310 rules
        reach length 2, 2,295 length 3, 8,935 length 4, 85,435 length 5, 743,250 length 6.
        Default items (rules of length 3) need length 4; the family's longest rules (6) need 7.
    noise : float, default 0.0
        Probability that a training panel is in the wrong set (0 <= noise < 0.5).
    prior : float, default 0.1
        Prior weight factor per unit of description length (0 < prior < 1).
    """

    medium = "structured"

    def __init__(
        self, *, seed: int = 0, budget: int = 100_000, noise: float = 0.0, prior: float = 0.1
    ):
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise SolverError(f"field 'seed': got {seed!r}; accepted: an integer >= 0.")
        if isinstance(budget, bool) or not isinstance(budget, int) or budget < 1:
            raise SolverError(
                f"field 'budget': got {budget!r}; accepted: an integer >= 1 "
                "(the most rules enumerated)."
            )
        if isinstance(noise, bool) or not isinstance(noise, int | float) or not 0 <= noise < 0.5:
            raise SolverError(f"field 'noise': got {noise!r}; accepted: a number in [0, 0.5).")
        if isinstance(prior, bool) or not isinstance(prior, int | float) or not 0 < prior < 1:
            raise SolverError(f"field 'prior': got {prior!r}; accepted: a number in (0, 1).")
        self.seed, self.budget, self.noise, self.prior = seed, budget, float(noise), float(prior)
        g = grammar()
        #: the longest rule the budget lets the search reach
        self.max_length = max(
            [1] + [d for d in range(1, _MAX_LENGTH + 1) if g.count_up_to(d) <= budget]
        )

    # ---------------------------------------------------------------------------------------
    def _read(self, view: Any) -> tuple[list, int, int, int]:
        if not isinstance(view, Mapping):
            raise SolverError(
                f"field 'view': got {type(view).__name__}; accepted: the "
                "structured view of a contrast item (a dict)."
            )
        try:
            panels, n_a, n_b = panels_from_stimulus(view)
        except (KeyError, TypeError, ValueError) as err:
            raise SolverError(
                "field 'view': not a contrast structured view (needs sets.A, "
                f"sets.B and test panels of objects): {err}"
            ) from err
        return panels, n_a, n_b, len(panels) - n_a - n_b

    def _hypotheses(
        self, lits: np.ndarray, lens: np.ndarray, am: int, bm: int, depth: int, noise: float
    ) -> tuple[np.ndarray, ...]:
        """Rules up to ``depth``: vectors, log weights, kind, literals i and j, multiplicity.

        ``kind`` is 0 for a literal, 1 for ``i & j``, 2 for ``~(i & j)``; a conjunction row
        stands for ``multiplicity`` rules with the same truth vector and length.
        """
        train = np.uint64(am | bm)
        amu, bmu = np.uint64(am), np.uint64(bm)
        n_train = bin(am | bm).count("1")
        log_p = math.log(self.prior)

        def loglik(v: np.ndarray) -> np.ndarray:
            miss = _popcount((v ^ amu) & train)
            if noise == 0:
                return np.where(miss == 0, 0.0, -np.inf)
            return miss * math.log(noise) + (n_train - miss) * math.log1p(-noise)

        out_v, out_w, out_k, out_i, out_j, out_m = [], [], [], [], [], []
        keep = lens <= depth
        idx = np.flatnonzero(keep)
        out_v.append(lits[idx])
        out_w.append(lens[idx] * log_p + loglik(lits[idx]))
        out_k.append(np.zeros(len(idx), dtype=np.int64))
        out_i.append(idx)
        out_j.append(idx)
        out_m.append(np.ones(len(idx)))
        allow = 0 if noise == 0 else 1
        for kind, cover, extra in ((1, amu, 1), (2, bmu, 2)):
            if depth < extra + 2:
                continue
            miss = _popcount((lits & cover) ^ cover)
            short = lens <= depth - extra - 1
            if noise > 0 and short.sum() <= _MAX_CANDIDATES:
                cand = np.flatnonzero(short)  # small enough: every pair, no approximation
            else:
                cand = np.flatnonzero((miss <= allow) & short)
            if cand.size == 0:
                continue
            # group literals by (vector, length); the count multiplies the prior weight
            key = np.stack([lits[cand], lens[cand].astype(np.uint64)], axis=1)
            _, first, counts = np.unique(key, axis=0, return_index=True, return_counts=True)
            rep = cand[first]
            if rep.size > _MAX_CANDIDATES:
                order = np.lexsort((lens[rep], miss[rep]))[:_MAX_CANDIDATES]
                rep, counts = rep[order], counts[order]
            v, ln = lits[rep], lens[rep]
            conj = v[:, None] & v[None, :]
            total = ln[:, None] + ln[None, :] + extra
            mult = counts[:, None].astype(float) * counts[None, :]
            same = np.eye(len(rep), dtype=bool)
            mult[same] = counts * (counts - 1) / 2
            ok = np.triu(np.ones_like(same), 0) & (total <= depth) & (mult > 0)
            ii, jj = np.nonzero(ok)
            vv = conj[ii, jj]
            if kind == 2:
                vv = ~vv & np.uint64((1 << 64) - 1)
            w = total[ii, jj] * log_p + np.log(mult[ii, jj]) + loglik(vv)
            good = np.isfinite(w)
            out_v.append(vv[good])
            out_w.append(w[good])
            out_k.append(np.full(int(good.sum()), kind, dtype=np.int64))
            out_i.append(rep[ii[good]])
            out_j.append(rep[jj[good]])
            out_m.append(mult[ii, jj][good])
        return tuple(np.concatenate(x) for x in (out_v, out_w, out_k, out_i, out_j, out_m))

    def solve(self, view: Any, mode: str) -> Answer:
        if mode not in ("select", "generate"):
            raise SolverError(f"field 'mode': got {mode!r}; accepted: select, generate.")
        panels, n_a, n_b, n_test = self._read(view)
        g = grammar()
        am = (1 << n_a) - 1
        bm = ((1 << n_b) - 1) << n_a
        vec = leaf_vectors(panels)
        full = np.uint64((1 << 64) - 1)
        lits = np.concatenate([vec, ~vec & full])
        lens = g.lit_lengths
        noise = self.noise
        hyp = self._hypotheses(lits, lens, am, bm, self.max_length, 0.0)
        consistent = np.isfinite(hyp[1])
        if consistent.any():
            kinds_len = self._lengths(hyp, lens)
            l_min = int(kinds_len[consistent].min())
            depth = min(self.max_length, l_min + 1)
            if noise > 0:
                hyp = self._hypotheses(lits, lens, am, bm, depth, noise)
            else:
                keep = kinds_len <= depth
                hyp = tuple(x[keep] for x in hyp)
        else:
            depth = self.max_length
            noise = max(noise, _FALLBACK_NOISE)
            hyp = self._hypotheses(lits, lens, am, bm, depth, noise)
        v, logw, kind, ii, jj, mult = hyp
        effort = float(g.count_up_to(depth))
        w = np.exp(logw - logw.max())
        total = w.sum()
        off = n_a + n_b
        p_a = [
            float(w[((v >> np.uint64(off + k)) & np.uint64(1)) == 1].sum() / total)
            for k in range(n_test)
        ]
        # MAP: the single most probable rule; a group's weight is shared by its members
        per_rule = logw - np.log(mult)
        best = np.flatnonzero(per_rule >= per_rule.max() - 1e-9)
        rng = np.random.default_rng(self.seed)
        b = int(best[0] if len(best) == 1 else rng.choice(best))
        rule = self._rule(int(kind[b]), int(ii[b]), int(jj[b]))
        text = format_rule(rule)
        post = float(w[b] / total / mult[b])
        explanation = (
            f"most probable rule: {describe_rule(rule)} ({text}); posterior "
            f"{post:.2f}; rules up to length {depth} searched"
        )
        if mode == "select":
            labels = "".join("A" if p >= 0.5 else "B" for p in p_a)
            return Answer(
                labels,
                effort=effort,
                effort_unit="rules",
                explanation=explanation,
                raw={"p_a": [round(p, 4) for p in p_a], "map_rule": text},
            )
        return Answer(
            text,
            effort=effort,
            effort_unit="rules",
            explanation=explanation,
            raw={"p_a": [round(p, 4) for p in p_a], "map_rule": text},
        )

    @staticmethod
    def _lengths(hyp: tuple[np.ndarray, ...], lens: np.ndarray) -> np.ndarray:
        kind, ii, jj = hyp[2], hyp[3], hyp[4]
        return np.where(kind == 0, lens[ii], lens[ii] + lens[jj] + kind)

    @staticmethod
    def _rule(kind: int, i: int, j: int) -> tuple:
        g = grammar()
        if kind == 0:
            return g.literal(i)
        conj = ("and", (g.literal(i), g.literal(j)))
        return conj if kind == 1 else ("not", conj)


@register_solver(
    "contrast-ref",
    "contrast: Bayesian rule induction over the feature grammar (options: seed, budget = most "
    "rules enumerated, noise, prior)",
)
def _make(**options: Any) -> ContrastReference:
    return ContrastReference(**options)
