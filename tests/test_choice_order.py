"""Select-mode choices in a per-trial order: the order function, the screen-to-bank mapping,
the ``choice_order`` log column in a real window session, and old logs without that column."""

from __future__ import annotations

import csv
import io
import itertools
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from _display import x_display  # noqa: F401  (the window fixture)
from twofold.experiments.human.prepare import (
    choice_order,
    parse_runner,
    prepare_session,
    shown_item,
)
from twofold.study import get_family, load_study, read_trials
from twofold.study.exceptions import SpecError


def _order(trial, *, n=4, seed=8, respondent="P001", item_id="mat-0123456789ab"):
    return choice_order(n, seed=seed, respondent=respondent, trial=trial, item_id=item_id)


def test_the_order_is_a_deterministic_permutation_of_its_own_per_trial():
    a = _order(3)
    assert sorted(a) == [1, 2, 3, 4]
    assert _order(3) == a  # the same trial again (a resumed session): the same order
    # 200 trials of one respondent, or one trial of 200 respondents / items / studies: orders
    # of their own (with 24 orders, at most a few dozen repeats each; never all the same)
    for vary in (
        [_order(t) for t in range(200)],
        [_order(3, respondent=f"P{k:03d}") for k in range(200)],
        [_order(3, item_id=f"mat-{k:012d}") for k in range(200)],
        [_order(3, seed=k) for k in range(200)],
    ):
        assert len(set(vary)) == 24


def test_every_order_is_reachable_and_the_first_position_is_uniform():
    from scipy.stats import chisquare

    seen = {_order(t, n=4) for t in range(2000)}
    assert seen == set(itertools.permutations(range(1, 5)))  # all 24 orders of 4 choices
    seen3 = {_order(t, n=3, item_id="s") for t in range(300)}
    assert seen3 == set(itertools.permutations(range(1, 4)))
    n, trials = 8, 4000
    first = np.bincount([_order(t, n=n)[0] for t in range(trials)], minlength=n + 1)[1:]
    # reference: SOURCES.md#position-uniformity — Pearson's chi-square goodness of fit, via
    # scipy.stats.chisquare; equal expected counts per position
    stat, p = chisquare(first)
    assert p > 0.001, (first, stat)
    assert first.min() > 0.8 * trials / n and first.max() < 1.2 * trials / n
    # the same check tells a biased order apart (it can fail): answer-first half the time
    biased = first.copy()
    biased[0] += trials // 2
    assert chisquare(biased)[1] < 1e-6


def test_the_shown_item_numbers_choices_as_on_screen_and_maps_back(tmp_path):
    from _display import make_runner_study

    path = make_runner_study(tmp_path / "s", _BODY, n_forms=1)
    bank = load_study(path).bank()
    item = next(iter(bank))
    fam = get_family(item.family)
    order = _order(0, n=len(item.choices), item_id=item.id)
    shown = shown_item(item, order)
    assert shown.id == item.id and shown.choices != item.choices
    for pos in range(1, len(order) + 1):
        # what stands at screen position pos is bank choice order[pos - 1]
        assert shown.choices[pos - 1] == item.choices[order[pos - 1] - 1]
        assert (
            fam.score(shown, pos, "select").correct
            == fam.score(item, order[pos - 1], "select").correct
        )
    assert order[shown.answer_choice - 1] == item.answer_choice
    assert shown_item(item, None) is item
    with pytest.raises(ValueError, match="does not fit"):
        shown_item(item, (1, 2))


def test_the_study_option_turns_shuffling_off(tmp_path):
    from _display import make_runner_study
    from twofold.experiments.human.runner import _Session

    on = prepare_session(make_runner_study(tmp_path / "on", _BODY, n_forms=1), "P001")
    assert on.options.shuffle_choices is True  # the default
    off_path = make_runner_study(
        tmp_path / "off", _BODY, runner="size = [1024, 768]\nshuffle_choices = false\n", n_forms=1
    )
    off = prepare_session(off_path, "P001")
    assert off.options.shuffle_choices is False
    block = on.form.blocks[0]
    item = on.bank[block.items[0]]
    assert _Session(on).order(item, block, 0) == choice_order(
        len(item.choices), seed=on.study.seed, respondent="P001", trial=0, item_id=item.id
    )
    assert _Session(off).order(off.bank[item.id], off.form.blocks[0], 0) is None
    bad = load_study(off_path)
    bad.raw["runner"]["shuffle_choices"] = "yes"
    with pytest.raises(SpecError, match="field 'runner.shuffle_choices': got 'yes'"):
        parse_runner(bad)


_BODY = """
[bank.spec]
seed = 4
[bank.spec.families.matrices]
n = 5
modes = ["select"]

[[blocks]]
name = "figures"
families = ["matrices"]
mode = "select"
instructions = "instructions.txt"
practice = 1

[forms]
order = "fixed"
break_between_blocks = false
"""


def _expected(plan_study, item, trial):
    return list(
        choice_order(
            len(item.choices),
            seed=plan_study.seed,
            respondent="P001",
            trial=trial,
            item_id=item.id,
        )
    )


def _shown(order, bank_choice):
    return order.index(bank_choice) + 1


