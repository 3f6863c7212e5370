"""Tests of twofold.analysis.planning (simulation-based sample planning)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from scipy.special import expit
from scipy.stats import spearmanr
from twofold.analysis import planning
from twofold.analysis.irt import IRTResult, simulate_responses
from twofold.analysis.planning import (
    PLAN_COLUMNS,
    plan_from_pilot,
    plan_sample_size,
    required_sample_size,
)
from twofold.study.exceptions import InputError

J = 15
ITEMS = pd.DataFrame({"a": np.linspace(0.8, 1.6, J), "b": np.linspace(-2, 2, J)})
ERR = np.linspace(0.05, 0.9, J)


def test_table_columns_and_worker_independence():
    one = plan_sample_size(
        ITEMS, machine_error=ERR, n_humans=[15, 60], n_seeds=[3, 8], n_sim=60, seed=5, workers=1
    )
    assert list(one.columns) == list(PLAN_COLUMNS)
    assert len(one) == 2 * 2 * 2
    assert set(one["quantity"]) == set(planning.QUANTITIES)
    two = plan_sample_size(
        ITEMS, machine_error=ERR, n_humans=[15, 60], n_seeds=[3, 8], n_sim=60, seed=5, workers=2
    )
    pd.testing.assert_frame_equal(one, two)
    other = plan_sample_size(
        ITEMS, machine_error=ERR, n_humans=[15, 60], n_seeds=[3, 8], n_sim=60, seed=6
    )
    assert not np.allclose(one["mean_estimate"], other["mean_estimate"])


def test_kind_effect_spread_matches_the_variance_of_two_means():
    n, s = 40, 4
    curve = plan_sample_size(ITEMS, machine_error=ERR, n_humans=n, n_seeds=s, n_sim=3000, seed=1)
    row = curve.set_index("quantity").loc["kind_effect"]
    # common practice: Var(mean) = Var(single) / count, for independent humans and seeds
    nodes, w = np.polynomial.hermite_e.hermegauss(61)
    w = w / w.sum()
    a, b = ITEMS["a"].to_numpy(), ITEMS["b"].to_numpy()
    p = expit(a * (nodes[:, None] - b))
    acc_given_theta = p.mean(1)
    mean_acc = w @ acc_given_theta
    var_person = w @ (acc_given_theta - mean_acc) ** 2 + w @ (p * (1 - p)).sum(1) / J**2
    var_machine = np.sum(ERR * (1 - ERR)) / (J**2 * s)
    expected_sd = np.sqrt(var_person / n + var_machine)
    assert_allclose(row["sd_estimate"], expected_sd, rtol=0.06)
    assert_allclose(row["true_value"], (1 - ERR.mean()) - mean_acc, atol=1e-10)
    assert_allclose(row["mean_estimate"], row["true_value"], atol=3 * expected_sd / np.sqrt(3000))
    # a normal sampling distribution: the central 95 % range is about 2 x 1.96 SD wide
    assert_allclose(row["ci_width"], 2 * 1.96 * expected_sd, rtol=0.1)


def test_profile_correlation_converges_and_narrows():
    curve = plan_sample_size(
        ITEMS,
        machine_error=ERR,
        n_humans=[10, 2000],
        n_seeds=400,
        n_sim=50,
        seed=3,
        target_width=0.15,
    )
    rho = curve[curve["quantity"] == "profile_correlation"].set_index("n_humans")
    # with this many people and seeds the estimate reaches the error-rate correlation
    assert_allclose(rho.loc[2000, "mean_estimate"], rho.loc[2000, "true_value"], atol=0.03)
    assert rho.loc[10, "ci_width"] > rho.loc[2000, "ci_width"]
    assert rho.loc[2000, "meets_target"] and not rho.loc[10, "meets_target"]
    need = required_sample_size(curve).set_index("quantity")
    assert need.loc["profile_correlation", "n_humans"] == 2000


def test_spearman_rows_matches_scipy_with_ties():
    rng = np.random.default_rng(0)
    x = rng.integers(0, 4, size=(20, 9)).astype(float)
    y = rng.integers(0, 3, size=(20, 9)).astype(float)
    ours = planning.spearman_rows(x, y)  # the one helper, from analysis._ranks
    for i in range(20):
        if np.ptp(x[i]) == 0 or np.ptp(y[i]) == 0:
            assert np.isnan(ours[i])
            continue
        # reference: SOURCES.md#scipy-live — scipy.stats.spearmanr (average ranks for ties)
        assert_allclose(ours[i], spearmanr(x[i], y[i]).statistic, rtol=1e-12)


def test_constant_machine_profile_is_counted_as_undefined():
    curve = plan_sample_size(
        ITEMS, machine_error=np.zeros(J), n_humans=20, n_seeds=2, n_sim=20, seed=0
    )
    rho = curve.set_index("quantity").loc["profile_correlation"]
    assert rho["n_undefined"] == 20 and np.isnan(rho["ci_width"]) and not rho["meets_target"]
    need = required_sample_size(curve).set_index("quantity")
    assert pd.isna(need.loc["profile_correlation", "n_humans"])


def test_made_up_machine_and_result_input():
    res = IRTResult.from_parameters(a=ITEMS["a"], b=ITEMS["b"])
    aligned = plan_sample_size(res, alignment=1.0, machine_theta=0.5, n_humans=50, n_sim=20)
    rho = aligned.set_index("quantity").loc["profile_correlation", "true_value"]
    assert rho > 0.95
    unrelated = plan_sample_size(res, alignment=0.0, n_humans=50, n_sim=20, seed=4)
    assert unrelated.set_index("quantity").loc["profile_correlation", "true_value"] < rho


def test_plan_from_pilot():
    rng = np.random.default_rng(8)
    a, b = ITEMS["a"].to_numpy(), ITEMS["b"].to_numpy()
    x = simulate_responses(a, b, rng.normal(size=120), rng)
    rows = []
    for i in range(120):
        for j in range(J):
            rows.append((f"P{i:03d}", "human", f"q{j:02d}", bool(x[i, j])))
    m = simulate_responses(a, b, np.full(3, 0.5), rng)
    for s in range(3):
        for j in range(J - 2):  # two items never given to the machine
            rows.append((f"bot-s{s}", "machine", f"q{j:02d}", bool(m[s, j])))
    trials = pd.DataFrame(rows, columns=["respondent", "kind", "item", "correct"])
    curve = plan_from_pilot(trials, solver="bot", n_humans=[20, 40], n_sim=20)
    assert (curve["n_items"] == J - 2).all()
    with pytest.raises(InputError, match="field 'solver'"):
        plan_from_pilot(trials, solver="nobody", n_sim=20)


def test_input_errors():
    with pytest.raises(InputError, match="field 'items'"):
        plan_sample_size(pd.DataFrame({"b": [0.0, 1.0, 2.0]}))
    with pytest.raises(InputError, match="field 'machine_error'"):
        plan_sample_size(ITEMS, machine_error=[0.5] * 3)
    with pytest.raises(InputError, match="field 'n_humans'"):
        plan_sample_size(ITEMS, n_humans=[10, 0])
    with pytest.raises(InputError, match="field 'workers'"):
        plan_sample_size(ITEMS, workers=0)
    with pytest.raises(InputError, match="field 'curve'"):
        required_sample_size(pd.DataFrame({"x": [1]}))


def test_public_names():
    order = sorted(planning.__all__, key=lambda n: (not n.isupper(), not n[0].isupper(), n))
    assert planning.__all__ == order
    for name in planning.__all__:
        assert hasattr(planning, name)
