"""Answer positions: balanced generation, reshuffled isomorphs, the audit's test and baseline."""

from __future__ import annotations

import itertools
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats
from twofold.study import Bank, generate_bank, get_family, load_study, parse_spec, render
from twofold.study import audit as audit_mod
from twofold.study.audit import (
    answer_positions,
    audit_bank,
    commonest_positions,
    position_uniformity,
)
from twofold.study.positions import (
    balanced_positions,
    place_answer,
    reshuffle_variant,
    variant_positions,
)
from twofold.study.variants import vary_bank

EXAMPLE = Path(__file__).resolve().parents[1] / "example_study"


def select_bank(n=24, seed=3, n_choices=8, family="matrices", **extra):
    spec = {
        "seed": seed,
        "families": {
            family: {"n": n, "modes": ["select"], "n_choices": n_choices, **extra},
        },
    }
    return generate_bank(parse_spec(spec))


@pytest.fixture(scope="module")
def example_bank():
    return generate_bank(load_study(EXAMPLE).generation_spec())


@pytest.fixture(scope="module")
def balanced():
    return select_bank()


def position_row(rows, family):
    (row,) = [r for r in rows if r["family"] == family]
    return row


# -- placement ------------------------------------------------------------------------------
@pytest.mark.parametrize(("n", "k"), [(1, 8), (7, 8), (8, 8), (20, 8), (41, 4), (5, 2)])
def test_balanced_positions_counts_differ_by_at_most_one(n, k):
    pos = balanced_positions(n, k, np.random.default_rng(n * k))
    assert len(pos) == n and set(pos) <= set(range(1, k + 1))
    counts = [pos.count(j) for j in range(1, k + 1)]
    assert max(counts) - min(counts) <= 1


def test_variant_positions_are_balanced_and_avoid_the_parents():
    rng = np.random.default_rng(0)
    parents = balanced_positions(20, 8, rng)
    var = variant_positions(parents, 8, rng)
    counts = Counter(var)
    assert max(counts.values()) - min(counts[j] for j in range(1, 9)) <= 1
    assert all(v != p for v, p in zip(var, parents, strict=True))


def test_place_answer_moves_the_answer_and_keeps_the_choices(balanced):
    it = next(i for i in balanced.items if i.answer_choice != 5)
    moved = place_answer(it, 5, np.random.default_rng(1))
    assert moved.answer_choice == 5
    assert sorted(map(str, moved.choices)) == sorted(map(str, it.choices))
    assert moved.id != it.id and moved.stimulus == it.stimulus and moved.answer == it.answer
    fam = get_family(it.family)
    assert fam.score(moved, 5, "select").correct
    assert not fam.score(moved, 1, "select").correct
    assert fam.check(moved) == []


def test_generation_spreads_answer_positions_evenly(balanced):
    (row,) = answer_positions(balanced.items)
    assert row["n_items"] == 24
    assert row["counts"] == [3] * 8
    assert not row["flagged"]


@pytest.mark.parametrize("family", ["strings", "grids"])
def test_other_select_families_are_balanced_too(family):
    bank = select_bank(n=12, n_choices=4, family=family)
    (row,) = answer_positions(bank.items)
    assert row["counts"] == [3, 3, 3, 3]


# -- the audit -------------------------------------------------------------------------------
def test_audit_flags_a_bank_with_every_answer_in_one_position(balanced):
    rng = np.random.default_rng(2)
    skewed = Bank.from_items([place_answer(it, 3, rng) for it in balanced.items])
    report = audit_bank(skewed, picture_sample=0)
    row = position_row(report["positions"], "matrices")
    assert row["counts"] == [0, 0, 24, 0, 0, 0, 0, 0]
    assert row["flagged"] and row["p_val"] < 1e-3
    assert row["commonest_position"] == 3 and row["commonest_share"] == 1.0
    kinds = [f["kind"] for f in report["flags"]]
    assert "answer-position" in kinds
    (short,) = report["shortcuts"]
    assert short["position_accuracy"] == 1.0


def test_audit_does_not_flag_a_balanced_bank(balanced):
    report = audit_bank(balanced, picture_sample=0)
    assert not position_row(report["positions"], "matrices")["flagged"]
    assert not [f for f in report["flags"] if f["kind"] == "answer-position"]
    (short,) = report["shortcuts"]
    assert short["position_accuracy"] == pytest.approx(3 / 24)


def test_overall_row_pools_families_with_the_same_number_of_choices():
    spec = {
        "seed": 5,
        "families": {
            "matrices": {"n": 8, "modes": ["select"], "n_choices": 4},
            "strings": {"n": 8, "modes": ["select"], "n_choices": 4},
        },
    }
    rows = answer_positions(generate_bank(parse_spec(spec)).items)
    assert [r["family"] for r in rows] == ["matrices", "strings", "all families"]
    assert rows[-1]["n_items"] == 16 and rows[-1]["counts"] == [4, 4, 4, 4]


