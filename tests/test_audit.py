"""The bank audit: coverage, duplicates, uniqueness, rendering failures and choices-only leaks."""

from __future__ import annotations

import io
import json
import math

import pytest
from rich.console import Console
from twofold.experiments.cli.items import print_audit
from twofold.study import Bank, generate_bank, parse_spec, write_bank
from twofold.study.audit import audit_bank, choice_shortcuts, flatten


def matrices_bank(scheme, n=120, seed=4, **extra):
    spec = {
        "seed": seed,
        "families": {
            "matrices": {"n": n, "modes": ["select"], "distractor_scheme": scheme, **extra}
        },
    }
    return generate_bank(parse_spec(spec))


@pytest.fixture(scope="module")
def one_off():
    return matrices_bank("one-off")


@pytest.fixture(scope="module")
def balanced():
    return matrices_bank("balanced", n=200)


def shortcut_row(report, scheme):
    (row,) = [s for s in report["shortcuts"] if s["distractor_scheme"] == scheme]
    return row


def test_flatten_and_the_two_choice_only_solvers():
    assert flatten({"a": {"b": [1, "x"]}, "c": None, "d": []}) == {
        "a.b.0": "1",
        "a.b.1": '"x"',
        "c": "null",
        "d": "[]",
    }
    # the odd one out loses; the choice holding every modal value wins both votes
    choices = [{"s": "o", "n": 1}, {"s": "x", "n": 1}, {"s": "o", "n": 2}, {"s": "o", "n": 1}]
    wins = choice_shortcuts(choices)
    assert wins["majority"] == [0, 3] and wins["centroid"] == [0, 3]
    # a full product of values ties everywhere
    grid = [{"p": p, "q": q} for p in "ab" for q in "xy"]
    assert choice_shortcuts(grid) == {"majority": [0, 1, 2, 3], "centroid": [0, 1, 2, 3]}
    # a missing path counts as a value of its own
    assert choice_shortcuts([{"a": 1}, {"a": 1, "b": 2}, {"a": 1}])["majority"] == [0, 2]


def test_one_off_choices_give_the_answer_away(one_off):
    report = audit_bank(one_off, picture_sample=2)
    row = shortcut_row(report, "one-off")
    # common practice (SOURCES.md#one-attribute-distractors): one-attribute distractors leak it
    assert row["majority_accuracy"] >= 0.95
    assert row["centroid_accuracy"] >= 0.95
    assert row["chance"] == 1 / 8 and row["n_items"] == 120 and row["n_choices"] == 8
    assert row["flagged"] and row["majority_p"] < 1e-10
    assert any(
        f["kind"] == "shortcut"
        and f["distractor_scheme"] == "one-off"
        and "matrices" in f["message"]
        for f in report["flags"]
    )


def test_balanced_choices_do_not(balanced):
    report = audit_bank(balanced, picture_sample=2)
    row = shortcut_row(report, "balanced")
    assert row["majority_p"] >= 0.05 and row["centroid_p"] >= 0.05
    assert row["majority_accuracy"] <= 1 / 8 + 0.05
    assert not row["flagged"]
    assert report["flags"] == []
    assert report["uniqueness"] == [] and report["rendering"]["failures"] == []


def test_binomial_p_value_matches_the_tail_sum(one_off):
    report = audit_bank(one_off, picture_sample=0)
    row = shortcut_row(report, "one-off")
    n, k, p = row["n_items"], row["majority_hits"], row["chance"]
    # reference: SOURCES.md#scipy-live — one-sided exact binomial test, P(X >= k), X ~ Bin(n, p)
    tail = sum(math.comb(n, j) * p**j * (1 - p) ** (n - j) for j in range(k, n + 1))
    assert row["majority_p"] == pytest.approx(tail, rel=1e-6)


def test_coverage_counts_items_per_family_and_factor_level():
    bank = matrices_bank(
        "balanced",
        n=24,
        design="crossed",
        params={"n_rules": [1, 2, 3]},
        modes=["generate", "select"],
    )
    report = audit_bank(bank, picture_sample=1)
    fam = report["families"]["matrices"]
    assert fam["n_items"] == 24 and fam["n_parents"] == 24
    assert fam["factors"]["n_rules"] == {"1": 8, "2": 8, "3": 8}
    assert fam["modes"] == {"generate": 24, "select": 24}
    assert report["rendering"]["checked"] == {"text": 48, "structured": 48, "picture": 2}
    assert report["rendering"]["picture_sampled"] is True


