"""Real participant sessions: a PsychoPy window under X, driven through XTEST.

Every family's screen is answered the way a person would: typed strings with corrections,
on-screen symbol keys, matrix choices by key and by click, contrast labels by both key pairs and
by click plus a typed rule, and the grid editor (copy, reset, drag-paint, resize, palette by key
and by click, cell clicks, submit). Also: declining consent, ESC with and without confirmation,
and resuming an aborted session.
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
from _display import Driver, answer, make_runner_study, play, x_display  # noqa: F401
from twofold.study import load_study, read_sidecar, read_trials

pytestmark = pytest.mark.display


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    path = make_runner_study(tmp_path_factory.mktemp("runner"))
    st = load_study(path)
    return st, st.bank()


def test_full_session_every_family_screen(x_display, study, tmp_path):  # noqa: F811
    st, bank = study
    d = Driver(x_display, st.file, "P001", tmp_path)
    feedback: list[str] = []
    expected = play(d, bank, feedback=feedback)
    rc, err = d.finish()
    assert rc == 0, err
    assert "ethics board" in err and "data-protection law" in err  # the start banner
    assert feedback == ["Correct."]  # the practice item, answered correctly
    df = read_trials(st.logs_dir / "human" / "P001.csv")
    assert list(df["trial"]) == list(range(len(expected))) == list(range(9))
    families = set(df["family"])
    assert families == {"strings", "matrices", "contrast", "grids"}
    for row, exp in zip(df.to_dict("records"), expected, strict=True):
        assert row["item"] == exp["item"]
        assert row["status"] == "ok", row
        assert json.loads(row["response"]) == exp["response"], row
        assert row["correct"] is True or row["correct"] == True, row  # noqa: E712
        assert row["rt_ms"] > 0 and row["response_s"] > row["onset_s"]
        assert row["detail"] == exp.get("detail"), row
        # select mode with choices: the order shown is logged; the response is the bank number
        order = exp.get("choice_order")
        assert row["choice_order"] == (" ".join(map(str, order)) if order else None), row
    assert df.loc[df["family"] == "matrices", "choice_order"].notna().all()
    assert df.loc[df["mode"] == "generate", "choice_order"].isna().all()
    side = read_sidecar(st.logs_dir / "human" / "P001.json")
    assert side["status"] == "complete" and side["n_trials"] == 9
    assert side["keyboard_backend"] == "ptb"
    assert side["consent"] is True and side["practice_done"] == ["letters"]
    assert side["screen"]["size"] == [1024, 768] and side["refresh_hz"] > 0
    assert side["frames"]["n_intervals"] > 0 and "dropped_frames" in side
    frames = pd.read_csv(st.logs_dir / "human" / "frames" / "P001.frames.csv")
    assert side["frames_file"] == "frames/P001.frames.csv"
    assert list(frames["trial"]) == list(range(9))
    assert frames["n_intervals"].sum() == side["frames"]["n_intervals"]
    assert frames["dropped"].sum() == side["dropped_frames"]
    assert side["bank_hash"] == bank.hash and side["form"] == "F001"
    assert not any(k in side for k in ("name", "email", "contact"))


def test_declining_consent_keeps_no_trial_data(x_display, study, tmp_path):  # noqa: F811
    st, bank = study
    d = Driver(x_display, st.file, "P002", tmp_path, cli=True)  # through `twofold run human`
    assert play(d, bank, consent="n") == []
    rc, err = d.finish()
    assert rc == 4
    assert "ethics board" in " ".join(err.split())  # the banner of the command
    assert not (st.logs_dir / "human" / "P002.csv").exists()
    assert read_sidecar(st.logs_dir / "human" / "P002.json")["status"] == "declined"


def test_escape_confirm_then_resume(x_display, study, tmp_path):  # noqa: F811
    st, bank = study
    d = Driver(x_display, st.file, "P003", tmp_path)
    first = play(d, bank, stop_after=2)
    on_screen = d.state
    d.key("Escape")
    assert d.wait("confirm")["screen"] == "confirm"
    d.key("n")  # go on: the same item comes back with a fresh onset
    again = d.wait("trial")
    assert again["item"] == on_screen["item"] and again["onset"] > on_screen["onset"]
    d.key("Escape")
    d.wait("confirm")
    d.key("y")
    rc, _ = d.finish()
    assert rc == 3
    csv = st.logs_dir / "human" / "P003.csv"
    assert list(read_trials(csv)["trial"]) == [e["trial"] for e in first]
    assert read_sidecar(csv.with_suffix(".json"))["status"] == "aborted"
    # resume: no consent again, no practice again, continues at the first open trial
    d = Driver(x_display, st.file, "P003", tmp_path, resume=True)
    s = d.wait(None)
    assert s["screen"] == "instructions"
    d.key("space")
    rest = play(d, bank)
    rc, err = d.finish()
    assert rc == 0, err
    assert rest[0]["trial"] == len(first)
    df = read_trials(csv)
    assert list(df["trial"]) == list(range(9))
    side = read_sidecar(csv.with_suffix(".json"))
    assert side["status"] == "complete"
    assert side["interruptions"][0]["previous_status"] == "aborted"
    assert side["interruptions"][0]["next_trial"] == len(first)


OTHER_BANK = """
[bank.spec]
seed = 5
[bank.spec.families.matrices]
n = 2
modes = ["generate", "select"]
[bank.spec.families.strings]
n = 3
modes = ["select", "generate"]
[bank.spec.families.grids]
n = 2
modes = ["select", "generate"]
[bank.spec.families.grids.params]
size = 4
[bank.spec.families.contrast]
n = 1
modes = ["generate"]
"""

OTHER_BLOCKS = """
[[blocks]]
name = "rules"
families = ["contrast"]
mode = "generate"
instructions = "instructions.txt"