@pytest.mark.display
def test_window_session_shows_the_order_and_logs_the_bank_choice(x_display, tmp_path):  # noqa: F811
    """Keys and clicks on the numbers shown, a practice mistake, ESC, resume: the log holds
    bank choice numbers, the correct scores and the order each trial showed."""
    from _display import Driver, make_runner_study

    path = make_runner_study(tmp_path / "w", _BODY, n_forms=1)
    st = load_study(path)
    bank = st.bank()
    d = Driver(x_display, st.file, "P001", tmp_path)
    assert d.wait("consent")["screen"] == "consent"
    d.key("y")
    d.wait("instructions")
    d.key("space")
    # the practice item (not logged): a wrong choice; the feedback names the number on screen
    s = d.wait("trial")
    item = bank[s["item"]]
    assert s["trial"] is None and s["choice_order"] == _expected(st, item, "practice:figures:0")
    right = _shown(s["choice_order"], item.answer_choice)
    d.key(str(right % len(item.choices) + 1))  # a wrong number
    fb = d.wait("feedback")
    assert fb["text"].startswith(f"Not correct. The right choice was number {right}.")
    d.key("space")
    logged = []
    for k in range(3):
        s = d.wait("trial")
        item = bank[s["item"]]
        order = s["choice_order"]
        assert s["trial"] == k and order == _expected(st, item, k)
        if k == 0:
            d.key(str(_shown(order, item.answer_choice)))
            logged.append((item.answer_choice, True))
        elif k == 1:
            d.click(f"choice:{_shown(order, item.answer_choice)}")
            logged.append((item.answer_choice, True))
        else:  # the bank's number pressed: it means the choice shown at that position
            d.key(str(item.answer_choice))
            bank_no = order[item.answer_choice - 1]
            logged.append((bank_no, bank_no == item.answer_choice))
    s = d.wait("trial")
    before = (s["trial"], s["item"], s["choice_order"])
    d.key("Escape")
    d.wait("confirm")
    d.key("y")
    rc, err = d.finish()
    assert rc == 3, err
    # resumed: the open trial comes back in the same order
    d = Driver(x_display, st.file, "P001", tmp_path, resume=True)
    d.wait("instructions")
    d.key("space")
    while True:
        s = d.wait(None)
        if s["screen"] == "end":
            d.key("space")
            break
        assert s["screen"] == "trial"
        item = bank[s["item"]]
        if s["trial"] == before[0]:
            assert (s["trial"], s["item"], s["choice_order"]) == before
        assert s["choice_order"] == _expected(st, item, s["trial"])
        d.key(str(_shown(s["choice_order"], item.answer_choice)))
        logged.append((item.answer_choice, True))
    rc, err = d.finish()
    assert rc == 0, err
    df = read_trials(st.logs_dir / "human" / "P001.csv")
    assert len(logged) == 4  # 5 items: one is the practice item
    assert list(df["trial"]) == list(range(4))
    shuffled = 0
    for row, (resp, ok) in zip(df.to_dict("records"), logged, strict=True):
        order = _expected(st, bank[row["item"]], row["trial"])
        assert row["choice_order"] == " ".join(map(str, order))
        assert json.loads(row["response"]) == resp and bool(row["correct"]) is ok, row
        shuffled += order != sorted(order)
    assert shuffled >= 3  # 8 choices: the bank order comes back 1 time in 40320


def _strip_choice_order(csv_path: Path) -> None:
    rows = list(csv.reader(io.StringIO(csv_path.read_text("utf-8"), newline="")))
    assert rows[0][-1] == "choice_order"
    buf = io.StringIO(newline="")
    csv.writer(buf, lineterminator="\n").writerows(r[:-1] for r in rows)
    csv_path.write_text(buf.getvalue(), "utf-8")


def test_logs_without_choice_order_go_through_analyze(tmp_path):
    from _simdata import make_study, tally_registered
    from twofold.experiments.cli import main

    with tally_registered():
        path = make_study(tmp_path / "toy", n_parents=4, n_humans=3)
        logs = sorted((path.parent / "logs").rglob("*.csv"))
        assert logs
        for p in logs:
            _strip_choice_order(p)
        # one log in the new layout beside the old ones, with an order logged
        new = logs[0]
        text = new.read_text("utf-8").splitlines()
        lines = [text[0] + ",choice_order"] + [t + "," for t in text[1:]]
        new.write_text("\n".join(lines) + "\n", "utf-8")
        assert "choice_order" not in logs[1].read_text("utf-8").splitlines()[0]
        rc = main(["analyze", str(path), "--only", "data,export"])
    assert rc == 0
    out = path.parent / "results"
    trials = pd.read_csv(out / "trials.csv", keep_default_na=False)
    assert "choice_order" in trials.columns and (trials["choice_order"] == "").all()
    n_rows = sum(len(read_trials(p)) for p in logs)
    assert len(trials) == n_rows
    import frictionless

    # reference: SOURCES.md#frictionless — Data Package / Table Schema, via frictionless
    report = frictionless.validate(out / "dataset" / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "message"])[:5]
    schema = json.loads((out / "dataset" / "trials.schema.json").read_text())
    (field,) = [f for f in schema["fields"] if f["name"] == "choice_order"]
    assert field["type"] == "string" and "screen" in field["description"]
