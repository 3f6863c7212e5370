"""Tests of the grids reference solver and the copy-input baseline."""

from __future__ import annotations

import numpy as np
import pytest
from twofold.experiments.solvers import builtin_solvers, make_builtin
from twofold.study.exceptions import InputError
from twofold.study.families import Rejected, get_family
from twofold.study.families import grids as G
from twofold.study.generate import item_rng
from twofold.study.render import render

FAM = get_family("grids")


def items(n: int, *, mode: str = "generate", key: str = "solver", **params):
    """``n`` valid items at ``params`` (defaults elsewhere), made as the bank machinery would."""
    p = FAM.default_params() | params
    out = []
    idx = 0
    while len(out) < n:
        s, rng = item_rng(17, key, idx)
        idx += 1
        try:
            out.append(
                FAM.generate(
                    p,
                    rng,
                    seed=s,
                    modes=[mode],
                    distractor_scheme="near-miss" if mode == "select" else None,
                    n_choices=FAM.default_choices,
                )
            )
        except Rejected:
            continue
    return out


def accuracy(solver, its, mode="generate"):
    hits = 0
    efforts = []
    for it in its:
        ans = solver.solve(render(it, "structured", mode), mode)
        hits += FAM.score(it, ans.answer, mode).correct
        efforts.append(ans.effort)
    return hits / len(its), float(np.median(efforts))


@pytest.fixture(scope="module")
def default_items():
    return items(30)


def test_registered():
    names = builtin_solvers()
    assert "grids-ref" in names and "copy-input" in names
    assert make_builtin("grids-ref").medium == "structured"


def test_reference_solver_accurate_on_default_items(default_items):
    acc, effort = accuracy(make_builtin("grids-ref"), default_items)
    assert acc >= 0.9
    assert effort > 0


def test_reference_solver_select_mode():
    its = items(20, mode="select", key="select")
    acc, _ = accuracy(make_builtin("grids-ref"), its, "select")
    assert acc >= 0.9


def test_weaker_when_deeper_and_with_a_tiny_budget(default_items):
    solver = make_builtin("grids-ref")
    base, base_effort = accuracy(solver, default_items)
    deep, deep_effort = accuracy(solver, items(30, depth=3, key="deep"))
    shallow, shallow_effort = accuracy(solver, items(15, depth=1, key="shallow"))
    tiny, _ = accuracy(make_builtin("grids-ref", budget=50), default_items)
    assert deep < base
    assert tiny < 0.5 < base
    # effort (programs tried) rises with composition depth
    assert shallow_effort < base_effort < deep_effort


def test_found_program_explains_the_demonstrations(default_items):
    solver = make_builtin("grids-ref", seed=3)
    item = default_items[0]
    view = render(item, "structured", "generate")
    ans = solver.solve(view, "generate")
    assert ans.effort_unit == "programs"
    prog = ans.raw["program"]
    assert ans.explanation.startswith(G.describe_program(prog))
    for pair in view["examples"]:
        out = G.apply_program(np.asarray(pair["before"], np.int8), prog)
        assert out.tolist() == pair["after"]


def test_copy_input_baseline():
    item = items(1)[0]
    view = render(item, "structured", "generate")
    ans = make_builtin("copy-input").solve(view, "generate")
    assert ans.answer == item.stimulus["probe"]
    assert FAM.score(item, ans.answer, "generate").error_type == "copy-of-probe"
    sel = items(8, mode="select", key="copy")
    for it in sel:
        v = render(it, "structured", "select")
        k = make_builtin("copy-input").solve(v, "select").answer
        test = np.asarray(it.stimulus["probe"])
        same = [c for c in it.choices if np.asarray(c).shape == test.shape]
        if any(c == it.stimulus["probe"] for c in it.choices):
            assert it.choices[k - 1] == it.stimulus["probe"]
        elif same:
            assert np.asarray(it.choices[k - 1]).shape == test.shape


def test_bad_options_and_views_are_named():
    with pytest.raises(InputError, match="budget"):
        make_builtin("grids-ref", budget=0)
    with pytest.raises(InputError, match="mode"):
        make_builtin("grids-ref").solve({"examples": [], "probe": [[1]]}, "draw")
    with pytest.raises(InputError, match="view"):
        make_builtin("grids-ref").solve("a text prompt", "generate")
    with pytest.raises(InputError, match="examples"):
        # the version 1 view layout is not read: views are always made by the current family
        make_builtin("grids-ref").solve({"train": [], "test_input": [[1]]}, "generate")
