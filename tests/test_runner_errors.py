"""Bad input to ``twofold run human``: one clear line and a non-zero exit, before any window.

These run without a display: every check happens in ``prepare_session``, before PsychoPy is
imported (a test below checks that importing the command and the runner package does not import
PsychoPy).
"""

from __future__ import annotations

import subprocess
import sys

import pytest
from _display import make_runner_study
from twofold.experiments.cli import _console, main
from twofold.study.forms import form_for


@pytest.fixture
def study(tmp_path):
    return make_runner_study(tmp_path / "s", n_forms=3)


def run(capsys, monkeypatch, *args):
    monkeypatch.setattr(_console.console, "width", 400)  # one line, however long
    monkeypatch.setenv("DISPLAY", ":9999")  # a window could not open: the checks come first
    capsys.readouterr()
    code = main(["run", "human", *map(str, args)])
    err = capsys.readouterr().err.strip().splitlines()
    return code, err


def test_bad_respondent_id(study, capsys, monkeypatch):
    code, err = run(capsys, monkeypatch, study, "--respondent", "Jane Doe")
    assert code == 2
    assert err == [
        "error: field '--respondent': got 'Jane Doe'; accepted: an id matching "
        "^P\\d{3}$ (a code, never a name)."
    ]


def test_custom_pattern(tmp_path, capsys, monkeypatch):
    path = make_runner_study(tmp_path / "c", runner='respondent_pattern = "^R-[0-9]{4}$"\n')
    code, err = run(capsys, monkeypatch, path, "--respondent", "P001")
    assert code == 2 and "an id matching ^R-[0-9]{4}$" in err[0] and len(err) == 1


def test_existing_id_without_resume(study, capsys, monkeypatch):
    logs = study.parent / "logs" / "human"
    logs.mkdir(parents=True)
    (logs / "P001.json").write_text('{"status": "aborted"}', "utf-8")
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001")
    assert code == 2
    assert err == [
        "error: respondent P001 already has a session (aborted); it is never "
        "overwritten: continue it with --resume or choose another id."
    ]
    (logs / "P001.json").write_text('{"status": "complete"}', "utf-8")
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001", "--resume")
    assert code == 2 and err == [
        "error: respondent P001: the session is complete; nothing to resume."
    ]


def test_resume_without_session(study, capsys, monkeypatch):
    code, err = run(capsys, monkeypatch, study, "--respondent", "P009", "--resume")
    assert code == 2 and err == [
        "error: respondent P009: no session to resume; start it without --resume."
    ]


def test_broken_study_file(study, capsys, monkeypatch):
    study.write_text("[study]\nname = 'x'\n[[blocks]\n", "utf-8")
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001")
    assert code == 2 and len(err) == 1 and "study.toml: not valid TOML" in err[0]


def test_unknown_family_in_block(study, capsys, monkeypatch):
    study.write_text(
        study.read_text("utf-8").replace('families = ["matrices"]', 'families = ["matrix"]'),
        "utf-8",
    )
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001")
    assert code == 2
    assert err == [
        "error: study.toml: field 'blocks[1].families': got 'matrix'; accepted: "
        "one of contrast, grids, matrices, strings."
    ]


def test_missing_instructions_file(study, capsys, monkeypatch):
    (study.parent / "instructions.txt").unlink()
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001")
    assert code == 2 and len(err) == 1
    assert err[0].startswith(
        "error: study.toml: field 'blocks[0].instructions': got "
        "'instructions.txt'; accepted: an existing text file"
    )


def test_template_consent_refused(study, capsys, monkeypatch):
    from importlib import resources

    tpl = resources.files("twofold.experiments").joinpath("templates/consent.txt")
    (study.parent / "consent.txt").write_text(tpl.read_text("utf-8"), "utf-8")
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001")
    assert code == 2 and len(err) == 1 and "still the shipped consent template" in err[0]


def test_bad_runner_table(study, capsys, monkeypatch):
    study.write_text(study.read_text("utf-8") + "fulscreen = true\n", "utf-8")
    code, err = run(capsys, monkeypatch, study, "--respondent", "P001")
    assert code == 2 and err[0].startswith(
        "error: study.toml: field 'runner.fulscreen': got True; accepted: the keys fullscreen, size"
    )


def test_no_form_assigned_by_a_failed_check(study, capsys, monkeypatch):
    from twofold.study import load_study
    from twofold.study.forms import assignment

    run(capsys, monkeypatch, study, "--respondent", "bad")
    assert assignment(load_study(study)) == {}
    assert form_for(load_study(study), "P005").form_id == "F001"


def test_psychopy_not_imported_outside_the_runner():
    code = (
        "import sys, twofold.experiments.cli, twofold.experiments.human, twofold.study.forms;"
        "sys.exit('psychopy' in sys.modules)"
    )
    assert subprocess.run([sys.executable, "-c", code], check=False).returncode == 0


def test_screen_text_is_reflowed_into_paragraphs():
    from twofold.experiments.human.prepare import reflow

    text = "First line of a\nparagraph that wraps.\n\n  Second   paragraph\n\n\nPress Y.\n"
    assert reflow(text) == "First line of a paragraph that wraps.\n\nSecond   paragraph\n\nPress Y."
