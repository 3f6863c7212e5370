"""Export of items for outside solvers (never the answers) and import of their answers."""

from __future__ import annotations

import json

import pytest
from _toyfamily import make_study, use_toy
from twofold.experiments.cli import main
from twofold.experiments.machine import export_items, import_answers
from twofold.study import read_sidecar, read_trials
from twofold.study.exceptions import InputError


@pytest.fixture(autouse=True)
def _toy(monkeypatch):
    use_toy(monkeypatch)


@pytest.fixture
def study(tmp_path):
    st = make_study(tmp_path / "study")
    st.bank()
    return st


@pytest.mark.parametrize("medium", ["text", "structured", "picture"])
def test_export_writes_every_item_and_mode_without_answers(study, tmp_path, medium):
    bank = study.bank()
    out = tmp_path / f"out-{medium}"
    code = main(["items", "export", str(study.bank_dir), "--as", medium, "-o", str(out)])
    assert code == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["bank_hash"] == bank.hash and manifest["medium"] == medium
    assert manifest["n_entries"] == sum(len(it.modes) for it in bank)
    assert {(e["item"], e["mode"]) for e in manifest["entries"]} == {
        (it.id, m) for it in bank for m in it.modes
    }
    for e in manifest["entries"]:
        assert set(e) <= {"item", "family", "mode", "answer_format", "n_choices", "file", "line"}
        if e["mode"] == "select":
            assert e["answer_format"] == "a choice number from 1 to 4" and e["n_choices"] == 4
        else:
            assert e["answer_format"] == "an integer"
    blob = "".join(p.read_text("utf-8") for p in out.rglob("*.json*"))
    assert '"answer":' not in blob and '"accepted"' not in blob and "answer_choice" not in blob
    if medium == "picture":
        pngs = sorted(out.glob("pictures/*.png"))
        assert len(pngs) == manifest["n_entries"]
        assert all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in pngs)
    else:
        name = "prompts.jsonl" if medium == "text" else "views.jsonl"
        text = (out / name).read_text("utf-8")
        assert len(text.splitlines()) == manifest["n_entries"]
        for rec in map(json.loads, text.splitlines()):
            assert set(rec) == {"item", "family", "mode", "prompt" if medium == "text" else "view"}
            if medium == "structured":  # the toy view: the addends, and the choices to pick from
                assert set(rec["view"]) <= {"a", "b", "choices", "item", "family", "mode"}


def test_export_refuses_a_non_empty_folder(study, tmp_path):
    out = tmp_path / "busy"
    out.mkdir()
    (out / "keep.txt").write_text("x")
    with pytest.raises(InputError, match="folder exists and is not empty"):
        export_items(study.bank(), out)
    assert (out / "keep.txt").exists()


def _answers(bank, *, wrong=(), text=(), bad=(), seed=None):
    lines = [{"bank_hash": bank.hash}]
    for k, item in enumerate(bank):
        for mode in item.modes:
            ans = item.answer if mode == "generate" else item.answer_choice
            rec = {"item": item.id, "mode": mode, "answer": ans, "effort": 10 + k}
            if k in wrong and mode == "generate":
                rec["answer"] = item.answer + 1
            if k in text and mode == "generate":
                rec = {"item": item.id, "mode": mode, "text": f"Sure! It is {item.answer}."}
            if k in bad and mode == "generate":
                rec["answer"] = "seventeen"
            if seed is not None:
                rec["seed"] = seed
            lines.append(rec)
    return lines


def _write(path, lines):
    path.write_text("".join(json.dumps(x) + "\n" for x in lines), "utf-8")
    return path


