"""Tests of the ``contrast-ref`` reference solver (Bayesian rule induction)."""

from __future__ import annotations

import pytest
from twofold.experiments.solvers import Answer, builtin_solvers, make_builtin
from twofold.experiments.solvers.contrast import ContrastReference
from twofold.study.exceptions import SolverError
from twofold.study.families import Rejected, get_family
from twofold.study.families.contrast import grammar, parse_rule
from twofold.study.generate import item_rng
from twofold.study.render import render

FAM = get_family("contrast")
MODES = ["select", "generate"]


def items(params, n, seed=17):
    p = {**FAM.default_params(), **params}
    out, i = [], 0
    while len(out) < n:
        s, rng = item_rng(seed, "solver", str(sorted(params.items())), i)
        i += 1
        try:
            out.append(
                FAM.generate(
                    p, rng, seed=s, modes=MODES, distractor_scheme="per-panel", n_choices=2
                )
            )
        except Rejected:
            continue
    return out


def run(solver, its, mode):
    hits, effort = 0, []
    for it in its:
        ans = solver.solve(render(it, "structured", mode), mode)
        assert isinstance(ans, Answer) and ans.effort_unit == "rules"
        hits += FAM.score(it, ans.answer, mode).correct
        effort.append(ans.effort)
    return hits / len(its), sum(effort) / len(effort)


@pytest.fixture(scope="module")
def default_items():
    return items({}, 30)


def test_registered():
    assert "contrast-ref" in builtin_solvers()
    solver = make_builtin("contrast-ref", seed=3, budget=5000, noise=0.05)
    assert isinstance(solver, ContrastReference) and solver.medium == "structured"
    assert solver.max_length == 3  # 2,295 rules reach length 3; length 4 needs 8,935


@pytest.mark.parametrize("mode", MODES)
def test_reference_solves_default_items(default_items, mode):
    acc, _ = run(make_builtin("contrast-ref"), default_items, mode)
    assert acc >= 0.9


def test_generate_answer_is_a_rule_in_the_notation_and_explained(default_items):
    it = default_items[0]
    ans = make_builtin("contrast-ref").solve(render(it, "structured", "generate"), "generate")
    parse_rule(ans.answer)  # parses
    assert ans.explanation.startswith("most probable rule: ")
    assert ans.answer in ans.explanation
    assert len(ans.raw["p_a"]) == len(it.stimulus["test"])


def test_worse_on_long_rules_and_at_a_tiny_budget(default_items):
    ref = make_builtin("contrast-ref")
    hard = items({"length": 6, "distractors": 4}, 20)
    for mode in MODES:
        easy_acc, easy_effort = run(ref, default_items, mode)
        hard_acc, hard_effort = run(ref, hard, mode)
        tiny_acc, tiny_effort = run(make_builtin("contrast-ref", budget=300), default_items, mode)
        assert hard_acc <= easy_acc - 0.3
        assert tiny_acc <= easy_acc - 0.3
        assert hard_effort > easy_effort > tiny_effort


def test_effort_grows_with_rule_length():
    ref = make_builtin("contrast-ref")
    short = run(ref, items({"length": 2}, 10), "select")[1]
    longer = run(ref, items({"length": 4}, 10), "select")[1]
    assert longer > short
    assert short == grammar().count_up_to(3)  # shortest consistent rule 2, searched one beyond


def test_deterministic_and_reads_only_the_view(default_items):
    it = default_items[1]
    view = render(it, "structured", "select")
    assert "answer" not in view
    a1 = make_builtin("contrast-ref", seed=4).solve(view, "select")
    a2 = make_builtin("contrast-ref", seed=4).solve(view, "select")
    assert a1 == a2


def test_noise(default_items):
    # one set-A panel copied into set B: no rule is consistent any more, so the exact learner
    # falls back to a noisy likelihood and the noisy learner uses its own; both stay far above
    # guessing (1/16 for four test panels)
    its = default_items[:16]
    for noise in (0.0, 0.05):
        hits = 0
        for it in its:
            view = render(it, "structured", "select")
            view["sets"]["B"] = view["sets"]["B"] + [view["sets"]["A"][0]]
            ans = make_builtin("contrast-ref", noise=noise).solve(view, "select")
            hits += ans.answer == it.answer["labels"]
            assert all(0.0 <= p <= 1.0 for p in ans.raw["p_a"])
        assert hits / len(its) >= 0.25
    # on clean sets a large noise lets short, slightly wrong rules outweigh the hidden one
    exact, _ = run(make_builtin("contrast-ref"), its, "select")
    noisy, _ = run(make_builtin("contrast-ref", noise=0.2), its, "select")
    assert noisy < exact


