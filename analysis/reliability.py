"""How reliable is the human difficulty profile? Split-half correlations (the ceiling).

Linear in trials: one respondent x item table of error counts per family, then each random split
sums rows of that table.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
from twofold.study.checks import check_int, check_number
from twofold.study.exceptions import DegenerateWarning

from ._ranks import spearman_rows
from .data import check_columns, logit, scored

__all__ = ["RELIABILITY_COLUMNS", "difficulty_reliability"]

#: columns of :func:`difficulty_reliability`
RELIABILITY_COLUMNS = (
    "family",
    "n_items",
    "n_respondents",
    "n_splits",
    "split_half",
    "spearman_brown",
    "q_low",
    "q_high",
    "conf_level",
)


def difficulty_reliability(
    trials: pd.DataFrame,
    *,
    n_splits: int = 200,
    conf_level: float = 0.95,
    by_family: bool = True,
    seed: int = 0,
) -> pd.DataFrame:
    """How reliable is the human difficulty profile itself? The ceiling for machine agreement.

    People are split at random into two halves; each half's item error rates (logit, with 0.5
    added to the counts) are rank-correlated over the items both halves answered. Repeated over
    ``n_splits`` splits, the mean correlation is stepped up to the full sample with the
    Spearman–Brown formula ``2r / (1 + r)``. A machine whose difficulty-profile correlation
    (:func:`difficulty_agreement`) reaches this value agrees with people as well as people agree
    with each other.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; human scored trials are used.
    n_splits : int, default 200
    conf_level : float, default 0.95
        Coverage of the ``q_low``/``q_high`` quantiles of the split-half correlations.
    by_family : bool, default True
        Also one row per family (``family = "all"`` is always present).
    seed : int, default 0

    Returns
    -------
    pandas.DataFrame
        Columns :data:`RELIABILITY_COLUMNS`; ``split_half`` is the mean Spearman correlation
        between halves, ``spearman_brown`` its step-up; NaN (with a
        :class:`DegenerateWarning`) with fewer than 4 people or 3 items.

    References
    ----------
    Spearman, C. (1910). Correlation calculated from faulty data. British Journal of Psychology,
    3, 271–295. Brown, W. (1910). Some experimental results in the correlation of mental
    abilities. British Journal of Psychology, 3, 296–322.
    """
    check_columns(trials, ["kind", "respondent", "item", "family", "correct"])
    n_splits = check_int("n_splits", n_splits, low=2)
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    h = scored(trials.loc[trials["kind"] == "human"])
    rng = np.random.default_rng(seed)
    people = np.array(sorted(h["respondent"].unique()))
    parts: list[tuple[str, pd.DataFrame]] = [("all", h)]
    if by_family and h["family"].nunique() > 1:
        parts += [(str(f), g) for f, g in h.groupby("family", sort=True)]
    rows = []
    splits = [rng.permutation(len(people)) < len(people) // 2 for _ in range(n_splits)]
    halves = np.array(splits, dtype=float).reshape(n_splits, len(people))
    for fam, sub in parts:
        wrong = (~sub["correct"].astype(bool)).astype(float)
        err = pd.crosstab(sub["respondent"], sub["item"], values=wrong, aggfunc="sum")
        n = pd.crosstab(sub["respondent"], sub["item"])
        err = err.reindex(people).fillna(0.0).to_numpy()
        n = n.reindex(people).fillna(0).to_numpy(float)
        # every split at once: halves' error and trial counts are (splits x people) @ (people
        # x items) products, so the cost is linear in people and items per split
        e1, n1 = halves @ err, halves @ n
        e2, n2 = err.sum(0) - e1, n.sum(0) - n1
        ok = (n1 > 0) & (n2 > 0)
        d1 = logit((e1 + 0.5) / (n1 + 1))
        d2 = logit((e2 + 0.5) / (n2 + 1))
        r = np.full(n_splits, np.nan)
        full = ok.all(1)
        if full.any():  # the usual case: both halves answered every item
            r[full] = spearman_rows(d1[full], d2[full])
        for k in np.flatnonzero(~full & (ok.sum(1) >= 3)):
            r[k] = spearman_rows(d1[k, ok[k]], d2[k, ok[k]])
        rs = r[np.isfinite(r)]  # a constant half has no ranking to compare (NaN)
        n_items = int((n.sum(0) > 0).sum())
        if len(people) < 4 or len(rs) == 0:
            warnings.warn(
                f"difficulty_reliability: {fam}: too few people ({len(people)}) or items "
                f"({n_items}) for split halves; NaN.",
                DegenerateWarning,
                stacklevel=2,
            )
            r_mean = lo = hi = sb = np.nan
        else:
            arr = np.asarray(rs)
            r_mean = float(arr.mean())
            lo, hi = np.quantile(arr, [(1 - level) / 2, 1 - (1 - level) / 2])
            sb = 2 * r_mean / (1 + r_mean) if r_mean > -1 else np.nan
        rows.append(
            dict(
                family=fam,
                n_items=n_items,
                n_respondents=len(people),
                n_splits=len(rs),
                split_half=r_mean,
                spearman_brown=sb,
                q_low=lo,
                q_high=hi,
                conf_level=level,
            )
        )
    return pd.DataFrame(rows, columns=list(RELIABILITY_COLUMNS))
