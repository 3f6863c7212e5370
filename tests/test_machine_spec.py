"""Solver specs, the python adapter, the baselines and the command-line errors."""

from __future__ import annotations

import json

import numpy as np
import pytest
from _toyfamily import make_study, use_toy
from hypothesis import given
from hypothesis import strategies as st
from twofold.experiments.cli import main
from twofold.experiments.machine import (
    CHECK_COLUMNS,
    build_solver,
    check_solver,
    parse_solver_entry,
    solver_from_string,
    study_solvers,
)
from twofold.experiments.solvers import Answer, builtin_solvers, make_builtin
from twofold.experiments.solvers.baselines import flatten_payload
from twofold.study.exceptions import SolverError, SpecError

EX = "twofold.experiments.machine.examples.python_solver"


@pytest.fixture(autouse=True)
def _toy(monkeypatch):
    use_toy(monkeypatch)


# -- specs ---


def test_entry_defaults_and_names():
    s = parse_solver_entry({"spec": "python:my_pkg.mod:my_solver"})
    assert (s.name, s.seeds, s.kind, s.modes, s.medium) == ("my-solver", (0,), "python", None, None)
    assert parse_solver_entry({"spec": "command:python3 tools/my_child.py -v"}).name == "my-child"
    assert parse_solver_entry({"spec": "http://10.0.0.2:8000/v1"}).kind == "http"
    assert parse_solver_entry({"spec": "random", "seeds": [3, 7]}).seeds == (3, 7)
    assert parse_solver_entry({"spec": "random", "seeds": 3}).seeds == (0, 1, 2)
    assert parse_solver_entry({"spec": "random", "families": "toy"}).families == ("toy",)


def test_config_hash_tracks_answers_not_names_or_seeds():
    a = parse_solver_entry({"spec": "random", "name": "a", "seeds": 1})
    b = parse_solver_entry({"spec": "random", "name": "b", "seeds": 5})
    c = parse_solver_entry({"spec": "random", "options": {"k": 1}})
    d = parse_solver_entry({"spec": "random", "modes": ["select"]})
    assert a.config_hash == b.config_hash
    assert len({a.config_hash, c.config_hash, d.config_hash}) == 3
    assert len(a.config_hash) == 64


@pytest.mark.parametrize(
    ("entry", "message"),
    [
        ({"spec": "random", "sedes": 2}, "field 'solvers.sedes': got 'sedes'; accepted: one of"),
        ({"spec": ""}, "field 'spec': got ''; accepted: a solver spec"),
        ({"spec": "random", "seeds": 0}, "field 'seeds': got 0; accepted: a number of seeds"),
        ({"spec": "random", "seeds": [1, 1]}, "field 'seeds': got [1, 1]"),
        ({"spec": "random", "modes": ["guess"]}, "field 'modes': got 'guess'"),
        ({"spec": "random", "medium": "audio"}, "field 'medium': got 'audio'"),
        (
            {"spec": "random", "families": ["toys"]},
            "field 'families': got 'toys'; accepted: one of",
        ),
        ({"spec": "random", "name": "a b"}, "field 'name': got 'a b'"),
        ({"spec": "random", "timeout": -1}, "field 'timeout': got -1"),
        (
            {"spec": "http:http://x", "options": {"api_key": "k"}},
            "field 'options.api_key': got '(hidden)'; accepted: no key in the study file",
        ),
    ],
)
def test_bad_entries_name_the_key(entry, message):
    with pytest.raises(SpecError) as err:
        parse_solver_entry(entry, where="study.toml: solvers[0]")
    assert str(err.value).startswith("study.toml: solvers[0]: ")
    assert message in str(err.value)


def test_study_entries_must_have_unique_names(tmp_path):
    study = make_study(tmp_path, '[[solvers]]\nspec = "random"\n[[solvers]]\nspec = "random"\n')
    with pytest.raises(SpecError, match="field 'name': got 'random'; accepted: a name not used"):
        study_solvers(study)


def test_command_line_spec_may_name_an_entry():
    entry = parse_solver_entry({"spec": "random", "name": "rnd", "options": {"a": 1}})
    s = solver_from_string("rnd", seeds=2, options={"b": 2}, entries=[entry])
    assert (s.name, s.seeds, s.options) == ("rnd", (0, 1), {"a": 1, "b": 2})
    assert solver_from_string("choices-only", entries=[entry]).spec == "choices-only"


# -- building ---


@pytest.mark.parametrize(
    ("spec", "message"),
    [
        (
            "no-such-solver",
            "solver 'no-such-solver': unknown solver spec 'no-such-solver'; use a built-in name (",
        ),
        ("python:no_such_mod_q:solve", "solver 'solve': cannot import module 'no_such_mod_q'"),
        (f"python:{EX}:nothing", f"module '{EX}' has no attribute 'nothing'; fix the spec."),
        ("python:justamodule", "is not python:MODULE:ATTRIBUTE"),
        (f"python:{EX}:medium", "medium is neither callable nor an object with a solve"),
    ],
)
def test_unbuildable_specs_give_one_line(spec, message):
    with pytest.raises(SolverError) as err:
        build_solver(parse_solver_entry({"spec": spec}))
    assert message in str(err.value) and "\n" not in str(err.value)


