"""Difficulty-profile agreement, error consistency, error types and robustness."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from _simdata import make_study, tally_registered
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from sklearn.metrics import cohen_kappa_score
from twofold.analysis import (
    bootstrap_ci,
    difficulty_agreement,
    error_consistency,
    error_consistency_distribution,
    error_consistency_kappa,
    error_consistency_summary,
    error_type_odds,
    error_type_tests,
    error_types,
    item_difficulty,
    load_study_data,
    robustness,
)
from twofold.analysis._ranks import kendall_rows as _kendall_rows
from twofold.analysis._ranks import spearman_rows as _spearman_rows
from twofold.analysis.compare import (
    AGREEMENT_COLUMNS,
    CONSISTENCY_COLUMNS,
    CONSISTENCY_SUMMARY_COLUMNS,
    ERROR_TEST_COLUMNS,
    ROBUSTNESS_COLUMNS,
)
from twofold.study.exceptions import DegenerateWarning, InputError


@pytest.fixture(scope="module")
def trials(tmp_path_factory):
    with tally_registered():
        root = tmp_path_factory.mktemp("toy")
        make_study(root, n_parents=16, n_humans=12)
        return load_study_data(root / "study.toml").trials


# -- error consistency ---------------------------------------------------------------------------
def _vectors(table):
    """Correct/incorrect vectors from a 2 x 2 table [[both right, a only], [b only, both wrong]]."""
    (rr, rw), (wr, ww) = table
    a = [1] * rr + [1] * rw + [0] * wr + [0] * ww
    b = [1] * rr + [0] * rw + [1] * wr + [0] * ww
    return np.array(a, bool), np.array(b, bool)


def test_kappa_matches_the_worked_textbook_example():
    a, b = _vectors([[20, 5], [10, 15]])
    # reference: SOURCES.md#kappa-textbook — common textbook worked example: observed .70,
    # expected .50, kappa 0.40 (common practice)
    assert error_consistency_kappa(a, b) == pytest.approx(0.40, abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.booleans(), st.booleans()), min_size=2, max_size=60))
def test_kappa_equals_cohens_kappa_from_scikit_learn(pairs):
    a = np.array([p[0] for p in pairs])
    b = np.array([p[1] for p in pairs])
    p1, p2 = a.mean(), b.mean()
    if p1 * p2 + (1 - p1) * (1 - p2) == 1:
        return  # undefined; covered by the degenerate test
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # sklearn's own 0/0 guard
        ref = cohen_kappa_score(a, b)
    # reference: SOURCES.md#error-consistency — scikit-learn cohen_kappa_score
    np.testing.assert_allclose(error_consistency_kappa(a, b), ref, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("value", [True, False])
def test_kappa_is_nan_with_a_warning_when_both_are_always_right_or_wrong(value):
    a = np.full(8, value)
    with pytest.warns(DegenerateWarning, match="undefined"):
        k = error_consistency_kappa(a, a.copy())
    assert np.isnan(k)


def test_kappa_is_defined_when_one_is_always_right_and_the_other_always_wrong():
    # expected agreement is 0 there, so kappa = (0 - 0) / 1 = 0 without a warning
    assert error_consistency_kappa(np.ones(5, bool), np.zeros(5, bool)) == 0.0


def test_all_pairs_agree_with_the_pairwise_definition_and_scikit_learn(trials):
    pairs = error_consistency(trials, human_pairs="all")
    assert list(pairs.columns) == list(CONSISTENCY_COLUMNS)
    n_resp = trials["respondent"].nunique()
    assert len(pairs) == n_resp * (n_resp - 1) // 2
    assert set(pairs["pair_type"]) == {"human-human", "human-machine", "machine-machine"}
    # a human is always on side a of a human-machine pair
    hm = pairs[pairs["pair_type"] == "human-machine"]
    assert (hm["kind_a"] == "human").all()
    wide = trials.pivot(index="item", columns="respondent", values="correct").astype(bool)
    for row in pairs.sample(25, random_state=0).itertuples(index=False):
        a, b = wide[row.respondent_a].to_numpy(), wide[row.respondent_b].to_numpy()
        np.testing.assert_allclose(row.kappa, error_consistency_kappa(a, b), rtol=1e-12)
        # reference: SOURCES.md#error-consistency — scikit-learn cohen_kappa_score
        np.testing.assert_allclose(row.kappa, cohen_kappa_score(a, b), rtol=1e-10)
        assert row.p_a == pytest.approx(a.mean()) and row.n_items == len(a)


def test_pairs_on_too_few_shared_items_get_nan_with_a_warning(trials):
    few = trials[trials["respondent"].isin(["S001", "S002"])]
    few = few[few["item"].isin(sorted(few["item"].unique())[:5])]
    with pytest.warns(DegenerateWarning, match="fewer than 10 items"):
        pairs = error_consistency(few, human_pairs="all")
    assert len(pairs) == 1 and np.isnan(pairs["kappa"].iloc[0])


def test_summary_puts_the_human_ceiling_first(trials):
    summ = error_consistency_summary(error_consistency(trials, human_pairs="all"))
    assert summ.iloc[0][["group_a", "group_b"]].tolist() == ["human", "human"]
    assert summ.iloc[0]["n_pairs"] == 12 * 11 // 2
    hh = error_consistency(trials[trials["kind"] == "human"], human_pairs="all")["kappa"]
    assert summ.iloc[0]["mean"] == pytest.approx(hh.mean())
    assert summ.iloc[0]["q_low"] <= summ.iloc[0]["median"] <= summ.iloc[0]["q_high"]


# -- bootstrap -----------------------------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 4), st.integers(0, 4)), min_size=3, max_size=25))
def test_vectorised_rank_correlations_equal_scipy_with_ties(pairs):
    x = np.array([p[0] for p in pairs], float)
    y = np.array([p[1] for p in pairs], float)
    if np.ptp(x) == 0 or np.ptp(y) == 0:
        return
    # reference: SOURCES.md#scipy-live — scipy.stats.kendalltau (tau-b) and spearmanr
    np.testing.assert_allclose(_kendall_rows(x[None], y[None])[0], stats.kendalltau(x, y)[0])
    np.testing.assert_allclose(_spearman_rows(x[None], y[None])[0], stats.spearmanr(x, y)[0])


def _scipy_stat(name):
    fn = stats.spearmanr if name == "spearman" else stats.kendalltau

    def stat(a, b, axis=-1):
        a, b = np.atleast_2d(a), np.atleast_2d(b)
        out = np.array([fn(a[i], b[i])[0] for i in range(a.shape[0])])
        return out if out.size > 1 else out[0]

    return stat


@pytest.mark.parametrize("statistic", ["spearman", "kendall"])
def test_bootstrap_intervals_equal_scipy_bootstrap_on_the_same_statistic(statistic):
    rng = np.random.default_rng(11)
    x = rng.normal(size=40)
    y = np.round(x + rng.normal(size=40), 1)
    mine = bootstrap_ci(x, y, statistic=statistic, n_boot=600, seed=5).set_index("interval")
    for method, key in (("percentile", "percentile"), ("BCa", "bca")):
        # reference: SOURCES.md#scipy-live — scipy.stats.bootstrap (paired, same stream)
        ref = stats.bootstrap(
            (x, y), _scipy_stat(statistic), paired=True, vectorized=True, n_resamples=600,
            method=method, rng=np.random.default_rng(5), confidence_level=0.95,
        )  # fmt: skip
        ci = ref.confidence_interval
        np.testing.assert_allclose(
            mine.loc[key, ["ci_low", "ci_high"]].to_numpy(float), [ci.low, ci.high], rtol=1e-9
        )


def test_bootstrap_is_nan_with_a_warning_for_constant_input():
    with pytest.warns(DegenerateWarning):
        out = bootstrap_ci(np.ones(10), np.arange(10.0), n_boot=50)
    assert out["estimate"].isna().all() and out["ci_low"].isna().all()


def test_bca_is_nan_without_a_warning_when_every_resample_falls_on_one_side():
    # one machine error among ten items: every resample that keeps the error item correlates
    # above the estimate, the rest are undefined; the BCa bias term is infinite
    import warnings

    x = np.array([-0.89, 0.34, -0.56, 1.67, 0.35, 0.33, -0.55, 0.95, 0.05, -0.25])
    y = np.array([0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0])
    for statistic in ("spearman", "kendall"):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            out = bootstrap_ci(x, y, statistic=statistic, n_boot=200, seed=1)
        out = out.set_index("interval")
        assert out.loc["bca", ["ci_low", "ci_high"]].isna().all()
        assert out.loc["percentile", "ci_low"] > out.loc["bca", "estimate"]


# -- difficulty agreement ------------------------------------------------------------------------
def test_item_difficulty_is_the_logit_error_rate_with_half_counts(trials):
    d = item_difficulty(trials).set_index("item")
    hum = trials[trials["kind"] == "human"]
    item = d.index[0]
    x = hum[hum["item"] == item]
    n, e = len(x), int((~x["correct"].astype(bool)).sum())
    assert d.loc[item, "difficulty"] == pytest.approx(np.log((e + 0.5) / (n - e + 0.5)))
    b = pd.DataFrame({"item": d.index, "b": np.arange(len(d), dtype=float)})
    with_b = item_difficulty(trials, irt=b).set_index("item")
    assert with_b.loc[d.index[3], "difficulty"] == 3.0
    assert set(with_b["source"]) == {"irt_b"}


def test_difficulty_agreement_finds_the_shared_difficulty(trials):
    out = difficulty_agreement(trials, n_boot=300)
    assert list(out.columns) == list(AGREEMENT_COLUMNS)
    # one family: only family "all"; 2 groups x 2 statistics x 2 intervals
    assert len(out) == 8 and set(out["family"]) == {"all"}
    assert (out["ci_low"] <= out["estimate"]).all() and (out["estimate"] <= out["ci_high"]).all()
    wide = out[(out["group"] == "widebot") & (out["statistic"] == "spearman")]
    # the simulation gives both the same difficulty factors, so the correlation is positive
    assert (wide["estimate"] > 0.3).all() and (wide["ci_low"] > 0).all()
    # estimate and p-value as scipy computes them on the joined item table
    hum = item_difficulty(trials).set_index("item")["difficulty"]
    m = trials[(trials["group"] == "widebot")]
    err = 1 - m.groupby("item")["correct"].mean().astype(float)
    rho = stats.spearmanr(hum.loc[err.index], err)
    assert wide["estimate"].iloc[0] == pytest.approx(rho.statistic, rel=1e-12)
    assert wide["p_val"].iloc[0] == pytest.approx(rho.pvalue, rel=1e-9)


def test_agreement_rejects_an_unknown_statistic(trials):
    with pytest.raises(InputError, match="field 'statistics': got 'pearson'"):
        difficulty_agreement(trials, statistics=("pearson",))


# -- error types ---------------------------------------------------------------------------------
def test_error_type_distribution_shares_sum_to_one(trials):
    d = error_types(trials)
    sums = d.groupby(["family", "group"])["share"].sum()
    np.testing.assert_allclose(sums.to_numpy(), 1.0)
    wrong = trials[trials["correct"] == False]  # noqa: E712
    assert d["n"].sum() == len(wrong)


def test_g_test_and_cramers_v_match_scipy(trials):
    tests = error_type_tests(trials)
    assert list(tests.columns) == list(ERROR_TEST_COLUMNS)
    wrong = trials[trials["correct"] == False]  # noqa: E712
    for row in tests.itertuples(index=False):
        sub = wrong[wrong["group"].isin(["human", row.group])]
        table = pd.crosstab(sub["group"] == "human", sub["error_type"]).to_numpy()
        # reference: SOURCES.md#scipy-live — chi2_contingency with the G statistic
        g, p, dof, _ = stats.chi2_contingency(table, correction=False, lambda_="log-likelihood")
        assert row.statistic == pytest.approx(g, rel=1e-10) and row.df == dof
        if row.test == "g_test":
            assert row.p_val == pytest.approx(p, rel=1e-10)
        # reference: SOURCES.md#scipy-live — scipy.stats.contingency.association (Cramér's V)
        v = stats.contingency.association(table, method="cramer", correction=False)
        assert row.cramers_v == pytest.approx(v, rel=1e-10)


def test_small_counts_use_a_permutation_test_that_agrees_with_fishers_exact():
    # 2 x 2 table [[5, 1], [1, 5]] of error types: human vs machine
    rows = []
    for group, kind, counts in (("human", "human", (5, 1)), ("bot", "machine", (1, 5))):
        for etype, k in zip(("a", "b"), counts, strict=True):
            rows += [dict(kind=kind, group=group, family="f", correct=False, error_type=etype)] * k
    t = pd.DataFrame(rows)
    out = error_type_tests(t, n_perm=19999, seed=1).iloc[0]
    assert out["test"] == "permutation_g"
    # reference: SOURCES.md#scipy-live — fisher_exact, two-sided; for this symmetric table the G
    # and probability orderings coincide, so the permutation p estimates the same exact p (0.0801)
    exact = stats.fisher_exact([[5, 1], [1, 5]]).pvalue
    assert out["p_val"] == pytest.approx(exact, abs=0.01)


def test_log_odds_ratios_match_statsmodels(trials):
    from statsmodels.stats.contingency_tables import Table2x2

    odds = error_type_odds(trials)
    wrong = trials[trials["correct"] == False]  # noqa: E712
    for row in odds.itertuples(index=False):
        m = wrong[wrong["group"] == row.group]["error_type"]
        h = wrong[wrong["kind"] == "human"]["error_type"]
        table = np.array(
            [[(m == row.error_type).sum(), (m != row.error_type).sum()],
             [(h == row.error_type).sum(), (h != row.error_type).sum()]], float,
        )  # fmt: skip
        if (table == 0).any():
            table += 0.5
        # reference: SOURCES.md#scipy-live — statsmodels Table2x2 (log odds ratio, Woolf SE)
        ref = Table2x2(table)
        assert row.log_odds_ratio == pytest.approx(ref.log_oddsratio, rel=1e-10)
        assert row.se == pytest.approx(ref.log_oddsratio_se, rel=1e-10)


# -- robustness ----------------------------------------------------------------------------------
def test_robustness_accuracies_on_a_hand_made_table():
    rows = []
    for resp, kind, group, correct_parent, correct_iso in (
        ("P1", "human", "human", [1, 1, 1, 0], [1, 1, 0, 0]),
        ("m-s0", "machine", "m", [1, 1, 1, 1], [0, 0, 0, 1]),
    ):
        for k in range(4):
            base = dict(respondent=resp, kind=kind, group=group, family="f", parent=f"p{k}")
            rows.append(base | dict(item=f"p{k}", isomorph=False, correct=bool(correct_parent[k])))
            rows.append(base | dict(item=f"i{k}", isomorph=True, correct=bool(correct_iso[k])))
    rows.append(dict(respondent="P1", kind="human", group="human", family="f", parent="lonely",
                     item="lonely", isomorph=False, correct=True))  # fmt: skip
    r = robustness(pd.DataFrame(rows)).set_index("group")
    assert list(r.reset_index().columns) == list(ROBUSTNESS_COLUMNS)
    # the parent without isomorphs is left out
    assert r.loc["human", "n_parent"] == 4 and r.loc["human", "acc_parent"] == 0.75
    assert r.loc["m", "acc_isomorph"] == 0.25 and r.loc["m", "difference"] == -0.75
    se = np.sqrt(0.25 * 0.75 / 4 + 0)
    assert r.loc["m", "se"] == pytest.approx(se)


def _two_pl_trials(b, n_people=40, seed=3):
    rng = np.random.default_rng(seed)
    theta = rng.normal(size=n_people)
    p = 1 / (1 + np.exp(-(theta[:, None] - np.asarray(b)[None, :])))
    correct = rng.random(p.shape) < p
    rows = [
        {
            "kind": "human",
            "respondent": f"P{i:03d}",
            "item": f"i{j:02d}",
            "family": "strings" if j % 2 else "grids",
            "correct": bool(correct[i, j]),
        }
        for i in range(n_people)
        for j in range(len(b))
    ]
    df = pd.DataFrame(rows)
    df["correct"] = df["correct"].astype("boolean")
    return df


def test_difficulty_reliability_is_high_with_spread_items_and_near_zero_without():
    from twofold.analysis.compare import difficulty_reliability

    spread = difficulty_reliability(_two_pl_trials(np.linspace(-3, 3, 30)), n_splits=100)
    flat = difficulty_reliability(_two_pl_trials(np.zeros(30)), n_splits=100)
    hi, lo = spread.set_index("family"), flat.set_index("family")
    assert hi.loc["all", "split_half"] > 0.7
    assert abs(lo.loc["all", "split_half"]) < 0.2
    assert set(hi.index) == {"all", "grids", "strings"}
    for r in (hi.loc["all"], lo.loc["all"]):
        # reference: SOURCES.md#spearman-brown — Spearman 1910 / Brown 1910 (from memory)
        assert r["spearman_brown"] == pytest.approx(2 * r["split_half"] / (1 + r["split_half"]))
        assert r["q_low"] <= r["split_half"] <= r["q_high"]


def test_difficulty_reliability_is_nan_with_too_few_people():
    from twofold.analysis.compare import difficulty_reliability
    from twofold.study.exceptions import DegenerateWarning

    with pytest.warns(DegenerateWarning, match="too few people"):
        out = difficulty_reliability(
            _two_pl_trials(np.linspace(-2, 2, 10), n_people=3), by_family=False
        )
    assert np.isnan(out["split_half"].iloc[0])


# -- pair agreement by blocks of matrix products -------------------------------------------------
def _random_trials(n_humans, n_machines, n_items, seed, missing=0.2):
    """Respondents answering a random subset of items (each kept with prob 1 - missing)."""
    rng = np.random.default_rng(seed)
    rows = []
    for r in range(n_humans + n_machines):
        kind = "human" if r < n_humans else "machine"
        group = "human" if kind == "human" else f"bot{r % 2}"
        p = rng.uniform(0.2, 0.9)
        for i in range(n_items):
            if rng.random() < missing:
                continue
            rows.append((f"r{r:03d}", kind, group, f"i{i:03d}", bool(rng.random() < p)))
    return pd.DataFrame(rows, columns=["respondent", "kind", "group", "item", "correct"])


@pytest.mark.parametrize("max_cells", [1, 7, 1 << 21])
def test_block_pair_kappa_equals_scikit_learn_on_random_pairs(max_cells):
    t = _random_trials(9, 4, 30, seed=11)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DegenerateWarning)
        pairs = error_consistency(t, human_pairs="all", min_items=1, max_cells=max_cells)
    assert len(pairs) == 13 * 12 // 2
    wide = t.pivot(index="item", columns="respondent", values="correct")
    for row in pairs.itertuples(index=False):
        both = wide[[row.respondent_a, row.respondent_b]].dropna()
        a, b = both.iloc[:, 0].astype(bool), both.iloc[:, 1].astype(bool)
        assert row.n_items == len(both) and row.p_a == pytest.approx(a.mean())
        if np.isnan(row.kappa):
            assert a.nunique() == b.nunique() == 1 and a.iloc[0] == b.iloc[0]
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ref = cohen_kappa_score(a, b)
        # reference: scikit-learn cohen_kappa_score on each pair's shared items
        np.testing.assert_allclose(row.kappa, ref, rtol=1e-10, atol=1e-12)


def test_default_pairs_are_those_with_a_machine(trials):
    some = error_consistency(trials)
    every = error_consistency(trials, human_pairs="all")
    assert set(some["pair_type"]) == {"human-machine", "machine-machine"}
    key = ["respondent_a", "respondent_b"]
    sub = every[every["pair_type"] != "human-human"].sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(some.sort_values(key).reset_index(drop=True), sub)


def test_streamed_distribution_equals_the_summary_of_every_pair(trials):
    full = error_consistency_summary(error_consistency(trials, human_pairs="all"))
    streamed = error_consistency_distribution(trials, max_cells=5)
    assert list(streamed.columns) == list(CONSISTENCY_SUMMARY_COLUMNS)
    cols = ["group_a", "group_b", "pair_type", "n_pairs", "n_defined", "quantiles"]
    pd.testing.assert_frame_equal(streamed[cols], full[cols])
    num = ["mean", "sd", "median", "q_low", "q_high"]
    np.testing.assert_allclose(streamed[num].to_numpy(), full[num].to_numpy(), rtol=1e-12)


def test_binned_quantiles_stay_within_half_a_bin_of_the_exact_ones():
    t = _random_trials(60, 0, 40, seed=4, missing=0.0)
    exact = error_consistency_distribution(t)
    binned = error_consistency_distribution(t, exact_limit=100, max_cells=50)
    assert exact["quantiles"].tolist() == ["exact"] and binned["quantiles"].tolist() == ["binned"]
    assert exact["n_pairs"].iloc[0] == binned["n_pairs"].iloc[0] == 60 * 59 // 2
    np.testing.assert_allclose(binned[["mean", "sd"]], exact[["mean", "sd"]], rtol=1e-10)
    half_bin = 1 / 65536
    for col in ("median", "q_low", "q_high"):
        assert abs(binned[col].iloc[0] - exact[col].iloc[0]) <= half_bin


def test_permutation_test_uses_the_hypergeometric_law_without_materialising_permutations():
    # reference: the permutation law of a 2 x k table with fixed margins is multivariate
    # hypergeometric (common practice); 40,000 errors x 9999 permutations would need 3 GB as a
    # permutation array
    rows = [("human", "human", "a")] * 30000 + [("human", "human", "b")] * 9990
    rows += [("human", "human", "c")] * 3 + [("machine", "bot", "a")] * 5
    rows += [("machine", "bot", "c")] * 2
    t = pd.DataFrame(rows, columns=["kind", "group", "error_type"]).assign(
        family="f", correct=False, respondent="x", item="i"
    )
    out = error_type_tests(t, n_perm=999, seed=1)
    assert out["test"].iloc[0] == "permutation_g"
    assert 0 < out["p_val"].iloc[0] < 0.01  # type c is 100x more common among the machine's
