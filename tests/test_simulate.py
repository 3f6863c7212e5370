"""Simulated respondents and the study scaffold."""

from __future__ import annotations

import json
import shutil
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from twofold.experiments.cli import main
from twofold.experiments.simulate import SimulationSettings, item_parameters, simulate_humans
from twofold.study import load_study
from twofold.study.exceptions import SpecError
from twofold.study.families import get_family
from twofold.study.logs import read_sidecar, read_trials

STUDY = """
[study]
name = "sim-check"
seed = 5

[bank.spec]
seed = 5
[bank.spec.families.strings]
n = 24
modes = ["generate"]
[bank.spec.families.strings.params]
length = [3, 5, 7, 9]
[bank.spec.families.matrices]
n = 24
modes = ["select"]
distractor_scheme = "balanced"
[bank.spec.families.matrices.params]
n_rules = [1, 2, 3, 4]
[bank.spec.families.matrices.variants]
operators = ["swap-shapes"]

[simulate]
humans = 40
"""


@pytest.fixture(scope="module")
def simulated(tmp_path_factory):
    root = tmp_path_factory.mktemp("sim")
    (root / "study.toml").write_text(STUDY, encoding="utf-8")
    study = load_study(root)
    out = simulate_humans(study)
    return study, out


def _all_trials(study):
    return pd.concat(
        [read_trials(p) for p in sorted((study.logs_dir / "simulated").glob("S*.csv"))]
    )


def test_every_row_and_sidecar_is_marked_synthetic(simulated):
    study, out = simulated
    assert out["sessions"] == [f"S{k:03d}" for k in range(1, 41)]
    trials = _all_trials(study)
    assert trials["synthetic"].all()
    assert (trials["kind"] == "human").all()
    for sid in out["sessions"]:
        side = read_sidecar(study.logs_dir / "simulated" / f"{sid}.json")
        assert side["synthetic"] is True and side["status"] == "complete"
    truth = json.loads((study.logs_dir / "simulation.json").read_text())
    assert truth["synthetic"] is True


def test_each_respondent_answers_every_item_once(simulated):
    study, _ = simulated
    bank = study.bank(create=False)
    trials = _all_trials(study)
    counts = trials.groupby("respondent")["item"].agg(["nunique", "size"])
    assert (counts["nunique"] == len(bank)).all() and (counts["size"] == len(bank)).all()


def test_wrong_answers_carry_the_families_error_types(simulated):
    study, _ = simulated
    trials = _all_trials(study)
    wrong = trials[~trials["correct"].astype(bool)]
    assert len(wrong) > 0
    for fam, sub in wrong.groupby("family"):
        declared = set(get_family(fam).error_types)
        assert set(sub["error_type"]) <= declared
    assert trials.loc[trials["correct"].astype(bool), "error_type"].isna().all()


def test_difficulty_follows_factors_and_times_grow_with_difficulty(simulated):
    study, out = simulated
    trials = _all_trials(study)
    item_b = pd.Series({k: v[1] for k, v in out["item_params"].items()}, name="b")
    per_item = trials.groupby("item").agg(
        err=("correct", lambda c: 1 - c.astype(float).mean()), rt=("rt_ms", "median")
    )
    per_item = per_item.join(item_b)
    # the generating difficulty shows in the observed error rates and response times
    assert stats.spearmanr(per_item["b"], per_item["err"]).statistic > 0.5
    assert stats.spearmanr(per_item["b"], per_item["rt"]).statistic > 0.3
    bank = study.bank(create=False)
    strings = [it for it in bank if it.family == "strings"]
    length = np.array([it.factors["length"] for it in strings], dtype=float)
    b = np.array([out["item_params"][it.id][1] for it in strings])
    assert stats.spearmanr(length, b).statistic > 0.3


def test_same_seed_gives_the_same_parameters(simulated):
    study, _ = simulated
    bank = study.bank(create=False)
    s = SimulationSettings()
    assert item_parameters(bank, s, 9) == item_parameters(bank, s, 9)
    assert item_parameters(bank, s, 9) != item_parameters(bank, s, 10)


def test_existing_sessions_are_kept_unless_replaced(simulated):
    study, _ = simulated
    with pytest.raises(SpecError, match="simulated sessions exist already"):
        simulate_humans(study, n=2)


def test_unknown_simulate_key_names_the_key():
    with pytest.raises(SpecError, match="field 'people'"):
        SimulationSettings.from_table({"people": 3})


def test_new_scaffolds_a_study_that_builds(tmp_path, capsys):
    folder = tmp_path / "lab-study"
    assert main(["new", str(folder)]) == 0
    study = load_study(folder)
    assert (folder / "consent.txt").read_text().startswith("TEMPLATE")
    for block in study.table("blocks"):
        assert (folder / block["instructions"]).exists()
    bank = study.bank()
    assert len(bank) > 0
    assert main(["forms", "build", str(folder / "study.toml"), "--respondents", "2"]) == 0
    capsys.readouterr()
    assert main(["new", str(folder)]) == 2
    assert "folder exists and is not empty" in capsys.readouterr().err


def test_example_study_files_are_shipped():
    src = resources.files("twofold.example_study")
    with resources.as_file(src) as folder:
        names = {p.name for p in Path(folder).iterdir()}
    assert {"study.toml", "generate.toml", "consent.txt", "README.md", "instructions"} <= names
    assert shutil.which("twofold") is not None