def test_python_adapter_function_and_class_with_options():
    fn = build_solver(parse_solver_entry({"spec": f"python:{EX}:solve"}))
    assert fn.medium == "structured"
    assert fn.solve({"choices": [1, 2, 3]}, "select").answer == 3
    assert fn.solve({}, "generate").answer == "no idea"  # free text for the family to read
    cls = build_solver(
        parse_solver_entry({"spec": f"python:{EX}:FirstChoice", "options": {"k": 2}})
    )
    ans = cls.solve({"choices": [1, 2, 3]}, "select")
    assert isinstance(ans, Answer) and ans.answer == 2 and ans.effort_unit == "guesses"
    with pytest.raises(SolverError, match="cannot build FirstChoice with options"):
        build_solver(parse_solver_entry({"spec": f"python:{EX}:FirstChoice", "options": {"q": 1}}))
    with pytest.raises(SolverError, match=r"options \['k'\] given but solve is not a class"):
        build_solver(parse_solver_entry({"spec": f"python:{EX}:solve", "options": {"k": 1}}))


def test_cli_errors_are_one_line_and_exit_2(tmp_path, capsys):
    make_study(tmp_path)
    code = main(["run", "machine", str(tmp_path / "study.toml"), "--solver", "nope"])
    err = " ".join(capsys.readouterr().err.split())
    assert code == 2 and err.startswith("error: solver 'nope': unknown solver spec 'nope'; use a")
    assert not (tmp_path / "logs").exists()
    code = main(["run", "machine", str(tmp_path / "study.toml")])
    err = " ".join(capsys.readouterr().err.split())
    assert code == 2 and err == (
        "error: no solver to run: pass --solver SPEC or add [[solvers]] entries to study.toml."
    )
    code = main(["run", "machine", str(tmp_path), "--solver", "random", "--option", "novalue"])
    assert code == 2 and "field '--option': got 'novalue'" in capsys.readouterr().err


def test_cli_runs_and_resumes(tmp_path, capsys):
    make_study(tmp_path)
    args = ["run", "machine", str(tmp_path), "--solver", "random", "--seeds", "2", "--workers", "1"]
    assert main(args) == 0
    out = capsys.readouterr()
    assert "wrote 2 machine sessions" in out.out and "random-s1: 24 trials (0 resumed" in out.err
    assert main(args) == 0
    assert "random-s1: 24 trials (24 resumed, 0 run" in capsys.readouterr().err


# -- baselines ---


def test_baselines_are_registered():
    assert {"random", "choices-only"} <= set(builtin_solvers())


def test_random_is_uniform_and_seeded():
    view = {"choices": list("abcdefgh")}
    solver = make_builtin("random", seed=11)
    picks = [solver.solve(view, "select").answer for _ in range(4000)]
    again = make_builtin("random", seed=11)
    assert [again.solve(view, "select").answer for _ in range(50)] == picks[:50]
    counts = np.bincount(picks, minlength=9)[1:]
    # chi-square goodness of fit, 7 df: 99.9th percentile is 24.32 (common practice)
    chi2 = ((counts - 500) ** 2 / 500).sum()
    assert chi2 < 24.32 and counts.min() > 0
    gen = solver.solve(view, "generate")
    assert gen.answer is None and "abstains" in gen.explanation


def test_choices_only_picks_the_attribute_wise_majority():
    # the answer (choice 3) differs from each distractor in one attribute
    answer = {"shape": "ring", "size": 2, "shade": "dark"}
    choices = [
        {**answer, "shape": "star"},
        {**answer, "size": 5},
        answer,
        {**answer, "shade": "pale"},
    ]
    ans = make_builtin("choices-only").solve({"choices": choices, "stimulus": "ignored"}, "select")
    assert ans.answer == 3 and ans.effort == 12.0
    assert make_builtin("choices-only").solve({"x": 1}, "generate").answer is None
    with pytest.raises(SolverError, match="field 'choices'"):
        make_builtin("choices-only").solve({"x": 1}, "select")


@given(
    st.recursive(
        st.integers() | st.text(max_size=3) | st.booleans(),
        lambda inner: (
            st.lists(inner, max_size=3)
            | st.dictionaries(st.text("abc", min_size=1, max_size=2), inner, max_size=3)
        ),
        max_leaves=10,
    )
)
def test_flatten_payload_keeps_every_leaf(value):
    flat = flatten_payload(value)
    leaves = []

    def walk(v):
        if isinstance(v, dict):
            for k in v:
                walk(v[k])
        elif isinstance(v, list):
            for x in v:
                walk(x)
        else:
            leaves.append(json.dumps(v, sort_keys=True, ensure_ascii=False, separators=(",", ":")))

    walk(value)
    assert sorted(flat.values()) == sorted(leaves)


def test_check_solver_runs_a_few_items_and_reports(tmp_path):
    bank = make_study(tmp_path).bank()
    table = check_solver("python:_toyfamily:solve_structured", bank, n_items=3)
    assert list(table.columns) == list(CHECK_COLUMNS)
    assert len(table) == 6 and (table["status"] == "ok").all() and table["correct"].all()
    # a function that cannot take (view, mode) is refused before its first trial
    with pytest.raises(SolverError, match="solve_text cannot be called as solve"):
        check_solver("python:_toyfamily:solve_text", bank, n_items=3)

    class AlwaysFails:
        medium = "structured"

        def solve(self, view, mode):
            raise RuntimeError("no")

    with pytest.raises(SolverError, match="all 6 trials failed; first reason: solver raised"):
        check_solver(AlwaysFails(), bank, n_items=3)

    class NoMedium:
        def solve(self, view, mode):
            return 1

    with pytest.raises(SolverError, match="field 'medium': got None"):
        check_solver(NoMedium(), bank)


def test_baselines_label_each_test_panel_when_asked():
    view = {"choices": ["A", "B"], "test": [{}, {}, {}, {}, {}]}
    for name in ("random", "choices-only"):
        answers = {make_builtin(name, seed=s).solve(view, "select").answer for s in range(20)}
        assert all(len(a) == 5 and set(a) <= {"A", "B"} for a in answers)
        assert len(answers) > 10  # random labellings, not one fixed string
