"""``twofold forms preview``: every screen of a form painted to PNG, through the real command.

Under X (``x_display``) on the small all-families study of ``tests/_display.py`` at 1024x768:
the PNGs exist, one per screen the form shows (consent and text pages, instructions, practice
and feedback, every trial, breaks, end), each the window's size; the index names them; the
study's logs stay untouched; a bad ``--size`` and a missing display fail with one line.
"""

from __future__ import annotations

import json
import os
import subprocess

import pytest
from _cli import TWOFOLD
from _display import ALL_FAMILIES, make_runner_study, session_env, x_display  # noqa: F401
from PIL import Image
from twofold.experiments.human.prepare import choice_order
from twofold.study import load_study
from twofold.study.forms import load_forms


def _run(args, env, timeout=300):
    return subprocess.run(
        [*TWOFOLD, *args], env=env, capture_output=True, text=True, timeout=timeout
    )


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    root = tmp_path_factory.mktemp("preview")
    # every family, both modes among the blocks; feedback after the practice item, breaks
    body = ALL_FAMILIES.replace("practice = 1\n", "practice = 1\nfeedback = true\n", 1)
    body = body.replace('order = "fixed"', 'order = "fixed"\nbreak_every = 2')
    return make_runner_study(root / "s", body, n_forms=2)


def _expected_screens(form):
    """(screen kind, block) of every screen a participant of ``form`` sees, text pages aside."""
    out = [("consent", None)]
    first = True
    for b in form.blocks:
        if not first and form.break_between_blocks:
            out.append(("break", b.name))
        first = False
        out.append(("instructions", b.name))
        for _ in b.practice:
            out.append(("practice", b.name))
            if b.feedback:
                out.append(("feedback", b.name))
        for pos in range(len(b.items)):
            if form.break_every and pos and pos % form.break_every == 0:
                out.append(("break", b.name))
            out.append(("trial", b.name))
    out.append(("end", None))
    return out


@pytest.mark.display
def test_preview_writes_every_screen_of_the_form(x_display, study, tmp_path):  # noqa: F811
    env = session_env(x_display, tmp_path / "home", tmp_path / "unused-probe.json")
    env.pop("TWOFOLD_RUNNER_PROBE")
    out = tmp_path / "shots"
    r = _run(
        ["forms", "preview", str(study), "-o", str(out), "--form", "F002", "--size", "1024x768"],
        env,
    )
    assert r.returncode == 0, r.stderr
    assert "respondent EXAMPLE" in r.stderr and "preview:" in r.stderr  # the progress lines
    st = load_study(study)
    form = {f.form_id: f for f in load_forms(st)}["F002"]
    index = json.loads((out / "index.json").read_text("utf-8"))
    assert index["form"] == "F002" and index["size"] == [1024, 768]
    rows = index["screens"]
    # one row per page; pages of one text screen collapse to the screen
    screens = [(r["screen"], r["block"]) for r in rows if r["page"] == 1]
    assert screens == _expected_screens(form)
    pngs = sorted(p.name for p in out.glob("*.png"))
    assert pngs == sorted(r["file"] for r in rows) and len(pngs) == len(rows)
    for name in pngs:
        with Image.open(out / name) as im:
            assert im.size == (1024, 768), name
            # something is drawn: not one flat colour
            assert len(im.convert("RGB").getcolors(maxcolors=1 << 20) or ()) > 2, name
    # the trials in form order, each with the choice order respondent EXAMPLE would see
    trials = [r for r in rows if r["screen"] == "trial"]
    assert [r["item"] for r in trials] == form.item_ids()
    assert [r["trial"] for r in trials] == list(range(len(form.item_ids())))
    bank = st.bank()
    mode = {b.name: b.mode for b in form.blocks}
    for r in trials:
        item = bank[r["item"]]
        if mode[r["block"]] == "select" and item.choices:
            order = choice_order(
                len(item.choices),
                seed=st.seed,
                respondent="EXAMPLE",
                trial=r["trial"],
                item_id=item.id,
            )
            assert r["note"] == "choice order (bank numbers) " + " ".join(map(str, order))
    # no participant: no logs
    assert not (st.logs_dir / "human").exists()


@pytest.mark.display
def test_preview_of_a_list_at_another_size(x_display, study, tmp_path):  # noqa: F811
    env = session_env(x_display, tmp_path / "home", tmp_path / "unused-probe.json")
    env.pop("TWOFOLD_RUNNER_PROBE")
    out = tmp_path / "shots"
    out.mkdir()
    (out / "0999-stale.png").write_bytes(b"old")  # a previous preview's file goes
    r = _run(
        [
            "forms",
            "preview",
            str(study),
            "-o",
            str(out),
            "--list",
            "0",
            "--size",
            "800x600",
            "--respondent",
            "P123",
        ],
        env,
    )
    assert r.returncode == 0, r.stderr
    index = json.loads((out / "index.json").read_text("utf-8"))
    assert index["respondent"] == "P123" and index["list"] == 0
    assert not (out / "0999-stale.png").exists()
    with Image.open(out / index["screens"][0]["file"]) as im:
        assert im.size == (800, 600)


@pytest.mark.parametrize("size", ["12x", "x768", "1024", "10x10", "1024x768x2", "big"])
def test_a_bad_size_exits_2_with_one_line(study, tmp_path, size):
    r = _run(
        ["forms", "preview", str(study), "-o", str(tmp_path / "o"), "--size", size],
        dict(os.environ),
        timeout=120,
    )
    lines = r.stderr.strip().splitlines()
    assert r.returncode == 2 and len(lines) == 1, r.stderr
    assert lines[0].startswith("error: field '--size': got ")
    assert "accepted:" in lines[0]
    assert not (tmp_path / "o").exists()


def test_an_unknown_form_exits_2_naming_the_field(study, tmp_path):
    r = _run(
        ["forms", "preview", str(study), "-o", str(tmp_path / "o"), "--form", "F999"],
        dict(os.environ),
        timeout=120,
    )
    lines = r.stderr.strip().splitlines()
    assert r.returncode == 2 and len(lines) == 1
    assert "field '--form': got 'F999'; accepted: a form id of the study: F001, F002" in lines[0]


def test_without_a_display_the_error_names_what_is_missing(study, tmp_path):
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY")}
    r = _run(["forms", "preview", str(study), "-o", str(tmp_path / "o")], env, timeout=120)
    lines = r.stderr.strip().splitlines()
    assert r.returncode == 2 and len(lines) == 1, r.stderr
    assert "needs a display and DISPLAY is not set" in lines[0] and "xvfb" in lines[0].lower()
    assert not (tmp_path / "o").exists()
