"""The machine runner with the real families and their reference solvers on a small bank."""

from __future__ import annotations

import json

import pytest
from twofold.experiments.machine import (
    export_items,
    import_answers,
    parse_solver_entry,
    run_solvers,
    study_solvers,
)
from twofold.experiments.solvers import builtin_solvers, make_builtin
from twofold.study import known_families, load_study, read_trials


def test_the_families_and_reference_solvers_used_here_are_registered():
    # a broken registration must fail here, not skip the module
    assert {"strings", "matrices"} <= set(known_families())
    assert {"strings-ref", "matrices-ref"} <= set(builtin_solvers())


STUDY = """
[study]
name = "integration"
seed = 2
[bank]
path = "bank"
[bank.spec]
seed = 5
[bank.spec.families.matrices]
n = 5
modes = ["generate", "select"]
[bank.spec.families.strings]
n = 5
modes = ["generate", "select"]

[[solvers]]
spec = "strings-ref"
families = ["strings"]
[[solvers]]
spec = "matrices-ref"
families = ["matrices"]
[[solvers]]
spec = "choices-only"
modes = ["select"]
"""


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    root = tmp_path_factory.mktemp("integration")
    (root / "study.toml").write_text(STUDY, "utf-8")
    return load_study(root)


def test_reference_solvers_run_through_the_runner(study):
    table = run_solvers(study, study_solvers(study)).set_index("solver")
    assert (
        table.loc["strings-ref", "n_trials"] == 10 and table.loc["matrices-ref", "n_trials"] == 10
    )
    for name in ("strings-ref", "matrices-ref"):
        df = read_trials(study.logs_dir / "machine" / f"{name}-s0.csv")
        assert (df["status"] == "ok").all(), df["detail"].tolist()
        assert df["correct"].mean() >= 0.8  # default-difficulty items are within their budgets
        assert df["effort"].notna().all() and df["effort_unit"].notna().all()
    sel = read_trials(study.logs_dir / "machine" / "choices-only-s0.csv")
    assert len(sel) == 10 and set(sel["mode"]) == {"select"} and (sel["status"] == "ok").all()


def test_structured_export_and_import_round_trip(study, tmp_path):
    bank = study.bank()
    manifest = export_items(bank, tmp_path / "out", medium="structured")
    solver = make_builtin("matrices-ref", seed=0)
    lines = [{"bank_hash": manifest["bank_hash"]}]
    for rec in map(json.loads, (tmp_path / "out" / "views.jsonl").read_text("utf-8").splitlines()):
        if rec["family"] != "matrices":
            continue
        ans = solver.solve(rec["view"], rec["mode"])
        lines.append(
            {
                "item": rec["item"],
                "mode": rec["mode"],
                "answer": ans.answer,
                "effort": ans.effort,
                "effort_unit": ans.effort_unit,
            }
        )
    path = tmp_path / "answers.jsonl"
    path.write_text("".join(json.dumps(x) + "\n" for x in lines), "utf-8")
    (summary,) = import_answers(study, path, name="outside")
    assert summary["n_trials"] == 10 and summary["n_missing"] == 10  # the strings items
    # the live run of matrices-ref (the cache makes this free when the first test ran)
    run_solvers(study, [s for s in study_solvers(study) if s.name == "matrices-ref"])
    live = read_trials(study.logs_dir / "machine" / "matrices-ref-s0.csv")
    imported = read_trials(study.logs_dir / "machine" / "outside-s0.csv")
    cols = ["item", "mode", "response", "correct"]
    key = ["item", "mode"]
    assert (
        imported[cols]
        .sort_values(key)
        .reset_index(drop=True)
        .astype(str)
        .equals(live[cols].sort_values(key).reset_index(drop=True).astype(str))
    )


def test_digit_string_answers_keep_their_quotes_in_the_log(tmp_path):
    import csv

    (tmp_path / "study.toml").write_text(
        """[study]
name = "digits"
seed = 1
[bank]
path = "bank"
[bank.spec]
seed = 4
[bank.spec.families.strings]
n = 3
[bank.spec.families.strings.params]
alphabet = "digits"
""",
        "utf-8",
    )
    study = load_study(tmp_path)
    ref = parse_solver_entry({"spec": "strings-ref"})
    run_solvers(study, [ref])
    with open(study.logs_dir / "machine" / "strings-ref-s0.csv", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 3 and all(r["correct"] == "true" for r in rows)
    for r in rows:  # a JSON string, not a number: "2345" and never 2345
        assert r["response"].startswith('"') and isinstance(json.loads(r["response"]), str)
