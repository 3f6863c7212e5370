"""The first ten minutes of a lab: new, forms show, simulate, status and their one-line errors."""

from __future__ import annotations

import json
import tomllib
from importlib import resources

import pytest
from twofold.analysis.run import IRT_2PL_MIN_RESPONDENTS, irt_model_for
from twofold.experiments.cli import main
from twofold.study import load_study
from twofold.study.forms import load_forms
from twofold.study.logs import read_sidecar, session_logs

FAMILIES = ("contrast", "grids", "matrices", "strings")


def _run(capsys, *args):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def _small(folder):
    """Shrink a scaffolded study so the CLI round trip stays quick."""
    spec = folder / "generate.toml"
    spec.write_text(spec.read_text("utf-8").replace("n = 12", "n = 4"), encoding="utf-8")
    st = folder / "study.toml"
    text = st.read_text("utf-8").replace("humans = 60", "humans = 3")
    text = text.replace("respondents = 24", "respondents = 4").replace("seeds = 3", "seeds = 1")
    st.write_text(text.replace("practice = 2", "practice = 1"), encoding="utf-8")


@pytest.fixture
def lab(tmp_path, capsys):
    folder = tmp_path / "lab"
    code, out, err = _run(capsys, "new", folder)
    assert code == 0, err
    return folder, out


def test_new_scaffolds_every_family_and_prints_the_steps(lab):
    folder, out = lab
    study = load_study(folder)
    blocks = study.table("blocks")
    assert sorted(b["families"][0] for b in blocks) == list(FAMILIES)
    texts = {b["families"][0]: (folder / b["instructions"]).read_text("utf-8") for b in blocks}
    assert len(set(texts.values())) == 4  # one text per family and mode, not one for all
    # the family's task in words; how to answer is filled in per screen at session time
    assert "belongs to set A or to" in texts["contrast"] and "Colour grids" in texts["grids"]
    assert all("{how}" in t and "{time_limit}" in t for t in texts.values())
    assert "TEMPLATE" in (folder / "consent.txt").read_text("utf-8")
    steps = [line for line in out.splitlines() if line[:2] in {f"{k}." for k in range(1, 9)}]
    assert len(steps) == 8
    for command in ("items generate", "forms build", "simulate", "run machine", "analyze"):
        assert any(command in s for s in steps), command
    assert "[[solvers]]" in out and "twofold status" in out


def test_new_refuses_a_folder_in_use(lab, capsys):
    folder, _ = lab
    code, out, err = _run(capsys, "new", folder)
    assert code == 2 and out == ""
    assert err.strip() == f"error: {folder}: folder exists and is not empty; choose a new folder."


def test_scaffold_defaults_agree():
    text = resources.files("twofold.experiments").joinpath("templates/study.toml").read_text()
    study = tomllib.loads(text)
    humans = study["simulate"]["humans"]
    assert study["analysis"]["irt_model"] == "auto"
    assert humans < IRT_2PL_MIN_RESPONDENTS
    assert irt_model_for("auto", humans) == "1pl"
    assert irt_model_for("auto", IRT_2PL_MIN_RESPONDENTS) == "2pl"
    assert irt_model_for("rasch", 10_000) == "rasch"