[[blocks]]
name = "panels"
families = ["matrices"]
mode = "generate"
instructions = "instructions.txt"

[[blocks]]
name = "mixed"
items = {mixed}
mode = "select"
instructions = "instructions.txt"

[[blocks]]
name = "quick"
items = {late}
mode = "select"
instructions = "instructions.txt"
time_limit_s = 0.5

[forms]
order = "fixed"
break_every = 2
break_between_blocks = false
"""


def test_other_modes_time_limit_and_breaks(x_display, tmp_path):  # noqa: F811
    """Matrices panel builder, strings and grids choices, a timed-out item, breaks."""
    from twofold.study.forms import build_forms, write_forms

    first = '[[blocks]]\nname = "x"\nfamilies = ["matrices"]\ninstructions = "instructions.txt"\n'
    path = make_runner_study(tmp_path / "o", OTHER_BANK + first, n_forms=1)
    bank = load_study(path).bank()
    strings = [it.id for it in bank if it.family == "strings"]
    mixed = strings[:2] + [it.id for it in bank if it.family == "grids"]
    late = strings[2]
    text = path.read_text("utf-8").replace(
        first, OTHER_BLOCKS.format(mixed=json.dumps(mixed), late=json.dumps([late]))
    )
    path.write_text(text, "utf-8")
    st = load_study(path)
    write_forms(st, build_forms(st, 1))
    d = Driver(x_display, st.file, "P001", tmp_path)
    breaks, expected = 0, []
    while True:
        s = d.wait(None)
        if s["screen"] == "trial" and s["block"] == "quick":
            continue  # no answer: the item times out
        if s["screen"] == "trial":
            exp = answer(d, bank[s["item"]], s["mode"], step=len(expected))
            exp.update(trial=s["trial"], item=s["item"])
            expected.append(exp)
        elif s["screen"] == "end":
            d.key("space")
            break
        else:
            breaks += s["screen"] == "break"
            d.key("y" if s["screen"] == "consent" else "space")
    rc, err = d.finish()
    assert rc == 0, err
    df = read_trials(st.logs_dir / "human" / "P001.csv")
    rule, ok, late_row = df.iloc[0], df.iloc[1:-1], df.iloc[-1]
    # the typed rule is kept verbatim; it is not in the scorable notation, so status invalid
    assert rule["family"] == "contrast" and rule["mode"] == "generate"
    assert json.loads(rule["response"]) == "dark ones" and rule["status"] == "invalid"
    assert pd.isna(rule["correct"]) and "not automatically scorable" in rule["detail"]
    assert list(ok["mode"]) == ["generate"] * 2 + ["select"] * 4
    assert set(ok["family"]) == {"matrices", "strings", "grids"}
    assert ok["correct"].all() and (ok["status"] == "ok").all()
    for row, exp in zip(ok.to_dict("records"), expected[1:], strict=True):
        assert json.loads(row["response"]) == exp["response"]
    assert late_row["status"] == "timeout" and late_row["item"] == late
    assert late_row["rt_ms"] != late_row["rt_ms"]  # NaN: no response
    assert late_row["response"] is None
    # break_every = 2 within a block: after the 2nd item of "mixed" (4 items)
    assert breaks == 1
