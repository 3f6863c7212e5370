"""Crash safety: a session process killed with SIGKILL at random moments, resumed each time.

Every trial answered before a kill and followed by the next onset must be on disk (rows are
fsynced before the next item appears); ``--resume`` continues at the first unanswered trial in
the same form order, and the finished log has every trial exactly once.
"""

from __future__ import annotations

import random
import subprocess
import time

import pytest
from _cli import TWOFOLD
from _display import Driver, make_runner_study, on_screen, play, x_display  # noqa: F401
from twofold.study import load_study, read_sidecar, read_trials
from twofold.study.exceptions import LogWarning

pytestmark = pytest.mark.display

BODY = """
[bank.spec]
seed = 4
[bank.spec.families.matrices]
n = 14
modes = ["select"]

[[blocks]]
name = "figures"
families = ["matrices"]
mode = "select"
instructions = "instructions.txt"

[forms]
order = "fixed"
break_between_blocks = false
"""


def test_sigkill_at_random_trials_then_resume(x_display, tmp_path):  # noqa: F811
    st = load_study(make_runner_study(tmp_path / "study", BODY, n_forms=2))
    bank = st.bank()
    csv = st.logs_dir / "human" / "P001.csv"
    rng = random.Random(20261202)
    confirmed: set[int] = set()
    kills = 0
    while kills < 10:
        d = Driver(x_display, st.file, "P001", tmp_path, resume=csv.exists())
        answered = play(d, bank, stop_after=rng.choice([0, 1, 1, 2]))
        # every answered trial was followed by the next onset: it must be on disk now
        confirmed |= {e["trial"] for e in answered}
        if rng.random() < 0.5 and d.state.get("screen") == "trial":
            # answer, then die mid-write
            d.key(str(on_screen(d.state, bank[d.state["item"]].answer_choice)))
            time.sleep(rng.uniform(0, 0.03))
        d.kill()
        kills += 1
        assert csv.exists()
        trials = list(read_trials(csv, torn="ignore")["trial"])  # a kill may tear a row
        assert len(trials) == len(set(trials)), trials  # no duplicates
        assert trials == list(range(len(trials)))  # in form order, no gaps
        assert confirmed <= set(trials)
        assert read_sidecar(csv.with_suffix(".json"))["status"] == "running"
    d = Driver(x_display, st.file, "P001", tmp_path, resume=True)
    play(d, bank)
    rc, err = d.finish()
    assert rc == 0, err
    df = read_trials(csv)
    form = [
        i
        for b in __import__("twofold.study.forms", fromlist=["x"]).form_for(st, "P001").blocks
        for i in b.items
    ]
    assert list(df["trial"]) == list(range(14))
    assert list(df["item"]) == form
    assert df["correct"].all()
    side = read_sidecar(csv.with_suffix(".json"))
    assert side["status"] == "complete" and side["n_trials"] == 14
    assert len(side["interruptions"]) == kills
    assert all(i["previous_status"] == "running" for i in side["interruptions"])


STAGED = """
[bank.spec]
seed = 6
[bank.spec.families.matrices]
n = 9
modes = ["select"]

[[blocks]]
name = "figures"
families = ["matrices"]
mode = "select"
instructions = "instructions.txt"
practice = 1
feedback = true

[forms]
order = "fixed"
break_every = 3
break_between_blocks = false
"""


def _advance_to(d, bank, screen: str, *, min_trials: int = 0) -> list[dict]:
    """Play correctly until ``screen`` is on display with at least ``min_trials`` answered."""
    answered: list[dict] = []
    while True:
        s = d.wait(None)
        if s["screen"] == screen and len(answered) >= min_trials:
            return answered
        if s["screen"] == "consent":
            d.key("y")
        elif s["screen"] == "trial":
            d.key(str(on_screen(s, bank[s["item"]].answer_choice)))
            if s["trial"] is not None:
                answered.append({"trial": s["trial"], "item": s["item"]})
        elif s["screen"] == "end":
            raise AssertionError(f"session ended before a {screen} screen ({answered})")
        else:
            d.key("space")


def _check_log(csv, confirmed):
    trials = list(read_trials(csv, torn="raise")["trial"]) if csv.exists() else []
    assert len(trials) == len(set(trials)), trials  # nothing duplicated
    assert trials == list(range(len(trials)))  # form order, no gaps
    assert confirmed <= set(trials), (confirmed, trials)  # nothing finished is lost
    frames = csv.parent / "frames" / f"{csv.stem}.frames.csv"
    assert frames.read_text().startswith("trial,n_intervals,")  # header even after a kill
    return trials