@pytest.mark.parametrize(
    ("opts", "field"),
    [
        ({"budget": 0}, "budget"),
        ({"noise": 0.5}, "noise"),
        ({"seed": -1}, "seed"),
        ({"prior": 1.0}, "prior"),
        ({"budget": True}, "budget"),
    ],
)
def test_bad_options_name_the_field(opts, field):
    with pytest.raises(SolverError, match=field):
        make_builtin("contrast-ref", **opts)


def test_bad_view_and_mode():
    ref = make_builtin("contrast-ref")
    with pytest.raises(SolverError, match="view"):
        ref.solve("not a view", "select")
    with pytest.raises(SolverError, match="view"):
        ref.solve({"sets": {}}, "select")
    with pytest.raises(SolverError, match="mode"):
        ref.solve({}, "choose")


def _brute_force_predictive(view, *, max_length, noise, prior):
    """Posterior predictive by plain enumeration over Python ints (no grouping, no pruning)."""
    from twofold.study.families.contrast import leaf_vectors, panels_from_stimulus

    panels, n_a, n_b = panels_from_stimulus(view)
    full = (1 << len(panels)) - 1
    am, train = (1 << n_a) - 1, (1 << (n_a + n_b)) - 1
    g = grammar()
    vec = [int(v) for v in leaf_vectors(panels)]
    lits = [(v, int(g.lengths[k])) for k, v in enumerate(vec)]
    lits += [(~v & full, int(g.lengths[k]) + 1) for k, v in enumerate(vec)]
    rules = [(v, ln) for v, ln in lits if ln <= max_length]
    short = [(v, ln) for v, ln in lits if ln <= max_length - 2]
    for a in range(len(short)):
        for b in range(a + 1, len(short)):
            (va, la), (vb, lb) = short[a], short[b]
            if la + lb + 1 <= max_length:
                rules.append((va & vb, la + lb + 1))
            if la + lb + 2 <= max_length:
                rules.append((~(va & vb) & full, la + lb + 2))

    def weight(v, ln):
        miss = bin((v ^ am) & train).count("1")
        n = bin(train).count("1")
        if noise == 0:
            lik = 1.0 if miss == 0 else 0.0
        else:
            lik = noise**miss * (1 - noise) ** (n - miss)
        return prior**ln * lik

    ws = [(v, weight(v, ln), ln) for v, ln in rules]
    if noise == 0:
        l_min = min(ln for _, w, ln in ws if w > 0)
        ws = [(v, w, ln) for v, w, ln in ws if ln <= min(max_length, l_min + 1)]
    total = sum(w for _, w, _ in ws)
    off = n_a + n_b
    n_test = len(panels) - off
    return [sum(w for v, w, _ in ws if v >> (off + k) & 1) / total for k in range(n_test)]


@pytest.mark.parametrize(("budget", "noise"), [(8935, 0.0), (310, 0.1), (2295, 0.1)])
def test_posterior_matches_plain_bayesian_model_averaging(default_items, budget, noise):
    # reference: SOURCES.md#bayesian-concept-learning — averaging over a finite hypothesis
    # space, P(y | x, D) = sum_h P(y | x, h) P(h | D) (Tenenbaum & Griffiths 2001, eq. 2; from
    # memory), computed by plain enumeration without the solver's grouping of equal truth vectors
    ref = make_builtin("contrast-ref", budget=budget, noise=noise)
    for it in default_items[:4]:
        view = render(it, "structured", "select")
        got = ref.solve(view, "select").raw["p_a"]
        want = _brute_force_predictive(
            view, max_length=ref.max_length, noise=noise, prior=ref.prior
        )
        assert got == pytest.approx([round(p, 4) for p in want], abs=2e-4)
