"""The matrices reference solver: accurate at default difficulty, weaker when items get harder."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from twofold.experiments.solvers import builtin_solvers, make_builtin
from twofold.study import load_bank
from twofold.study.exceptions import InputError
from twofold.study.families import Rejected, get_family
from twofold.study.generate import item_rng
from twofold.study.render import render

FAM = get_family("matrices")


def items(params, n=40, *, seed=0, scheme="one-off"):
    out, attempt = [], 0
    while len(out) < n:
        s, rng = item_rng(seed, "solver-test", repr(sorted(params.items())), attempt)
        attempt += 1
        try:
            out.append(
                FAM.generate(
                    params,
                    rng,
                    seed=s,
                    modes=["generate", "select"],
                    distractor_scheme=scheme,
                    n_choices=8,
                )
            )
        except Rejected:
            continue
    return out


def accuracy(bank, mode, **options):
    solver = make_builtin("matrices-ref", **options)
    hits, efforts = [], []
    for it in bank:
        ans = solver.solve(render(it, "structured", mode), mode)
        assert ans.effort_unit == "rules"
        efforts.append(ans.effort)
        hits.append(FAM.score(it, ans.answer, mode).correct)
    return float(np.mean(hits)), float(np.mean(efforts))


DEFAULT = items({})


def test_registered_with_structured_medium():
    assert "matrices-ref" in builtin_solvers()
    solver = make_builtin("matrices-ref")
    assert solver.medium == "structured"


@pytest.mark.parametrize("mode", ["generate", "select"])
def test_default_items_are_solved(mode):
    acc, effort = accuracy(DEFAULT, mode)
    assert acc >= 0.9
    assert 5 <= effort <= 24


@pytest.mark.parametrize("mode", ["generate", "select"])
def test_harder_items_and_smaller_budgets_lower_accuracy(mode):
    base, _ = accuracy(DEFAULT, mode)
    many, effort_many = accuracy(items({"n_rules": 5, "rule_set": "three-sum"}, n=30), mode)
    noisy, _ = accuracy(items({"n_rules": 3, "n_irrelevant": 2}, n=60), mode)
    tiny, _ = accuracy(DEFAULT, mode, budget=6)
    assert many < base - 0.3
    assert noisy < base - 0.15
    assert tiny < base - 0.3
    # with a budget large enough for the whole rule space, hard items are solved again
    big, effort_big = accuracy(
        items({"n_rules": 5, "rule_set": "three-sum"}, n=30), mode, budget=40
    )
    assert big >= 0.9 and effort_big > effort_many - 1e-9


def test_effort_stays_within_budget_and_explains():
    solver = make_builtin("matrices-ref", budget=10, seed=3)
    for it in DEFAULT[:10]:
        ans = solver.solve(render(it, "structured", "generate"), "generate")
        assert ans.effort <= 10
        assert "rule hypotheses" in ans.explanation


def test_seed_makes_runs_repeatable():
    bank = items({"n_rules": 4}, n=15)
    a = [
        make_builtin("matrices-ref", seed=7, budget=12)
        .solve(render(it, "structured", "select"), "select")
        .answer
        for it in bank
    ]
    b = [
        make_builtin("matrices-ref", seed=7, budget=12)
        .solve(render(it, "structured", "select"), "select")
        .answer
        for it in bank
    ]
    assert a == b


def test_bad_options_are_named():
    with pytest.raises(InputError, match="budget"):
        make_builtin("matrices-ref", budget=-1)
    with pytest.raises(InputError, match="seed"):
        make_builtin("matrices-ref", seed="x")


def test_version_1_items_are_solved():
    # a bank written by family version 1 (five attributes, its own shapes and rule names)
    bank = load_bank(Path(__file__).parent / "data" / "matrices_v1")
    assert {it.family_version for it in bank} == {"1"}
    for mode in ("generate", "select"):
        acc, effort = accuracy(bank.items, mode, budget=40)
        assert acc >= 0.9 and effort > 5
        # with too small a budget the version 1 items, like version 2 items, are missed
        tiny, _ = accuracy(bank.items, mode, budget=4)
        assert tiny < acc - 0.3
