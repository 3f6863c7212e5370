"""The by-item gap SD: profile intervals on small studies, Wald (said in a note) on large ones."""

from __future__ import annotations

import pytest
from _simdata import make_study, tally_registered
from twofold.analysis import load_study_data, run


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    with tally_registered():
        root = tmp_path_factory.mktemp("gap")
        make_study(root, n_parents=8, n_humans=6, seeds=(0, 1))
        yield load_study_data(root / "study.toml")


def _gap(data, monkeypatch, how, limit):
    monkeypatch.setattr(run, "GAP_PROFILE_MAX_TRIALS", limit)
    opts = {"conf_level": 0.95, "gap_intervals": how}
    return run._mixed(data, opts)["item_gap_variation"]


def test_auto_switches_to_wald_above_the_limit_and_says_so(data, monkeypatch):
    small = _gap(data, monkeypatch, "auto", 10**9)
    large = _gap(data, monkeypatch, "auto", 10)
    assert not small["note"].fillna("").str.contains("Wald").any()
    assert large["note"].str.contains("SD interval: Wald on the log scale").all()
    # the point estimate is the same fit; only the interval method differs
    assert small["sd"].tolist() == pytest.approx(large["sd"].tolist(), rel=1e-6)
    assert small["gap"].tolist() == pytest.approx(large["gap"].tolist(), rel=1e-6)


def test_an_explicit_choice_is_kept_without_a_note(data, monkeypatch):
    wald = _gap(data, monkeypatch, "wald", 10**9)
    assert not wald["note"].fillna("").str.contains("SD interval").any()


def test_the_option_is_checked():
    assert run._ok("gap_intervals", "wald") and run._ok("gap_intervals", "auto")
    assert not run._ok("gap_intervals", "exact")
    assert run.OPTIONS["gap_intervals"] == ("auto", "one of auto, profile, wald")