def test_status_simulate_forms_show_round_trip(lab, capsys):
    folder, _ = lab
    _small(folder)
    st = folder / "study.toml"
    code, out, _ = _run(capsys, "status", st)
    assert code == 0
    assert "bank:      not generated yet" in out
    assert f"next:      twofold items generate {folder / 'generate.toml'}" in out

    code, out, err = _run(capsys, "forms", "build", st)
    assert code == 0 and "no bank yet: generating it from generate.toml" in err
    code, out, _ = _run(capsys, "forms", "show", st, "F002")
    assert code == 0
    form = {f.form_id: f for f in load_forms(load_study(folder))}["F002"]
    shown = [line.split()[-1] for line in out.splitlines() if line.lstrip().startswith("trial")]
    assert shown == form.item_ids()
    practice = [line for line in out.splitlines() if line.lstrip().startswith("practice:")]
    assert [p.split(":", 1)[1].split() for p in practice] == [
        list(b.practice) for b in form.blocks if b.practice
    ]
    code, out, err = _run(capsys, "forms", "show", st, "P001")
    assert code == 2 and "field 'respondent': got 'P001'" in err

    code, out, err = _run(capsys, "simulate", st)
    assert code == 0 and str(folder / "logs" / "simulated") in out
    sim = sorted((folder / "logs" / "simulated").glob("S*.csv"))
    assert len(sim) == 3 and not (folder / "logs" / "human").exists()
    assert all(read_sidecar(p.with_suffix(".json"))["synthetic"] for p in sim)
    assert set(sim) <= set(session_logs(folder / "logs"))  # analysis finds them

    code, out, _ = _run(capsys, "status", st)
    assert code == 0
    assert "simulated: 3 synthetic sessions" in out and "people:    no sessions yet" in out
    assert "forms:     4 built, 0 assigned" in out
    assert "bank:      32 items (contrast 8, grids 8, matrices 8, strings 8)" in out
    assert f"next:      twofold run machine {st}" in out


def test_status_counts_machine_trials_and_failures(lab, capsys):
    folder, _ = lab
    _small(folder)
    st = folder / "study.toml"
    assert _run(capsys, "simulate", st)[0] == 0
    assert _run(capsys, "forms", "build", st)[0] == 0
    code, _, err = _run(capsys, "run", "machine", st)
    assert code == 0, err
    csv = next((folder / "logs" / "machine").glob("*.csv"))
    lines = csv.read_text("utf-8").splitlines()
    header = lines[0].split(",")
    n = len(lines) - 1
    code, out, _ = _run(capsys, "status", st)
    assert f"machine:   reference: 1 sessions, {n} of {n} trials done" in out
    assert f"next:      twofold analyze {st}" in out
    # a failed trial shows up and the next step is to rerun the sweep
    cells = lines[1].split(",")
    cells[header.index("status")] = "failed"
    lines[1] = ",".join(cells)
    csv.write_text("\n".join(lines) + "\n", encoding="utf-8")
    code, out, _ = _run(capsys, "status", st)
    assert "(failed 1)" in out and "1 failed trials are retried" in out


def test_analyze_without_a_bank_says_so_in_one_line(lab, capsys):
    folder, _ = lab
    code, out, err = _run(capsys, "analyze", folder)
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert err.startswith(f"error: {folder / 'bank'}: no bank yet, so nothing to analyze")


def test_a_spec_asking_for_more_items_than_it_can_make_is_one_line(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text(
        "seed = 1\n[families.strings]\nn = 400\n[families.strings.params]\nlength = 3\n"
        'alphabet = "digits"\n',
        encoding="utf-8",
    )
    code, out, err = _run(capsys, "items", "generate", spec, "-o", tmp_path / "bank")
    errors = [line for line in err.splitlines() if line.startswith("error:")]
    assert code == 2 and len(errors) == 1 and err.strip().endswith(errors[0])
    assert errors[0].startswith(
        "error: families.strings: n = 400 asks for more items than these levels can make"
    )
    assert err.rstrip().endswith("lower n or add levels.")
    assert not (tmp_path / "bank").exists()


def test_example_spec_scaled_to_100_per_family_generates(tmp_path, capsys):
    src = resources.files("twofold.example_study").joinpath("generate.toml").read_text("utf-8")
    spec = tmp_path / "generate.toml"
    spec.write_text(src.replace("n = 20", "n = 100"), encoding="utf-8")
    code, out, err = _run(capsys, "items", "generate", spec, "-o", tmp_path / "bank")
    assert code == 0, err
    meta = json.loads((tmp_path / "bank" / "bank.json").read_text("utf-8"))
    assert sum(f["parents"] for f in meta["generation"].values()) == 400
