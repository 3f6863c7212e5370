"""Do machines find the same items hard as people? Difficulty profiles and their agreement.

Human item difficulty (:func:`item_difficulty`), each machine group's item error rates
(:func:`machine_error_rates`) and their rank correlations with bootstrap intervals over items
(:func:`difficulty_agreement`). All linear in trials (one group-by each); the bootstrap works on
the item-level table.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence

import numpy as np
import pandas as pd
from twofold.study.checks import check_choice
from twofold.study.exceptions import DegenerateWarning

from ._ranks import STATISTICS, bootstrap_ci, corr_p
from .data import check_columns, logit, scored

__all__ = [
    "AGREEMENT_COLUMNS",
    "bootstrap_ci",
    "difficulty_agreement",
    "item_difficulty",
    "machine_error_rates",
]

AGREEMENT_COLUMNS = (
    "group",
    "family",
    "statistic",
    "estimate",
    "p_val",
    "n_items",
    "interval",
    "ci_low",
    "ci_high",
    "conf_level",
    "n_boot",
    "human_difficulty",
)


def item_difficulty(
    trials: pd.DataFrame,
    *,
    irt: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Human item difficulty: IRT ``b`` when given, else the logit of the error rate.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; human scored trials are used.
    irt : pandas.DataFrame, optional
        Item parameters with columns ``item`` and ``b`` (e.g. from
        :func:`twofold.analysis.irt.fit_irt`); items missing from it fall back to nothing (NaN).

    Returns
    -------
    pandas.DataFrame
        Columns ``item, family, n, n_errors, error_rate, difficulty, source`` (``source`` is
        ``"irt_b"`` or ``"logit_error"``). The logit uses ``(errors + 0.5) / (n + 1)`` so all-right
        and all-wrong items stay finite.
    """
    check_columns(trials, ["kind", "item", "family", "correct"])
    h = scored(trials.loc[trials["kind"] == "human"])
    g = h.groupby(["item", "family"], sort=True)["correct"].agg(n="size", n_correct="sum")
    g = g.reset_index()
    g["n_errors"] = g["n"] - g["n_correct"]
    g["error_rate"] = g["n_errors"] / g["n"]
    if irt is not None:
        check_columns(irt, ["item", "b"], name="irt")
        b = irt.drop_duplicates("item").set_index("item")["b"]
        g["difficulty"] = g["item"].map(b).astype(float)
        g["source"] = "irt_b"
    else:
        g["difficulty"] = logit((g["n_errors"] + 0.5) / (g["n"] + 1))
        g["source"] = "logit_error"
    return g[["item", "family", "n", "n_errors", "error_rate", "difficulty", "source"]]


def machine_error_rates(trials: pd.DataFrame) -> pd.DataFrame:
    """Each machine group's error rate per item, pooled over seeds (sessions).

    Returns
    -------
    pandas.DataFrame
        Columns ``group, item, family, n, n_errors, error_rate``.
    """
    check_columns(trials, ["kind", "group", "item", "family", "correct"])
    m = scored(trials.loc[trials["kind"] == "machine"])
    g = m.groupby(["group", "item", "family"], sort=True)["correct"].agg(n="size", n_correct="sum")
    g = g.reset_index()
    g["n_errors"] = g["n"] - g["n_correct"]
    g["error_rate"] = g["n_errors"] / g["n"]
    return g[["group", "item", "family", "n", "n_errors", "error_rate"]]


def difficulty_agreement(
    trials: pd.DataFrame,
    *,
    irt: pd.DataFrame | None = None,
    statistics: Sequence[str] = ("spearman", "kendall"),
    n_boot: int = 2000,
    conf_level: float = 0.95,
    by_family: bool = True,
    seed: int = 0,
) -> pd.DataFrame:
    """Do machines find the same items hard as people? Rank correlations with bootstrap CIs.

    For each machine group, correlates human item difficulty (:func:`item_difficulty`) with the
    group's item error rate (:func:`machine_error_rates`) over the items both answered, overall
    and per family, with paired bootstrap intervals over items (:func:`bootstrap_ci`).

    Parameters
    ----------
    trials : pandas.DataFrame
    irt : pandas.DataFrame, optional
        Item parameters (``item``, ``b``) to use as human difficulty.
    statistics : sequence of {"spearman", "kendall"}
    n_boot : int, default 2000
    conf_level : float, default 0.95
    by_family : bool, default True
        Add one block of rows per family besides ``family="all"`` (when there are several).
    seed : int, default 0
        Seed of the resampling (each group x family x statistic gets its own stream).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`AGREEMENT_COLUMNS`; two rows per group x family x statistic
        (``interval`` = ``percentile`` and ``bca``). ``p_val`` is scipy's test of no association.
    """
    for s in statistics:
        check_choice("statistics", s, tuple(STATISTICS))
    hum = item_difficulty(trials, irt=irt)
    mach = machine_error_rates(trials)
    rows: list[pd.DataFrame] = []
    ss = np.random.SeedSequence(seed)
    for group, m in mach.groupby("group", sort=True):
        j = hum.merge(m[["item", "error_rate"]], on="item", suffixes=("_h", "_m"))
        j = j.loc[j["difficulty"].notna()]
        parts = [("all", j)]
        if by_family and j["family"].nunique() > 1:
            parts += list(j.groupby("family", sort=True))
        for fam, sub in parts:
            x = sub["difficulty"].to_numpy(float)
            y = sub["error_rate_m"].to_numpy(float)
            for s in statistics:
                (child,) = ss.spawn(1)
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", DegenerateWarning)
                    ci = bootstrap_ci(
                        x,
                        y,
                        statistic="kendall" if s == "kendall" else "spearman",
                        n_boot=n_boot,
                        conf_level=conf_level,
                        seed=np.random.default_rng(child),
                    )
                p = corr_p(x, y, s)
                if not np.isfinite(ci["estimate"].iloc[0]):
                    warnings.warn(
                        f"difficulty_agreement: {s} for {group} on {fam} is undefined "
                        f"({len(x)} items, or constant difficulty/error rates); NaN.",
                        DegenerateWarning,
                        stacklevel=2,
                    )
                ci = ci.assign(
                    group=group,
                    family=fam,
                    p_val=p,
                    n_items=len(x),
                    human_difficulty=hum["source"].iloc[0] if len(hum) else "logit_error",
                )
                rows.append(ci)
    if not rows:
        return pd.DataFrame(columns=list(AGREEMENT_COLUMNS))
    out = pd.concat(rows, ignore_index=True)
    return out[list(AGREEMENT_COLUMNS)]
