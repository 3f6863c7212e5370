"""``twofold analyze`` and the orchestration behind it."""

from __future__ import annotations

import json
import subprocess
import sys

import pandas as pd
import pytest
from _simdata import make_study, tally_registered
from twofold.analysis.run import PARTS, analyze_study, parse_parts
from twofold.experiments.cli import main
from twofold.study.exceptions import InputError, SpecError


@pytest.fixture(scope="module")
def registered():
    with tally_registered():
        yield


@pytest.fixture(scope="module")
def toy(registered, tmp_path_factory):
    root = tmp_path_factory.mktemp("toy")
    return make_study(root, n_parents=8, n_humans=8)


def _flat(text: str) -> str:
    return " ".join(text.split())


def test_analyze_writes_tables_and_summary_to_results(toy, capsys):
    rc = main(["analyze", str(toy), "--only", "data,agreement,consistency,errors,export"])
    assert rc == 0
    out = toy.parent / "results"
    summary = json.loads((out / "summary.json").read_text())
    assert list(summary["parts"]) == ["data", "agreement", "consistency", "errors", "export"]
    assert all(p["status"] == "ok" for p in summary["parts"].values())
    for name in (
        "trials", "sessions", "issues", "item_difficulty", "machine_error_rates",
        "difficulty_agreement", "consistency_pairs", "consistency_summary", "error_types",
        "error_type_tests", "error_type_odds",
    ):  # fmt: skip
        assert (out / f"{name}.csv").is_file(), name
    assert (out / "dataset" / "datapackage.json").is_file()
    trials = pd.read_csv(out / "trials.csv")
    assert len(trials) == summary["n_trials"] == 16 * (8 + 4)
    assert summary["respondents"] == {
        "human/human": 8,
        "machine/steadybot": 2,
        "machine/widebot": 2,
    }
    assert summary["options"]["n_boot"] == 200  # from the study's [analysis] table
    agree = pd.read_csv(out / "difficulty_agreement.csv")
    assert set(agree["n_boot"]) == {200}
    assert "wrote 14 tables" in capsys.readouterr().out  # the 12 above, notes and verdict
    notes = pd.read_csv(out / "notes.csv", keep_default_na=False)
    assert list(notes.columns) == ["part", "table", "severity", "subject", "message"]
    verdict = pd.read_csv(out / "verdict.csv")
    assert summary["verdict"] and len(summary["verdict"]) == len(verdict)
    assert set(verdict["group"]) == {"steadybot", "widebot"}


def test_output_folder_option(toy, tmp_path):
    rc = main(["analyze", str(toy), "-o", str(tmp_path / "elsewhere"), "--only", "consistency"])
    assert rc == 0
    assert sorted(p.name for p in (tmp_path / "elsewhere").iterdir()) == [
        "cache",  # the Parquet copy of the tables read from the logs
        "consistency_pairs.csv",
        "consistency_summary.csv",
        "notes.csv",
        "summary.json",
        "verdict.csv",
    ]


def test_unknown_part_is_one_error_line_naming_the_accepted_parts(toy, capsys):
    rc = main(["analyze", str(toy), "--only", "irt,agreemnt"])
    assert rc == 2
    err = _flat(capsys.readouterr().err)
    assert err == (
        "error: field '--only': got 'agreemnt'; accepted: a comma-separated list of parts: "
        "data, irt, mixed, factors, agreement, participants, consistency, errors, robustness, "
        "effort, export."
    )


def test_unknown_analysis_option_in_the_study_file(registered, tmp_path, capsys):
    toy = make_study(tmp_path, n_parents=4, n_humans=2, machines={})
    toy.write_text(toy.read_text().replace("n_boot = 200", "n_bootstrap = 200"))
    rc = main(["analyze", str(toy), "--only", "data"])
    assert rc == 2
    err = _flat(capsys.readouterr().err)
    assert err.startswith("error: study.toml: field 'analysis.n_bootstrap': got 200; accepted:")
    toy.write_text(toy.read_text().replace("n_bootstrap = 200", "n_boot = 200"))
    with pytest.raises(SpecError, match="field 'conf_level': got 2"):
        analyze_study(toy, parts="data", conf_level=2)


def test_parse_parts_keeps_the_canonical_order():
    assert parse_parts("errors, data") == ["data", "errors"]
    assert parse_parts(None) == list(PARTS)
    with pytest.raises(InputError, match="field '--only'"):
        parse_parts(" , ")


def test_model_parts_on_a_small_study(registered, tmp_path):
    toy = make_study(tmp_path, n_parents=8, n_humans=6, seeds=(0,))
    run = analyze_study(toy, parts=["mixed", "factors", "robustness"])
    parts = run.summary["parts"]
    assert {k: v["status"] for k, v in parts.items()} == {
        "mixed": "ok",
        "factors": "ok",
        "robustness": "ok",
    }
    acc = run.tables["accuracy_fixed"].set_index("term")
    assert {"group[T.steadybot]", "group[T.widebot]", "factor_width"} <= set(acc.index)
    assert "log_rt_fixed" in run.tables and "log_effort_fixed" in run.tables
    rob = run.tables["robustness_test_fixed"]["term"].tolist()
    assert "group[T.widebot]:isomorph" in rob
    assert (tmp_path / "results" / "factor_effects.csv").is_file()


def test_irt_difficulty_feeds_the_agreement_when_the_fit_succeeds(toy, tmp_path):
    run = analyze_study(toy, out_dir=tmp_path, parts="irt,agreement", n_boot=50)
    irt = run.summary["parts"]["irt"]
    source = set(run.tables["difficulty_agreement"]["human_difficulty"])
    # whichever way the IRT fit goes, the agreement says which difficulty it used
    assert source == ({"irt_b"} if irt["status"] == "ok" else {"logit_error"})
    if irt["status"] == "ok":
        items = run.tables["irt_items"].set_index("item")["b"]
        diff = run.tables["item_difficulty"].set_index("item")["difficulty"]
        pd.testing.assert_series_equal(
            diff.loc[items.index], items, check_names=False, check_dtype=False
        )


def test_analysis_never_imports_experiments():
    code = (
        "import sys, twofold.analysis, twofold.analysis.run, twofold.analysis.export;"
        "bad = [m for m in sys.modules if m.startswith('twofold.experiments')];"
        "assert not bad, bad"
    )
    subprocess.run([sys.executable, "-c", code], check=True)


def test_public_names_are_sorted_and_importable():
    import twofold.analysis as ta

    # isort-style order (constants, classes, functions), as ruff's RUF022 keeps it
    assert ta.__all__ == sorted(ta.__all__, key=lambda n: (not n.isupper(), not n[0].isupper(), n))
    for name in ta.__all__:
        assert getattr(ta, name) is not None
