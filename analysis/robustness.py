"""Robustness: accuracy on isomorphs versus their parents, per respondent group."""

from __future__ import annotations

from typing import Any, Literal

import numpy as np
import pandas as pd
from scipy import stats
from twofold.study.checks import check_choice, check_number
from twofold.study.exceptions import InputError

from .data import check_columns, scored

__all__ = ["ROBUSTNESS_COLUMNS", "robustness", "robustness_test"]

ROBUSTNESS_COLUMNS = (
    "group",
    "kind",
    "family",
    "n_parent",
    "n_isomorph",
    "acc_parent",
    "acc_isomorph",
    "difference",
    "se",
    "ci_low",
    "ci_high",
    "conf_level",
)


def _isomorph_subset(trials: pd.DataFrame) -> pd.DataFrame:
    check_columns(trials, ["item", "parent", "isomorph", "correct", "group", "kind"])
    s = scored(trials)
    with_iso = set(s.loc[s["isomorph"].astype(bool), "parent"])
    return s.loc[s["parent"].isin(with_iso)]


def robustness(
    trials: pd.DataFrame,
    *,
    conf_level: float = 0.95,
    by_family: bool = True,
) -> pd.DataFrame:
    """Accuracy on isomorphs versus their parents, per respondent group.

    Only parents that have at least one isomorph in the data, and those isomorphs, are used.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ROBUSTNESS_COLUMNS`; ``difference = acc_isomorph - acc_parent`` with a
        Wald interval (``se`` from the two binomial proportions; trials treated as independent —
        see :func:`robustness_test` for the model with respondent and item effects). ``family``
        is ``"all"`` plus one row per family when ``by_family``.
    """
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    z = stats.norm.ppf(0.5 + level / 2)
    s = _isomorph_subset(trials)
    rows = []
    for group, g in s.groupby("group", sort=True):
        parts = [("all", g)]
        if by_family and g["family"].nunique() > 1:
            parts += list(g.groupby("family", sort=True))
        for fam, sub in parts:
            iso = sub["isomorph"].astype(bool)
            n1, n0 = int(iso.sum()), int((~iso).sum())
            p1 = sub.loc[iso, "correct"].mean() if n1 else np.nan
            p0 = sub.loc[~iso, "correct"].mean() if n0 else np.nan
            se = np.sqrt(p1 * (1 - p1) / n1 + p0 * (1 - p0) / n0) if n1 and n0 else np.nan
            rows.append(
                dict(
                    group=group,
                    kind=sub["kind"].iloc[0],
                    family=fam,
                    n_parent=n0,
                    n_isomorph=n1,
                    acc_parent=p0,
                    acc_isomorph=p1,
                    difference=p1 - p0,
                    se=se,
                    ci_low=p1 - p0 - z * se,
                    ci_high=p1 - p0 + z * se,
                    conf_level=level,
                )
            )
    return pd.DataFrame(rows, columns=list(ROBUSTNESS_COLUMNS))


def robustness_test(
    trials: pd.DataFrame,
    *,
    by: Literal["group", "kind"] = "group",
    conf_level: float = 0.95,
) -> Any:
    """Mixed-model test of whether isomorphs cost machines more accuracy than people.

    Fits ``correct ~ by * isomorph`` (logistic, crossed random intercepts for respondents and
    parent items; :func:`twofold.analysis.mixed.fit_glmm`). The ``by[T.<group>]:isomorph[T.True]``
    terms are the differences from people in the (log-odds) isomorph effect.

    Returns
    -------
    MixedResult
    """
    from .mixed import _with_human_first, fit_glmm

    check_choice("by", by, ("group", "kind"))
    s = _isomorph_subset(trials)
    if s.empty or s["isomorph"].nunique() < 2:
        raise InputError(
            "field 'trials': no parent items with isomorphs answered; accepted: a trials table "
            "holding parents and their isomorphs (variant_of set in the bank).",
            field="trials",
        )
    s = _with_human_first(s)
    s["isomorph"] = s["isomorph"].astype(bool).astype(int)
    return fit_glmm(
        s, f"correct ~ {by} * isomorph", random=("respondent", "parent"), conf_level=conf_level
    )
