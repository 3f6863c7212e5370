"""The participant-level view beside the models, computed with pingouin.

Labs expect the classical summaries of the human side next to the item-response and mixed
models; these three functions give them as tidy tables:

* :func:`internal_consistency` — Cronbach's alpha of the human item set (overall and per family)
  with Feldt's interval: how consistently the items measure one ability in this sample. It sits
  beside the split-half reliability of the difficulty profile, which is a different quantity
  (agreement of item difficulties between halves of the *people*).
* :func:`profile_bayes_factors` — a Bayes factor for each human–machine difficulty-profile
  correlation, beside its bootstrap interval.
* :func:`family_accuracy` — each participant's accuracy per family, a one-way repeated-measures
  ANOVA over families with generalised eta squared, and pairwise paired comparisons with Hedges'
  g (Holm-adjusted p-values).

pingouin is imported inside the functions so that ``import twofold.analysis`` stays quick.
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np
import pandas as pd
from twofold.study.checks import check_choice, check_number
from twofold.study.exceptions import DegenerateWarning

from .data import check_columns, scored

__all__ = [
    "BAYES_FACTOR_COLUMNS",
    "CONSISTENCY_COLUMNS",
    "FAMILY_ACCURACY_COLUMNS",
    "FAMILY_TEST_COLUMNS",
    "cronbach_alpha",
    "evidence_label",
    "family_accuracy",
    "internal_consistency",
    "profile_bayes_factors",
]

#: columns of :func:`internal_consistency`
CONSISTENCY_COLUMNS = (
    "family",
    "n_respondents",
    "n_items",
    "alpha",
    "ci_low",
    "ci_high",
    "conf_level",
    "nan_policy",
)
#: columns of :func:`profile_bayes_factors`
BAYES_FACTOR_COLUMNS = (
    "group",
    "family",
    "statistic",
    "estimate",
    "n_items",
    "bf10",
    "evidence",
)
#: columns of the ``means`` table of :func:`family_accuracy`
FAMILY_ACCURACY_COLUMNS = (
    "family",
    "n_respondents",
    "mean",
    "sd",
    "ci_low",
    "ci_high",
    "conf_level",
)
#: columns of the ``tests`` table of :func:`family_accuracy`
FAMILY_TEST_COLUMNS = (
    "test",
    "contrast",
    "n_respondents",
    "df1",
    "df2",
    "stat",
    "p_val",
    "p_adjusted",
    "effect_size",
    "effect",
    "epsilon",
)

# Bayes-factor evidence categories (Lee & Wagenmakers 2013, after Jeffreys 1961), for BF10 >= 1;
# below 1 the same words apply to 1 / BF10 in favour of no association.
_EVIDENCE = ((100.0, "extreme"), (30.0, "very strong"), (10.0, "strong"), (3.0, "moderate"))


def _human_wide(trials: pd.DataFrame) -> pd.DataFrame:
    """Respondent x item matrix of human accuracy (mean over repeats; NaN where not answered)."""
    check_columns(trials, ("respondent", "kind", "item", "family", "correct"))
    hum = scored(trials.loc[trials["kind"] == "human"])
    if hum.empty:
        return pd.DataFrame()
    return hum.pivot_table(index="respondent", columns="item", values="correct", aggfunc="mean")


def cronbach_alpha(
    wide: pd.DataFrame, *, conf_level: float = 0.95, nan_policy: str = "pairwise"
) -> dict[str, Any]:
    """Cronbach's alpha of a respondents x items score matrix, with Feldt's interval.

    Parameters
    ----------
    wide : pandas.DataFrame
        One row per respondent, one column per item; NaN where a respondent did not take an item.
    conf_level : float, default 0.95
    nan_policy : {"pairwise", "listwise"}, default "pairwise"
        ``pairwise`` uses every available pair of scores for the item covariances (suits
        counterbalanced forms where nobody takes every item); ``listwise`` keeps only respondents
        with no missing item.

    Returns
    -------
    dict
        ``alpha``, ``ci_low``, ``ci_high``, ``n_respondents``, ``n_items``; NaN values (with a
        :class:`~twofold.study.exceptions.DegenerateWarning`) when fewer than two items or three
        respondents remain, or the total score does not vary.

    Notes
    -----
    :math:`\\alpha = \\frac{k}{k-1}\\left(1 - \\sum_i \\sigma^2_i / \\sigma^2_X\\right)`; the
    interval follows Feldt, Woodruff & Salih (1987), via :func:`pingouin.cronbach_alpha`.

    References
    ----------
    Cronbach, L. J. (1951). Coefficient alpha and the internal structure of tests.
    Psychometrika, 16, 297–334.
    Feldt, L. S., Woodruff, D. J., & Salih, F. A. (1987). Statistical inference for coefficient
    alpha. Applied Psychological Measurement, 11(1), 93–103.
    """
    check_number("conf_level", conf_level, low=0.5, high=0.999)
    check_choice("nan_policy", nan_policy, ("pairwise", "listwise"))
    data = wide.dropna(axis=1, how="all").dropna(axis=0, how="all")
    n_resp, n_items = data.shape
    if nan_policy == "listwise":
        n_resp = int(data.dropna(axis=0).shape[0])
    out = {
        "alpha": math.nan,
        "ci_low": math.nan,
        "ci_high": math.nan,
        "n_respondents": int(n_resp),
        "n_items": int(n_items),
    }
    total = data.sum(axis=1, min_count=1) if nan_policy == "pairwise" else data.dropna().sum(axis=1)
    if n_items < 2 or n_resp < 3 or not np.nanvar(total.to_numpy(float)) > 0:
        warnings.warn(
            f"cronbach_alpha: undefined for {n_resp} respondents x {n_items} items "
            "(needs 2+ items, 3+ respondents and varying total scores); NaN.",
            DegenerateWarning,
            stacklevel=2,
        )
        return out
    import pingouin as pg

    with warnings.catch_warnings():
        # pingouin's internals emit pandas deprecation notices under pandas 3
        warnings.simplefilter("ignore", FutureWarning)
        warnings.simplefilter("ignore", DeprecationWarning)
        alpha, ci = pg.cronbach_alpha(data=data, nan_policy=nan_policy, ci=conf_level)
    out.update(alpha=float(alpha), ci_low=float(ci[0]), ci_high=float(ci[1]))
    return out


def internal_consistency(
    trials: pd.DataFrame, *, conf_level: float = 0.95, nan_policy: str = "pairwise"
) -> pd.DataFrame:
    """Cronbach's alpha of the human item set, overall (``family="all"``) and per family.

    Parameters
    ----------
    trials : pandas.DataFrame
        The tidy trials table (:mod:`twofold.analysis.data`); only people's scored trials count.
    conf_level : float, default 0.95
    nan_policy : {"pairwise", "listwise"}, default "pairwise"
        See :func:`cronbach_alpha`.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CONSISTENCY_COLUMNS`; one row for ``all`` plus one per family when there
        are several.
    """
    wide = _human_wide(trials)
    if wide.empty:
        return pd.DataFrame(columns=list(CONSISTENCY_COLUMNS))
    fam_of = trials.drop_duplicates("item").set_index("item")["family"]
    parts: list[tuple[str, pd.DataFrame]] = [("all", wide)]
    families = sorted(fam_of.reindex(wide.columns).dropna().unique())
    if len(families) > 1:
        parts += [(f, wide.loc[:, fam_of.reindex(wide.columns).to_numpy() == f]) for f in families]
    rows = []
    for fam, sub in parts:
        res = cronbach_alpha(sub, conf_level=conf_level, nan_policy=nan_policy)
        rows.append({"family": fam, **res, "conf_level": conf_level, "nan_policy": nan_policy})
    return pd.DataFrame(rows)[list(CONSISTENCY_COLUMNS)]


def evidence_label(bf10: float) -> str:
    """Words for a Bayes factor: ``"moderate for association"``, ``"anecdotal"``, ...

    Categories after Lee & Wagenmakers (2013), adapted from Jeffreys (1961): 1–3 anecdotal,
    3–10 moderate, 10–30 strong, 30–100 very strong, above 100 extreme; for BF10 < 1 the same
    cut points apply to 1/BF10 and the evidence favours no association.
    """
    if not np.isfinite(bf10) or bf10 <= 0:
        return "undefined"
    side = "for association" if bf10 >= 1 else "for no association"
    strength = max(bf10, 1.0 / bf10)
    for cut, word in _EVIDENCE:
        if strength >= cut:
            return f"{word} {side}"
    return "anecdotal"


def profile_bayes_factors(agreement: pd.DataFrame) -> pd.DataFrame:
    """A Bayes factor for each human–machine difficulty-profile correlation.

    Parameters
    ----------
    agreement : pandas.DataFrame
        The table of :func:`twofold.analysis.difficulty_agreement` (one row per group x family x
        statistic x interval kind; the interval rows share their estimate).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`BAYES_FACTOR_COLUMNS`: ``bf10`` is the two-sided Bayes factor of
        association against none with Jeffreys's exact test (stretched beta prior with kappa = 1,
        i.e. uniform on the correlation; :func:`pingouin.bayesfactor_pearson`, method ``"ly"``);
        ``evidence`` puts it in words (:func:`evidence_label`).

    Notes
    -----
    The Bayes factor is the one for a Pearson correlation (Ly, Verhagen & Wagenmakers 2016),
    applied to the rank correlation: for Spearman's rho this treats the ranks as the data, a common
    approximation; Kendall's tau is first converted with :math:`r = \\sin(\\pi\\tau/2)`
    (Greiner's relation). NaN (``undefined``) with fewer than 4 items.

    References
    ----------
    Ly, A., Verhagen, J., & Wagenmakers, E.-J. (2016). Harold Jeffreys's default Bayes factor
    hypothesis tests. Journal of Mathematical Psychology, 72, 19–32.
    """
    check_columns(agreement, ("group", "family", "statistic", "estimate", "n_items"))
    if agreement.empty:
        return pd.DataFrame(columns=list(BAYES_FACTOR_COLUMNS))
    import pingouin as pg

    one = agreement.drop_duplicates(["group", "family", "statistic"])
    rows = []
    for rec in one.itertuples(index=False):
        r = float(rec.estimate)
        n = int(rec.n_items)
        if rec.statistic == "kendall":
            r = math.sin(math.pi * r / 2.0)
        bf = math.nan
        if n >= 4 and np.isfinite(r) and abs(r) < 1:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                bf = float(pg.bayesfactor_pearson(r, n))
        rows.append(
            {
                "group": rec.group,
                "family": rec.family,
                "statistic": rec.statistic,
                "estimate": float(rec.estimate),
                "n_items": n,
                "bf10": bf,
                "evidence": evidence_label(bf),
            }
        )
    return pd.DataFrame(rows)[list(BAYES_FACTOR_COLUMNS)]


def family_accuracy(trials: pd.DataFrame, *, conf_level: float = 0.95) -> dict[str, pd.DataFrame]:
    """People's accuracy by family: participant means, a repeated-measures ANOVA, pairwise tests.

    Parameters
    ----------
    trials : pandas.DataFrame
        The tidy trials table; only people's scored trials count.
    conf_level : float, default 0.95
        Level of the t intervals around the family means.

    Returns
    -------
    dict of pandas.DataFrame
        ``means`` (columns :data:`FAMILY_ACCURACY_COLUMNS`: mean and SD over participants of
        their proportion correct in the family, t interval) and ``tests`` (columns
        :data:`FAMILY_TEST_COLUMNS`): one ``rm_anova`` row (F, its degrees of freedom, p,
        the Greenhouse–Geisser corrected p in ``p_adjusted``, generalised eta squared ``ng2``
        and the Greenhouse–Geisser epsilon) and one ``paired_t`` row per pair of families (t, p,
        Holm-adjusted p in ``p_adjusted``, Hedges' g). The tests use the
        participants who took every family (``n_respondents``); with fewer than two families or
        three such participants ``tests`` is empty and a DegenerateWarning says why.

    References
    ----------
    Bakeman, R. (2005). Recommended effect size statistics for repeated measures designs.
    Behavior Research Methods, 37(3), 379–384.
    """
    check_number("conf_level", conf_level, low=0.5, high=0.999)
    check_columns(trials, ("respondent", "kind", "family", "correct"))
    hum = scored(trials.loc[trials["kind"] == "human"])
    per = (
        hum.groupby(["respondent", "family"], sort=True)["correct"]
        .mean()
        .rename("accuracy")
        .reset_index()
    )
    from scipy import stats

    means = []
    for fam, sub in per.groupby("family", sort=True):
        x = sub["accuracy"].to_numpy(float)
        n = len(x)
        m = float(x.mean())
        sd = float(x.std(ddof=1)) if n > 1 else math.nan
        half = stats.t.ppf(0.5 + conf_level / 2, n - 1) * sd / math.sqrt(n) if n > 1 else math.nan
        means.append(
            {
                "family": fam,
                "n_respondents": n,
                "mean": m,
                "sd": sd,
                "ci_low": m - half,
                "ci_high": m + half,
                "conf_level": conf_level,
            }
        )
    means_df = pd.DataFrame(means, columns=list(FAMILY_ACCURACY_COLUMNS))
    return {"means": means_df, "tests": _family_tests(per)}


def _family_tests(per: pd.DataFrame) -> pd.DataFrame:
    """Repeated-measures ANOVA and pairwise paired t-tests of ``accuracy`` over ``family``.

    ``per`` is long: ``respondent``, ``family``, ``accuracy``; respondents missing a family are
    left out of the tests (listwise), as pingouin does.
    """
    tests_df = pd.DataFrame(columns=list(FAMILY_TEST_COLUMNS))
    per = per.dropna(subset=["accuracy"])
    families = sorted(per["family"].unique())
    complete = per.groupby("respondent")["family"].nunique()
    keep = complete.index[complete == len(families)]
    per = per.loc[per["respondent"].isin(keep)]
    if len(families) < 2 or len(keep) < 3:
        warnings.warn(
            f"family_accuracy: no tests ({len(families)} families, {len(keep)} participants who "
            "took every family; needs 2+ and 3+).",
            DegenerateWarning,
            stacklevel=3,
        )
        return tests_df
    import pingouin as pg

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        warnings.simplefilter("ignore", DeprecationWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        aov = pg.rm_anova(
            data=per, dv="accuracy", within="family", subject="respondent", correction=True
        )
        pw = pg.pairwise_tests(
            data=per,
            dv="accuracy",
            within="family",
            subject="respondent",
            padjust="holm",
            effsize="hedges",
        )
    a = aov.iloc[0]
    eps = float(a["eps"]) if "eps" in aov.columns else math.nan
    rows: list[dict[str, Any]] = [
        {
            "test": "rm_anova",
            "contrast": "family",
            "n_respondents": len(keep),
            "df1": float(a["ddof1"]),
            "df2": float(a["ddof2"]),
            "stat": float(a["F"]),
            "p_val": float(a["p_unc"]),
            "p_adjusted": float(a["p_GG_corr"]) if "p_GG_corr" in aov.columns else math.nan,
            "effect_size": float(a["ng2"]),
            "effect": "ng2",
            "epsilon": eps,
        }
    ]
    for rec in pw.to_dict("records"):
        rows.append(
            {
                "test": "paired_t",
                "contrast": f"{rec['A']} - {rec['B']}",
                "n_respondents": len(keep),
                "df1": float(rec["dof"]),
                "df2": math.nan,
                "stat": float(rec["T"]),
                "p_val": float(rec["p_unc"]),
                "p_adjusted": float(rec.get("p_corr", rec["p_unc"])),
                "effect_size": float(rec["hedges"]),
                "effect": "hedges_g",
                "epsilon": math.nan,
            }
        )
    return pd.DataFrame(rows)[list(FAMILY_TEST_COLUMNS)]