def test_import_scores_answers_into_machine_logs(study, tmp_path, capsys):
    bank = study.bank()
    path = _write(tmp_path / "answers.jsonl", _answers(bank, wrong={0, 1}, text={2}, bad={3}))
    code = main(["run", "machine", str(study.file), "--import", str(path), "--name", "lab-model"])
    assert code == 0
    assert "lab-model-s0: 24 trials, 21 correct, 1 invalid" in capsys.readouterr().out
    df = read_trials(study.logs_dir / "machine" / "lab-model-s0.csv")
    assert len(df) == 24 and list(df["trial"]) == list(range(24))
    assert (df[df["correct"] == False]["error_type"].dropna() == "off_by_one").sum() == 2  # noqa: E712
    bad = df[df["status"] == "invalid"]
    assert len(bad) == 1 and "seventeen" in bad["detail"].iloc[0]
    assert df[df["item"] == bank.items[2].id]["correct"].all()  # free text parsed
    assert df["effort"].notna().sum() == 23  # the free-text line gave no effort
    side = read_sidecar(study.logs_dir / "machine" / "lab-model-s0.json")
    assert side["kind"] == "machine" and side["solver"] == "lab-model"
    assert side["solver_spec"] == "import:answers.jsonl" and side["n_trials"] == 24
    # importing again replaces the session, never duplicates it
    again = ["run", "machine", str(study.file), "--import", str(path), "--name", "lab-model"]
    assert main(again) == 0
    assert len(read_trials(study.logs_dir / "machine" / "lab-model-s0.csv")) == 24


def _error_of(study, tmp_path, lines, capsys):
    path = _write(tmp_path / "answers.jsonl", lines)
    code = main(["run", "machine", str(study.file), "--import", str(path), "--name", "x"])
    err = " ".join(capsys.readouterr().err.split())
    assert code == 2
    assert not (study.logs_dir / "machine").exists()  # nothing half-written
    return err


def test_import_errors_name_the_line(study, tmp_path, capsys):
    bank = study.bank()
    good = _answers(bank)
    first = bank.items[0]
    cases = [
        (
            good[:2] + [{"item": "toy-000000000000", "answer": 3, "mode": "generate"}],
            "answers.jsonl line 3: field 'item': got 'toy-000000000000'; accepted: an item id",
        ),
        (good[:3] + [good[1]], "answers.jsonl line 4: duplicate answer for item " + first.id),
        (
            [{"bank_hash": "0" * 64}] + good[1:],
            "answers.jsonl line 1: field 'bank_hash': got '"
            + "0" * 56
            + "...; accepted: the study's",
        ),
        (good[1:], "answers.jsonl: field 'bank_hash': got None; accepted: the bank hash"),
        (
            good[:1] + [{"item": first.id, "mode": "draw", "answer": 1}],
            "answers.jsonl line 2: field 'mode': got 'draw'; accepted: one of generate, select.",
        ),
        (
            good[:1] + [{"item": first.id, "mode": "generate", "anwser": 1}],
            "answers.jsonl line 2: field 'anwser': got 'anwser'",
        ),
        (
            good[:1] + [{"item": first.id, "mode": "generate"}],
            "answers.jsonl line 2: field 'answer': got None; accepted: an 'answer' or a 'text'",
        ),
    ]
    for lines, message in cases:
        assert message in _error_of(study, tmp_path, lines, capsys), message
    path = tmp_path / "broken.jsonl"
    path.write_text(json.dumps({"bank_hash": bank.hash}) + '\n{"item": \n', "utf-8")
    code = main(["run", "machine", str(study.file), "--import", str(path), "--name", "x"])
    assert code == 2 and "broken.jsonl line 2: not valid JSON" in capsys.readouterr().err


def test_import_needs_a_name(study, tmp_path, capsys):
    path = _write(tmp_path / "a.jsonl", _answers(study.bank()))
    assert main(["run", "machine", str(study.file), "--import", str(path)]) == 2
    assert "field '--name': got None" in capsys.readouterr().err


def test_import_one_session_per_seed(study, tmp_path):
    bank = study.bank()
    lines = _answers(bank, seed=0) + _answers(bank, seed=4)[1:]
    out = import_answers(study, _write(tmp_path / "a.jsonl", lines), name="m")
    assert [s["session"] for s in out] == ["m-s0", "m-s4"]
    assert all(s["n_correct"] == 24 and s["n_missing"] == 0 for s in out)
