"""The README's "Plug in your model" section stays true: its Python example runs as written.

The example is taken from README.md, saved as ``my_model.py`` in a fresh study folder, and run
there through the installed ``twofold`` console script with the command the README shows. The
folder is not on ``PYTHONPATH``: the module is found because the current folder is importable.
"""

from __future__ import annotations

import json
import os
import re
import shlex
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from _cli import TWOFOLD
from twofold.experiments.machine import build_solver, parse_solver_entry, study_solvers
from twofold.experiments.machine.chat import study_prompt
from twofold.study import load_study, read_trials
from twofold.study.exceptions import SolverError

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
SECTION = "## Plug in your model"


STUDY = """[study]
name = "plugin-docs"
seed = 5
[bank]
path = "bank"
[bank.spec]
seed = 11
[bank.spec.families.strings]
n = 3
modes = ["generate", "select"]
[bank.spec.families.matrices]
n = 2
modes = ["select"]
"""


def _section() -> str:
    text = README.read_text("utf-8")
    assert text.count(SECTION) == 1, "README has one 'Plug in your model' section"
    body = text.split(SECTION, 1)[1]
    return body.split("\n## ", 1)[0]


def _blocks(lang: str) -> list[str]:
    return re.findall(rf"^```{lang}\n(.*?)^```$", _section(), flags=re.S | re.M)


def _env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    return {**env, "CI": "1", "COLUMNS": "200", "PYTHONHASHSEED": "0"}


def _run(cmd: str, cwd: Path) -> subprocess.CompletedProcess:
    argv = shlex.split(cmd)
    assert argv[0] == "twofold"
    return subprocess.run(
        [*TWOFOLD, *argv[1:]], cwd=cwd, env=_env(), capture_output=True, text=True, timeout=300
    )


@pytest.fixture
def study_dir(tmp_path: Path) -> Path:
    folder = tmp_path / "my_study"
    folder.mkdir()
    (folder / "study.toml").write_text(STUDY, "utf-8")
    return folder


@pytest.mark.parametrize("extra", ["", " --workers 2"], ids=["as-written", "worker-processes"])
def test_readme_python_example_runs_as_written(study_dir, extra):
    (code,) = _blocks("python")
    assert len([ln for ln in code.splitlines() if ln.strip()]) <= 10  # "a ten-line example"
    (command,) = [ln for block in _blocks("console") for ln in block.splitlines() if ln.strip()]
    (study_dir / "my_model.py").write_text(code, "utf-8")
    res = _run(command + extra, study_dir)
    assert res.returncode == 0, res.stderr
    df = read_trials(study_dir / "logs" / "machine" / "solve-s0.csv")
    bank = load_study(study_dir).bank(create=False)
    planned = {(it.id, m) for it in bank for m in it.modes}
    assert set(zip(df["item"], df["mode"], strict=True)) == planned and len(df) == len(planned)
    assert not df["status"].isin(["failed", "timeout"]).any(), df["detail"].tolist()
    # the stand-in's "Answer: 1" is read as choice 1 by each family; effort as the README says
    select = df[df["mode"] == "select"]
    assert (select["status"] == "ok").all() and (select["response"].astype(str) == "1").all()
    assert set(df["effort_unit"]) == {"words"} and (df["effort"] == 2).all()
    side = json.loads((study_dir / "logs" / "machine" / "solve-s0.json").read_text("utf-8"))
    assert side["medium"] == "text"  # the module-level medium of the example was used
    assert side["solver_spec"] == "python:my_model:solve"


def test_wrong_signature_stops_before_the_first_trial(study_dir):
    (study_dir / "my_model.py").write_text("def solve(view):\n    return 1\n", "utf-8")
    res = _run("twofold run machine study.toml --solver python:my_model:solve", study_dir)
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in res.stderr
    assert re.fullmatch(
        r"error: solver 'solve': solve cannot be called as solve\(view, mode\) \(.+\); "
        r"fix its signature\.",
        lines[0],
    ), lines[0]
    assert not (study_dir / "logs").exists() and not (study_dir / "cache").exists()


def test_module_missing_from_the_current_folder_is_named(study_dir):
    res = _run("twofold run machine study.toml --solver python:no_such_model:solve", study_dir)
    assert res.returncode == 2
    (line,) = res.stderr.strip().splitlines()
    assert line.startswith("error: solver 'solve': cannot import module 'no_such_model'")
    assert not (study_dir / "logs").exists()


