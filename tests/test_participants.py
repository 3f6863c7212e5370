"""Participant-level view: Cronbach's alpha, Bayes factors of profile correlations, family tests.

Check values are pingouin's documented examples on the data sets that ship inside the pingouin
package (``pingouin.read_dataset``), so they test that our tables route the right data into the
library and read its answer back correctly.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from numpy.testing import assert_allclose
from scipy import stats
from twofold.analysis.participants import (
    BAYES_FACTOR_COLUMNS,
    CONSISTENCY_COLUMNS,
    FAMILY_ACCURACY_COLUMNS,
    FAMILY_TEST_COLUMNS,
    _family_tests,
    cronbach_alpha,
    evidence_label,
    family_accuracy,
    internal_consistency,
    profile_bayes_factors,
)
from twofold.study.exceptions import DegenerateWarning, InputError


def _trials_from_wide(wide: pd.DataFrame, families: dict[str, str] | None = None) -> pd.DataFrame:
    """A minimal trials table (people only) from a respondents x items 0/1 matrix with gaps."""
    w = wide.copy()
    w.index = [f"P{i:03d}" for i in range(len(w))]
    long = w.rename_axis("respondent").reset_index().melt(id_vars="respondent", var_name="item")
    long = long.dropna(subset=["value"])
    long["item"] = long["item"].astype(str)
    long["kind"] = "human"
    long["family"] = [(families or {}).get(i, "strings") for i in long["item"]]
    long["correct"] = long["value"].astype(bool)
    return long.drop(columns="value").reset_index(drop=True)


def test_alpha_matches_documented_pairwise_and_listwise_values():
    data = pg.read_dataset("cronbach_wide_missing")
    # reference: SOURCES.md#pingouin-alpha — pingouin 0.7 cronbach_alpha docstring example
    # (values there agree with R psych::alpha, use="pairwise" / "complete.obs")
    res = cronbach_alpha(data)
    assert_allclose(res["alpha"], 0.732660835214447, rtol=1e-12)
    assert_allclose([res["ci_low"], res["ci_high"]], [0.435, 0.909], atol=5e-4)
    res = cronbach_alpha(data, nan_policy="listwise")
    assert_allclose(res["alpha"], 0.8016949152542373, rtol=1e-12)
    assert_allclose([res["ci_low"], res["ci_high"]], [0.581, 0.933], atol=5e-4)
    assert res["n_respondents"] == 9 and res["n_items"] == 11


def test_alpha_formula_without_missing_values():
    # common practice: alpha = k/(k-1) * (1 - sum of item variances / variance of the total)
    rng = np.random.default_rng(3)
    theta = rng.normal(size=200)
    wide = pd.DataFrame(
        (theta[:, None] - rng.normal(size=8)[None, :] + rng.logistic(size=(200, 8)) > 0).astype(
            float
        )
    )
    k = wide.shape[1]
    expected = k / (k - 1) * (1 - wide.var(ddof=1).sum() / wide.sum(axis=1).var(ddof=1))
    assert_allclose(cronbach_alpha(wide)["alpha"], expected, rtol=1e-10)


def test_internal_consistency_reads_the_trials_table():
    data = pg.read_dataset("cronbach_wide_missing")
    fams = {c: ("grids" if i < 6 else "matrices") for i, c in enumerate(data.columns)}
    trials = _trials_from_wide(data, fams)
    # a machine respondent must not enter the human item set
    machine = trials.loc[trials["respondent"] == "P000"].assign(
        respondent="solver-s0", kind="machine", correct=False
    )
    table = internal_consistency(pd.concat([trials, machine], ignore_index=True))
    assert tuple(table.columns) == CONSISTENCY_COLUMNS
    assert list(table["family"]) == ["all", "grids", "matrices"]
    overall = table.iloc[0]
    # reference: SOURCES.md#pingouin-alpha — same documented value as above, through the table
    assert_allclose(overall["alpha"], 0.732660835214447, rtol=1e-12)
    assert overall["n_respondents"] == 12 and overall["n_items"] == 11
    grids = data[[c for c in data.columns if fams[c] == "grids"]]
    assert_allclose(table.iloc[1]["alpha"], cronbach_alpha(grids)["alpha"], rtol=1e-12)
    assert table.iloc[1]["n_items"] == 6


def test_alpha_degenerate_cases_warn_and_give_nan():
    with pytest.warns(DegenerateWarning, match="2\\+ items"):
        res = cronbach_alpha(pd.DataFrame({"a": [1.0, 0.0, 1.0, 1.0]}))
    assert math.isnan(res["alpha"])
    with pytest.warns(DegenerateWarning):
        res = cronbach_alpha(pd.DataFrame({"a": [1.0] * 5, "b": [1.0] * 5}))
    assert math.isnan(res["ci_low"])
    with pytest.raises(InputError, match="nan_policy"):
        cronbach_alpha(pd.DataFrame({"a": [1.0]}), nan_policy="drop")


def _agreement(stat: str, estimate: float, n: int) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "group": ["solver-a", "solver-a"],
            "family": ["all", "all"],
            "statistic": [stat, stat],
            "estimate": [estimate, estimate],
            "n_items": [n, n],
            "interval": ["percentile", "bca"],
        }
    )


def test_bayes_factor_matches_documented_example():
    # reference: SOURCES.md#pingouin-bf-pearson — pingouin 0.7 bayesfactor_pearson docstring:
    # r = 0.6, n = 20 gives BF10 = 10.634
    table = profile_bayes_factors(_agreement("spearman", 0.6, 20))
    assert tuple(table.columns) == BAYES_FACTOR_COLUMNS
    assert len(table) == 1  # the two interval rows share one estimate
    assert_allclose(table["bf10"].iloc[0], 10.634, atol=5e-4)
    assert table["evidence"].iloc[0] == "strong for association"
    # Kendall's tau goes through Greiner's relation r = sin(pi tau / 2) (common practice)
    tau = 2 / math.pi * math.asin(0.6)
    assert_allclose(
        profile_bayes_factors(_agreement("kendall", tau, 20))["bf10"], 10.634, atol=5e-4
    )


def test_bayes_factor_small_or_perfect_profiles_are_undefined():
    assert math.isnan(profile_bayes_factors(_agreement("spearman", 0.5, 3))["bf10"].iloc[0])
    perfect = profile_bayes_factors(_agreement("spearman", 1.0, 30))
    assert perfect["evidence"].iloc[0] == "undefined"


@pytest.mark.parametrize(
    ("bf", "words"),
    [
        (1.5, "anecdotal"),
        (4.0, "moderate for association"),
        (1 / 12, "strong for no association"),
        (250.0, "extreme for association"),
        (math.nan, "undefined"),
    ],
)
def test_evidence_words(bf, words):
    # reference: SOURCES.md#bf-evidence-words — Lee & Wagenmakers 2013, table 7.1 (from memory)
    assert evidence_label(bf) == words


def test_family_tests_match_documented_rm_anova():
    wide = pg.read_dataset("rm_anova_wide")
    wide["respondent"] = [f"P{i:03d}" for i in range(len(wide))]
    long = wide.melt(id_vars="respondent", var_name="family", value_name="accuracy")
    tests = _family_tests(long)
    assert tuple(tests.columns) == FAMILY_TEST_COLUMNS
    aov = tests.iloc[0]
    # reference: SOURCES.md#pingouin-rm-anova — pingouin 0.7 rm_anova docstring example 1:
    # F(3, 24) = 5.200652, p = 0.006557, ng2 = 0.346392, eps = 0.694329
    assert (aov["df1"], aov["df2"]) == (3.0, 24.0)
    assert_allclose(
        [aov["stat"], aov["p_val"], aov["effect_size"], aov["epsilon"]],
        [5.200652, 0.006557, 0.346392, 0.694329],
        atol=1e-6,
    )
    # a pairwise row against scipy's paired t-test on the same complete cases
    complete = wide.dropna()
    t, p = stats.ttest_rel(complete["2 week"], complete["Before"])
    row = tests.loc[tests["contrast"] == "2 week - Before"].iloc[0]
    assert_allclose([row["stat"], row["p_val"]], [t, p], rtol=1e-10)
    assert (tests["test"] == "paired_t").sum() == 6
    assert (tests["p_adjusted"] >= tests["p_val"] - 1e-15).all()


def test_family_accuracy_from_trials():
    rng = np.random.default_rng(11)
    rows = []
    for r in range(12):
        for fam, p in (("strings", 0.8), ("grids", 0.4), ("contrast", 0.6)):
            for i in range(10):
                rows.append(
                    {
                        "respondent": f"P{r:03d}",
                        "kind": "human",
                        "family": fam,
                        "item": f"{fam}-{i}",
                        "correct": bool(rng.random() < p),
                    }
                )
    trials = pd.DataFrame(rows)
    out = family_accuracy(trials)
    means = out["means"]
    assert tuple(means.columns) == FAMILY_ACCURACY_COLUMNS
    per = trials.groupby(["family", "respondent"])["correct"].mean()
    assert_allclose(means.set_index("family")["mean"], per.groupby("family").mean(), rtol=1e-12)
    assert (means["ci_low"] < means["mean"]).all() and (means["mean"] < means["ci_high"]).all()
    assert out["tests"]["test"].tolist() == ["rm_anova"] + ["paired_t"] * 3


def test_family_accuracy_with_one_family_says_why():
    trials = pd.DataFrame(
        {
            "respondent": ["P001", "P002", "P003"],
            "kind": "human",
            "family": "strings",
            "item": "s-1",
            "correct": [True, False, True],
        }
    )
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(DegenerateWarning, match="1 families"):
            family_accuracy(trials)
