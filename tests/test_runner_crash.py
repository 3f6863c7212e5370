"""Crash safety: a session process killed with SIGKILL at random moments, resumed each time.

Every trial answered before a kill and followed by the next onset must be on disk (rows are
fsynced before the next item appears); ``--resume`` continues at the first unanswered trial in
the same form order, and the finished log has every trial exactly once.
"""

from __future__ import annotations

import random
import time

import pytest
from _display import Driver, make_runner_study, play, x_display  # noqa: F401
from twofold.study import load_study, read_sidecar, read_trials

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
            d.key(str(bank[d.state["item"]].answer_choice))  # answer, then die mid-write
            time.sleep(rng.uniform(0, 0.03))
        d.kill()
        kills += 1
        assert csv.exists()
        trials = list(read_trials(csv)["trial"])
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
