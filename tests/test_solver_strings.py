"""Tests of the ``strings-ref`` reference solver and the ``literal`` baseline."""

from __future__ import annotations

import pytest
from twofold.experiments.solvers import Answer, builtin_solvers, make_builtin
from twofold.experiments.solvers.strings import StringsReference
from twofold.study.exceptions import SolverError
from twofold.study.families import Rejected, get_family
from twofold.study.generate import item_rng
from twofold.study.render import render

FAM = get_family("strings")


def items(params, n, mode="generate", seed=21):
    out, i = [], 0
    while len(out) < n:
        s, rng = item_rng(seed, "solver", str(sorted(params.items())), i)
        i += 1
        try:
            out.append(
                FAM.generate(
                    params,
                    rng,
                    seed=s,
                    modes=[mode],
                    distractor_scheme="near-miss" if mode == "select" else None,
                    n_choices=4,
                )
            )
        except Rejected:
            continue
    return out


def accuracy(solver, its, mode="generate"):
    hits = 0
    for it in its:
        ans = solver.solve(render(it, "structured", mode), mode)
        hits += FAM.score(it, ans.answer, mode).correct
    return hits / len(its)


def test_registered_with_descriptions():
    names = builtin_solvers()
    assert "strings-ref" in names and "literal" in names
    assert isinstance(make_builtin("strings-ref", seed=2, budget=7), StringsReference)


@pytest.mark.parametrize("mode", ["generate", "select"])
def test_reference_solves_default_items(mode):
    its = items({}, 40, mode)
    assert accuracy(make_builtin("strings-ref"), its, mode) >= 0.9


def test_reference_is_worse_on_long_mixed_strings_and_at_a_tiny_budget():
    easy = items({}, 40)
    hard = items({"length": 8, "grouping": "mixed"}, 40)
    ref = make_builtin("strings-ref")
    acc_easy, acc_hard = accuracy(ref, easy), accuracy(ref, hard)
    assert acc_hard < acc_easy - 0.1
    tiny = make_builtin("strings-ref", budget=3)
    assert accuracy(tiny, easy) < acc_easy - 0.2


def test_longer_strings_cost_more_effort():
    ref = make_builtin("strings-ref", budget=10_000)
    eff = {}
    for length in (3, 8):
        its = items({"length": length, "rule": "succ-last"}, 10)
        eff[length] = sum(
            ref.solve(render(it, "structured", "generate"), "generate").effort for it in its
        )
    assert eff[8] > 2 * eff[3]


def test_answer_carries_effort_explanation_and_ranking():
    it = items({"rule": "succ-last"}, 1)[0]
    ans = make_builtin("strings-ref").solve(render(it, "structured", "generate"), "generate")
    assert isinstance(ans, Answer)
    assert ans.answer == it.answer
    assert ans.effort_unit == "programs" and 1 <= ans.effort <= 100
    assert "successor" in ans.explanation
    assert ans.raw[0]["answer"] == it.answer
    posts = [r["posterior"] for r in ans.raw]
    assert abs(sum(posts) - 1) < 1e-3
    assert all(r["reading"] for r in ans.raw)


def test_the_seed_changes_the_search_order_but_results_are_reproducible():
    its = items({"length": 6, "grouping": "mixed"}, 15)
    views = [render(it, "structured", "generate") for it in its]

    def run(seed):
        solver = make_builtin("strings-ref", seed=seed, budget=20)
        return [(a.answer, a.effort) for a in (solver.solve(v, "generate") for v in views)]

    assert run(1) == run(1)
    assert run(1) != run(2)
    # order of solving does not matter
    solver = make_builtin("strings-ref", seed=1, budget=20)
    backwards = [solver.solve(v, "generate").answer for v in reversed(views)]
    assert backwards[::-1] == [a for a, _ in run(1)]


def test_reference_never_reads_the_answer():
    it = items({"rule": "reverse"}, 1)[0]
    view = render(it, "structured", "generate")
    assert "answer" not in view
    tampered = it.replace(prefix="str", answer="zzz", accepted=[])
    ref = make_builtin("strings-ref")
    a1 = ref.solve(view, "generate").answer
    a2 = ref.solve(render(tampered, "structured", "generate"), "generate").answer
    assert a1 == a2 == it.answer


def test_literal_baseline_copies_the_change_literally():
    its = items({"rule": "succ-last"}, 20)
    lit = make_builtin("literal")
    for it in its:
        ans = lit.solve(render(it, "structured", "generate"), "generate")
        expected = it.stimulus["target"][:-1] + it.stimulus["changed"][-1]
        assert ans.answer == expected
        assert FAM.score(it, ans.answer, "generate").error_type in ("literal", "no-change")
    assert accuracy(lit, items({}, 40)) < 0.4


def test_literal_baseline_in_select_mode():
    its = items({}, 30, "select")
    acc = accuracy(make_builtin("literal"), its, "select")
    assert acc < accuracy(make_builtin("strings-ref"), its, "select")


def test_bad_options_and_views_are_named():
    with pytest.raises(SolverError, match="field 'budget'"):
        make_builtin("strings-ref", budget=0)
    with pytest.raises(SolverError, match="field 'seed'"):
        make_builtin("strings-ref", seed=-1)
    ref = make_builtin("strings-ref")
    with pytest.raises(SolverError, match="field 'view'"):
        ref.solve("defg -> defh", "generate")
    it = items({}, 1)[0]
    with pytest.raises(SolverError, match="field 'mode'"):
        ref.solve(render(it, "structured", "generate"), "guess")


def test_exhausted_budget_falls_back_to_the_target():
    it = items({"rule": "extend", "length": 8, "grouping": "mixed"}, 1)[0]
    view = render(it, "structured", "generate")
    fallbacks = 0
    for seed in range(20):
        ans = make_builtin("strings-ref", seed=seed, budget=1).solve(view, "generate")
        assert ans.effort == 1
        if ans.explanation.startswith("no description"):
            fallbacks += 1
            assert ans.answer == it.stimulus["target"]
            assert ans.raw == []
    assert fallbacks > 0