@pytest.fixture
def in_folder(tmp_path, monkeypatch):
    """Run in ``tmp_path`` with sys.path and sys.modules restored afterwards."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(sys, "path", list(sys.path))
    before = set(sys.modules)
    yield tmp_path
    for name in set(sys.modules) - before:
        if name.startswith("plugmod_"):
            del sys.modules[name]


@pytest.mark.parametrize(
    ("source", "entry", "expected"),
    [
        ("def solve(view, mode):\n    return 1\n", {}, "structured"),
        ("medium = 'picture'\ndef solve(view, mode):\n    return 1\n", {}, "picture"),
        (
            "medium = 'picture'\ndef solve(view, mode):\n    return 1\nsolve.medium = 'text'\n",
            {},
            "text",
        ),
        (
            "medium = 'picture'\ndef solve(view, mode):\n    return 1\n",
            {"options": {"medium": "structured"}},
            "structured",
        ),
        (
            "class M:\n    medium = 'text'\n    def solve(self, view, mode):\n        return 1\n"
            "medium = 'picture'\n",
            {},
            "text",
        ),
    ],
)
def test_how_a_python_solver_chooses_its_medium(in_folder, source, entry, expected):
    name = f"plugmod_{abs(hash(source)) % 10**8}"
    (in_folder / f"{name}.py").write_text(source, "utf-8")
    attr = "M" if "class M" in source else "solve"
    solver = build_solver(parse_solver_entry({"spec": f"python:{name}:{attr}", **entry}))
    assert solver.medium == expected


def test_entry_medium_wins_over_the_solver_medium(in_folder):
    (in_folder / "plugmod_entry.py").write_text(
        "medium = 'picture'\ndef solve(view, mode):\n    return 1\n", "utf-8"
    )
    spec = parse_solver_entry({"spec": "python:plugmod_entry:solve", "medium": "text"})
    solver = build_solver(spec)
    assert (spec.medium or solver.medium) == "text"


def test_bundled_example_sets_nothing_that_is_ignored():
    ex = "twofold.experiments.machine.examples.python_solver"
    import importlib

    mod = importlib.import_module(ex)
    mod_medium = mod.medium
    solver = build_solver(parse_solver_entry({"spec": f"python:{ex}:solve"}))
    assert solver.medium == mod_medium
    mod.medium = "text"  # the module-level medium is what the function solver uses
    try:
        assert build_solver(parse_solver_entry({"spec": f"python:{ex}:solve"})).medium == "text"
    finally:
        mod.medium = mod_medium
    cls = build_solver(parse_solver_entry({"spec": f"python:{ex}:FirstChoice"}))
    assert cls.medium == mod.FirstChoice.medium and cls.version == mod.FirstChoice.version


def test_readme_links_the_command_protocol():
    links = re.findall(r"\]\(([^)]+)\)", _section())
    assert "experiments/machine/PROTOCOL.md" in links
    assert (ROOT / "experiments" / "machine" / "PROTOCOL.md").is_file()


def test_readme_http_entry_and_prompt_are_accepted(tmp_path, monkeypatch):
    (block,) = _blocks("toml")
    (tmp_path / "study.toml").write_text(STUDY + "\n" + block, "utf-8")
    study = load_study(tmp_path)
    (spec,) = study_solvers(study)
    assert spec.kind == "http" and spec.options["model"] and spec.medium in ("text", "picture")
    prompt = study_prompt(study)
    assert set(prompt) == {"system", "user"} and prompt["user"].count("{view}") == 1
    # the key variable the README names is read from the environment, and only from there
    monkeypatch.delenv(spec.options["api_key_env"], raising=False)
    with pytest.raises(SolverError, match=f"environment variable {spec.options['api_key_env']}"):
        build_solver(spec)
    raw = tomllib.loads(block)
    assert "api_key" not in raw["solvers"][0]["options"]


CHILD = r"""
import json, sys
for line in sys.stdin:
    msg = json.loads(line)
    if msg["type"] == "hello":
        print(json.dumps({"protocol": "twofold-jsonl", "version": 1, "type": "hello",
                          "medium": "structured", "options": msg["options"]}), flush=True)
    else:
        label, view = msg["medium"], msg["view"]
        kind = type(view).__name__
        print(json.dumps({"version": 1, "id": msg["id"], "answer": 1,
                          "explanation": f"{label}:{kind}"}), flush=True)
"""


@pytest.mark.parametrize(
    ("entry_medium", "expected"), [(None, "structured:dict"), ("text", "text:str")]
)
def test_entry_medium_reaches_a_command_child(tmp_path, entry_medium, expected):
    from twofold.experiments.machine import run_solvers

    (tmp_path / "child.py").write_text(CHILD, "utf-8")
    (tmp_path / "study.toml").write_text(STUDY, "utf-8")
    entry = {"spec": f"command:{sys.executable} {tmp_path / 'child.py'}", "name": "kid"}
    if entry_medium:
        entry["medium"] = entry_medium
    study = load_study(tmp_path)
    run_solvers(study, [parse_solver_entry(entry)])
    df = read_trials(tmp_path / "logs" / "machine" / "kid-s0.csv")
    # the label the child is told and the view it gets agree with the medium the entry chose
    ok = df[df["status"] == "ok"]
    assert len(ok) == (df["mode"] == "select").sum() > 0 and set(ok["detail"]) == {expected}


def test_readme_view_and_answer_forms_hold_for_every_family():
    from twofold.study.families import get_family, known_families
    from twofold.study.generate import generate_bank, parse_spec
    from twofold.study.render import render

    families = sorted(known_families())
    spec = parse_spec(
        {"seed": 9, "families": {f: {"n": 1, "modes": ["generate", "select"]} for f in families}},
        where="test",
    )
    for item in generate_bank(spec):
        fam = get_family(item.family)
        # select mode: the structured view carries the options; a choice number from 1, or
        # for contrast one letter A or B per test panel
        view = render(item, "structured", "select")
        if item.family == "contrast":
            assert view["choices"] == ["A", "B"]
            labels = item.answer["labels"]
            assert set(labels) <= {"A", "B"}
            assert fam.score(item, fam.normalize(item, labels, "select"), "select").correct
        else:
            assert len(view["choices"]) == len(item.choices) >= 2
            k = item.choices.index(item.answer) + 1
            assert fam.score(item, fam.normalize(item, k, "select"), "select").correct
        # generate mode: the README names the answer form of strings and grids
        if item.family == "strings":
            assert isinstance(item.answer, str)
        if item.family == "grids":
            assert isinstance(item.answer, list) and all(isinstance(r, list) for r in item.answer)
        if item.family == "contrast":
            rule = item.answer["rule"]
            assert fam.score(item, fam.normalize(item, rule, "generate"), "generate").correct
        assert isinstance(render(item, "text", "generate"), str)
        assert render(item, "picture", "select")[:8] == b"\x89PNG\r\n\x1a\n"