# -- the uniformity test against reference computations ---------------------------------
def test_chi_square_branch_matches_scipy():
    counts = [12, 7, 9, 16, 6, 10]  # expected 10 per position: the chi-square branch
    got = position_uniformity(counts)
    ref = stats.chisquare(counts)
    assert got["method"] == "chi-square"
    # reference: SOURCES.md#position-uniformity — scipy.stats.chisquare (live)
    assert_allclose(got["statistic"], ref.statistic, rtol=1e-12)
    assert_allclose(got["p_val"], ref.pvalue, rtol=1e-10)


def _exact_by_enumeration(counts):
    """Exact multinomial test by brute force over scipy.stats.multinomial.pmf."""
    n, k = sum(counts), len(counts)
    dist = stats.multinomial(n, [1 / k] * k)
    p_obs = dist.pmf(counts)
    total = 0.0
    for vec in itertools.product(range(n + 1), repeat=k):
        if sum(vec) == n:
            p = dist.pmf(vec)
            if p <= p_obs * (1 + 1e-9):
                total += p
    return total


@pytest.mark.parametrize("counts", [[5, 0, 1, 0], [2, 2, 1, 1], [0, 0, 6, 0], [3, 1, 0, 2, 0]])
def test_exact_branch_matches_the_multinomial_pmf(counts):
    got = position_uniformity(counts)
    assert got["method"] == "exact multinomial"
    # reference: SOURCES.md#position-uniformity — scipy.stats.multinomial.pmf (live)
    assert_allclose(got["p_val"], _exact_by_enumeration(counts), rtol=1e-9)


def test_monte_carlo_branch_agrees_with_the_exact_test(monkeypatch):
    counts = [4, 0, 1, 0, 2]
    exact = position_uniformity(counts)["p_val"]
    monkeypatch.setattr(audit_mod, "EXACT_MAX_OUTCOMES", 0)
    mc = position_uniformity(counts, seed=1)
    assert mc["method"] == "monte-carlo multinomial"
    se = np.sqrt(exact * (1 - exact) / audit_mod.MC_DRAWS)
    assert abs(mc["p_val"] - exact) < 4 * se + 1 / audit_mod.MC_DRAWS


def test_uniformity_test_holds_its_level_on_balanced_draws():
    # under the null (positions drawn uniformly) the test rejects at about its nominal rate
    rng = np.random.default_rng(11)
    rejects = [
        position_uniformity(rng.multinomial(20, [0.25] * 4).tolist())["p_val"] < 0.05
        for _ in range(300)
    ]
    assert np.mean(rejects) <= 0.05 + 3 * np.sqrt(0.05 * 0.95 / 300)


# -- the position-only baseline ---------------------------------------------------------
def test_position_only_accuracy_equals_the_commonest_share(example_bank):
    from twofold.experiments.solvers import make_builtin

    rows = answer_positions(example_bank.items)
    row = position_row(rows, "matrices")
    solver = make_builtin("position-only", position=row["commonest_position"])
    best = commonest_positions(example_bank.items)
    assert best["matrices"] == row["commonest_position"]
    select = [it for it in example_bank.items if it.family == "matrices"]
    hits = []
    for it in select:
        ans = solver.solve(render(it, "structured", "select"), "select")
        hits.append(get_family(it.family).score(it, ans.answer, "select").correct)
    assert np.mean(hits) == pytest.approx(row["commonest_share"])
    assert solver.solve(render(select[0], "structured", "select"), "generate").answer is None


def test_position_only_follows_per_family_positions(balanced):
    from twofold.experiments.solvers import make_builtin
    from twofold.study.exceptions import SolverError

    solver = make_builtin("position-only", positions={"matrices": 6})
    it = balanced.items[0]
    assert solver.solve(render(it, "structured", "select"), "select").answer == 6
    with pytest.raises(SolverError, match="field 'position': got 0"):
        make_builtin("position-only", position=0)


# -- isomorphs --------------------------------------------------------------------------
def test_isomorphs_reshuffle_the_choices_and_still_score(example_bank):
    by_id = {it.id: it for it in example_bank.items}
    variants = [it for it in example_bank.items if it.variant_of and it.choices is not None]
    assert len(variants) == 20
    for var in variants:
        parent = by_id[var.variant_of]
        assert var.answer_choice != parent.answer_choice
        fam = get_family(var.family)
        assert fam.score(var, var.answer_choice, "select").correct
        assert not fam.score(var, parent.answer_choice, "select").correct


def test_vary_bank_gives_isomorphs_their_own_order(balanced):
    new, counts = vary_bank(balanced, "swap-shapes", seed=4)
    by_id = {it.id: it for it in new.items}
    made = [it for it in new.items if it.variant_of]
    assert counts["made"] == len(made) > 10
    for var in made:
        parent = by_id[var.variant_of]
        assert var.answer_choice != parent.answer_choice
        assert get_family(var.family).score(var, var.answer_choice, "select").correct


def test_reshuffle_leaves_items_without_choices_alone(example_bank):
    it = next(i for i in example_bank.items if i.family == "contrast")
    assert reshuffle_variant(it, it, None, np.random.default_rng(0)) is it