def test_sigkill_at_every_stage_then_resume_and_analyse(x_display, tmp_path):  # noqa: F811
    """Kill -9 on the consent, instructions, practice, trial, break and end screens, just
    after an answer, and with the last row torn on disk; resume each time. Finally the study
    is analysed with the frame-interval file in place."""
    from twofold.analysis.data import load_study_data

    st = load_study(make_runner_study(tmp_path / "study", STAGED, n_forms=2))
    bank = st.bank()
    csv = st.logs_dir / "human" / "P001.csv"
    confirmed: set[int] = set()
    # (screen to stop on, trials answered at least, what to do before the kill)
    stops = [
        ("consent", 0, None),
        ("instructions", 0, None),
        ("trial", 0, None),  # the practice item
        ("trial", 1, None),
        ("trial", 2, "answer"),  # answered, killed while the row is being written
        ("break", 3, None),
        ("trial", 5, "tear"),  # the last row torn on disk (power cut)
        ("trial", 7, "unterminated"),  # the last row without its newline
        ("end", None, None),
    ]
    from twofold.study.forms import form_for

    n_total = sum(len(b.items) for b in form_for(st, "P001").blocks)  # 8: one is practice
    n_kills = n_repairs = 0
    for screen, at_least, act in stops:
        at_least = n_total if at_least is None else at_least
        done_before = len(read_trials(csv, torn="ignore")) if csv.exists() else 0
        d = Driver(x_display, st.file, "P001", tmp_path, resume=csv.exists())
        answered = _advance_to(d, bank, screen, min_trials=max(at_least - done_before, 0))
        confirmed |= {a["trial"] for a in answered}  # each was followed by a new onset
        if act == "answer" and d.state.get("trial") is not None:
            d.key(str(on_screen(d.state, bank[d.state["item"]].answer_choice)))
            time.sleep(0.01)
        d.kill()
        n_kills += 1
        if act in ("tear", "unterminated"):
            data = csv.read_bytes()
            last = data.rstrip(b"\n").rsplit(b"\n", 1)[1]
            cut = 1 if act == "unterminated" else len(last) // 2 + 1
            csv.write_bytes(data[:-cut])
            lost = int(last.split(b",")[8])  # the trial column of the torn row
            confirmed.discard(lost)  # it is re-presented: torn rows were never complete
            n_repairs += 1
            with pytest.warns(LogWarning, match="cut short"):
                read_trials(csv)
        else:
            _check_log(csv, confirmed)
        assert read_sidecar(csv.with_suffix(".json"))["status"] == "running"
    d = Driver(x_display, st.file, "P001", tmp_path, resume=True)
    play(d, bank)
    rc, err = d.finish()
    assert rc == 0, err
    assert n_kills >= 5
    df = read_trials(csv, torn="raise")
    assert list(df["trial"]) == list(range(n_total))
    assert df["correct"].all()
    side = read_sidecar(csv.with_suffix(".json"))
    assert side["status"] == "complete" and side["n_trials"] == side["n_rows"] == n_total
    assert len(side["interruptions"]) == n_kills
    assert len(side["repairs"]) == n_repairs
    frames = csv.parent / "frames" / "P001.frames.csv"
    assert side["frames_file"] == "frames/P001.frames.csv" and frames.exists()
    data = load_study_data(st)  # the analysis reads the session log and nothing else
    assert list(data.sessions["session"]) == ["P001"]
    assert data.sessions["status"].tolist() == ["complete"]
    assert sorted(data.trials["trial"]) == list(range(n_total))
    assert data.issues.empty
    # and through the real commands a lab types next
    for argv in (["analyze", str(st.file)], ["report", str(st.file)]):
        proc = subprocess.run(
            [*TWOFOLD, *argv], capture_output=True, text=True, timeout=600, check=False
        )
        assert proc.returncode == 0, proc.stderr[-2000:]
    assert "P001" in (st.results_dir / "sessions.csv").read_text(encoding="utf-8")
    reports = list(st.root.rglob("report.html"))
    assert len(reports) == 1
    html = reports[0].read_text(encoding="utf-8")
    assert "Verdict" in html and "1 humans" in html