def test_duplicates_are_found_in_a_doctored_bank(balanced):
    items = list(balanced.items[:10])
    copy_same = items[0].replace(prefix="mat", seed=items[0].seed + 1)  # same content, new seed
    other_params = items[1].replace(prefix="mat", params={**items[1].params, "note": "x"})
    bank = Bank.from_items(items + [copy_same, other_params])
    report = audit_bank(bank, picture_sample=0)
    dup = report["duplicates"]
    assert [items[0].id, copy_same.id] in dup["same_content"]
    assert sorted([items[1].id, other_params.id]) == sorted(
        next(g for g in dup["same_stimulus_answer"] if items[1].id in g)
    )
    assert sum(f["kind"] == "duplicate" for f in report["flags"]) >= 2
    clean = audit_bank(Bank.from_items(items), picture_sample=0)
    assert clean["duplicates"] == {"same_content": [], "same_stimulus_answer": []}


def test_rendering_and_uniqueness_failures_are_found_in_a_doctored_bank(balanced):
    items = list(balanced.items[:6])
    broken_stimulus = items[0].replace(prefix="mat", stimulus={"panels": "oops", "rules": {}})
    panels = [[dict(p) if p else None for p in row] for row in items[1].stimulus["panels"]]
    panels[0][0]["shape"] = "blob"  # draws nothing it knows
    bad_shape = items[1].replace(prefix="mat", stimulus={**items[1].stimulus, "panels": panels})
    twice = items[2].replace(
        prefix="mat",
        choices=[items[2].answer, *items[2].choices[1:]]
        if items[2].answer_choice != 1
        else list(items[2].choices),
    )
    bank = Bank.from_items([*items[3:], broken_stimulus, bad_shape, twice])
    report = audit_bank(bank, picture_sample=None)
    fails = {(f["item"], f["medium"]) for f in report["rendering"]["failures"]}
    assert (broken_stimulus.id, "text") in fails and (broken_stimulus.id, "picture") in fails
    assert (bad_shape.id, "picture") in fails
    assert not any(i == items[3].id for i, _ in fails)
    assert report["rendering"]["picture_sampled"] is False
    probs = {u["item"] for u in report["uniqueness"]}
    assert broken_stimulus.id in probs and bad_shape.id in probs
    if items[2].answer_choice != 1:
        assert twice.id in probs
    kinds = {f["kind"] for f in report["flags"]}
    assert {"rendering", "uniqueness"} <= kinds


def test_print_audit_marks_leaks_in_red_and_the_report_is_json(one_off):
    report = audit_bank(one_off, picture_sample=1)
    json.dumps(report)
    buf = io.StringIO()
    console = Console(file=buf, force_terminal=True, color_system="truecolor", width=160)
    print_audit(report, console)
    out = buf.getvalue()
    assert "LEAKS THE ANSWER" in out and "one-off" in out
    assert "\x1b[1;31m" in out or "\x1b[31m" in out  # red
    assert "pictures sampled" in out


def test_cli_audit_exits_1_on_flags_and_writes_json(tmp_path, one_off, balanced):
    from twofold.experiments.cli import app
    from typer.testing import CliRunner

    runner = CliRunner()
    leaky = write_bank(one_off, tmp_path / "leaky").path
    res = runner.invoke(app, ["items", "audit", str(leaky), "--json", str(tmp_path / "a.json")])
    assert res.exit_code == 1, res.output
    saved = json.loads((tmp_path / "a.json").read_text())
    assert saved["flags"] and saved["shortcuts"][0]["flagged"]
    ok = write_bank(balanced, tmp_path / "ok").path
    res = runner.invoke(app, ["items", "audit", str(ok)])
    assert res.exit_code == 0, res.output
    assert "No flags" in res.output


def test_sets_are_judged_per_family_and_scheme(one_off, balanced):
    report = audit_bank(
        Bank.from_items([*one_off.items[:60], *balanced.items[:60]]), picture_sample=0
    )
    verdicts = {s["distractor_scheme"]: s["flagged"] for s in report["shortcuts"]}
    assert verdicts == {"balanced": False, "one-off": True}
    (flag,) = [f for f in report["flags"] if f["kind"] == "shortcut"]
    assert flag["distractor_scheme"] == "one-off" and flag["family"] == "matrices"
