"""Which kinds of wrong answers? Error-type distributions of people and machine groups.

Every function counts error types per family and group with one group-by over the wrong answers,
so memory stays linear in trials; the small-count permutation test draws from the
multivariate hypergeometric law of the 2 x k table (never a permutations x errors array).
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats
from twofold.study.checks import check_int, check_number
from twofold.study.exceptions import DegenerateWarning

from .data import check_columns, scored

__all__ = [
    "ERROR_ODDS_COLUMNS",
    "ERROR_TEST_COLUMNS",
    "ERROR_TYPE_COLUMNS",
    "error_type_odds",
    "error_type_tests",
    "error_types",
]

ERROR_TYPE_COLUMNS = ("family", "group", "error_type", "n", "share", "n_errors")
ERROR_TEST_COLUMNS = (
    "family",
    "group",
    "n_human",
    "n_group",
    "n_types",
    "test",
    "statistic",
    "df",
    "p_val",
    "cramers_v",
)
ERROR_ODDS_COLUMNS = (
    "family",
    "group",
    "error_type",
    "n_group",
    "n_human",
    "log_odds_ratio",
    "se",
    "ci_low",
    "ci_high",
    "conf_level",
)


def _errors(trials: pd.DataFrame) -> pd.DataFrame:
    check_columns(trials, ["kind", "group", "family", "correct", "error_type"])
    s = scored(trials)
    e = s.loc[s["correct"] == 0].copy()
    e["error_type"] = e["error_type"].fillna("unclassified").astype(str)
    e["group"] = e["group"].astype(str)
    return e


def error_types(trials: pd.DataFrame) -> pd.DataFrame:
    """The distribution of error types per family, for people and for each machine group.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_TYPE_COLUMNS`: counts ``n`` of each error type among the wrong
        answers of the group in the family, ``share = n / n_errors``. Every type seen in the
        family is listed for every group (``n = 0`` when the group never made it).
    """
    e = _errors(trials)
    rows = []
    for fam, sub in e.groupby("family", sort=True):
        types = sorted(sub["error_type"].unique())
        for group, g in sub.groupby("group", sort=True):
            counts = g["error_type"].value_counts()
            tot = int(counts.sum())
            for t in types:
                k = int(counts.get(t, 0))
                rows.append(
                    dict(family=fam, group=group, error_type=t, n=k, share=k / tot, n_errors=tot)
                )
    return pd.DataFrame(rows, columns=list(ERROR_TYPE_COLUMNS))


def _g_stat(table: np.ndarray) -> float:
    exp = table.sum(1, keepdims=True) * table.sum(0, keepdims=True) / table.sum()
    nz = table > 0
    return float(2 * (table[nz] * np.log(table[nz] / exp[nz])).sum())


def error_type_tests(
    trials: pd.DataFrame,
    *,
    min_expected: float = 5.0,
    n_perm: int = 9999,
    seed: int = 0,
) -> pd.DataFrame:
    """Does a machine group's error-type distribution differ from people's? G-test per family.

    Parameters
    ----------
    trials : pandas.DataFrame
    min_expected : float, default 5
        When any expected count of the 2 x k table is below this, the p-value comes from a
        permutation test of the G statistic (margins fixed) instead of the chi-square law.
    n_perm : int, default 9999
        Permutations for the small-count test.
    seed : int, default 0

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_TEST_COLUMNS`, one row per family x machine group; ``test`` is
        ``g_test`` or ``permutation_g``; ``cramers_v = sqrt(X^2 / (n (min(r, c) - 1)))`` from
        Pearson's X^2. NaN (with a :class:`DegenerateWarning`) when either side has no errors or
        only one error type occurs.

    References
    ----------
    Sokal, R. R., & Rohlf, F. J. (1995). Biometry, 3rd ed., ch. 17 (the G-test).
    """
    n_perm = check_int("n_perm", n_perm, low=99)
    e = _errors(trials)
    rng = np.random.default_rng(seed)
    rows = []
    for fam, sub in e.groupby("family", sort=True):
        hum = sub.loc[sub["kind"] == "human"]
        for group, g in sub.loc[sub["kind"] == "machine"].groupby("group", sort=True):
            hc, gc = hum["error_type"].value_counts(), g["error_type"].value_counts()
            types = sorted(set(hc.index) | set(gc.index))
            table = np.array(
                [[int(hc.get(t, 0)) for t in types], [int(gc.get(t, 0)) for t in types]],
                dtype=float,
            )
            row: dict[str, Any] = dict(
                family=fam,
                group=group,
                n_human=int(table[0].sum()),
                n_group=int(table[1].sum()),
                n_types=len(types),
            )
            if table[0].sum() == 0 or table[1].sum() == 0 or len(types) < 2:
                warnings.warn(
                    f"error_type_tests: {fam}/{group}: needs errors on both sides and two or "
                    "more error types; NaN.",
                    DegenerateWarning,
                    stacklevel=2,
                )
                rows.append(
                    row
                    | dict(test="none", statistic=np.nan, df=np.nan, p_val=np.nan, cramers_v=np.nan)
                )
                continue
            g_stat = _g_stat(table)
            dof = len(types) - 1
            exp = table.sum(1, keepdims=True) * table.sum(0, keepdims=True) / table.sum()
            chi2 = float(((table - exp) ** 2 / exp).sum())
            v = float(np.sqrt(chi2 / (table.sum() * (min(table.shape) - 1))))
            if (exp < min_expected).any():
                # with both margins fixed, the people's row of a permuted table follows the
                # multivariate hypergeometric law: draw it directly (n_perm x k numbers, never
                # a permutation of every error)
                n_h = int(table[0].sum())
                h_counts = rng.multivariate_hypergeometric(
                    table.sum(0).astype(np.int64), n_h, size=n_perm
                ).astype(float)
                tab = np.stack([h_counts, table.sum(0) - h_counts], axis=1)
                ex = tab.sum(2, keepdims=True) * tab.sum(1, keepdims=True) / table.sum()
                with np.errstate(divide="ignore", invalid="ignore"):
                    terms = np.where(tab > 0, tab * np.log(tab / ex), 0.0)
                gs = 2 * terms.sum(axis=(1, 2))
                p = (1 + int((gs >= g_stat - 1e-9).sum())) / (n_perm + 1)
                test = "permutation_g"
            else:
                p = float(stats.chi2.sf(g_stat, dof))
                test = "g_test"
            rows.append(row | dict(test=test, statistic=g_stat, df=dof, p_val=p, cramers_v=v))
    return pd.DataFrame(rows, columns=list(ERROR_TEST_COLUMNS))


def error_type_odds(trials: pd.DataFrame, *, conf_level: float = 0.95) -> pd.DataFrame:
    """Per error type, the log-odds ratio of making that type (among errors), machine vs people.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_ODDS_COLUMNS`. ``log_odds_ratio = log((a d) / (b c))`` with ``a``/``b``
        the group's errors of / not of the type and ``c``/``d`` the people's; 0.5 is added to
        every cell when any cell is 0 (Haldane-Anscombe). ``se = sqrt(1/a + 1/b + 1/c + 1/d)``
        (Woolf); Wald interval. Positive: the machine makes this type relatively more often.
    """
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    z = stats.norm.ppf(0.5 + level / 2)
    e = _errors(trials)
    rows = []
    for fam, sub in e.groupby("family", sort=True):
        hum = sub.loc[sub["kind"] == "human", "error_type"].value_counts()
        n_hum = float(hum.sum())
        types = sorted(sub["error_type"].unique())
        for group, g in sub.loc[sub["kind"] == "machine"].groupby("group", sort=True):
            m = g["error_type"].value_counts()
            n_m = float(m.sum())
            for t in types:
                a, c = float(m.get(t, 0)), float(hum.get(t, 0))
                b, d = n_m - a, n_hum - c
                if min(a + b, c + d) == 0:
                    lor = se = np.nan
                else:
                    if min(a, b, c, d) == 0:
                        a, b, c, d = a + 0.5, b + 0.5, c + 0.5, d + 0.5
                    lor = float(np.log(a * d / (b * c)))
                    se = float(np.sqrt(1 / a + 1 / b + 1 / c + 1 / d))
                rows.append(
                    dict(
                        family=fam,
                        group=group,
                        error_type=t,
                        n_group=int(m.get(t, 0)),
                        n_human=int(hum.get(t, 0)),
                        log_odds_ratio=lor,
                        se=se,
                        ci_low=lor - z * se,
                        ci_high=lor + z * se,
                        conf_level=level,
                    )
                )
    return pd.DataFrame(rows, columns=list(ERROR_ODDS_COLUMNS))
