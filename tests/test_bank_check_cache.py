"""Family checks on bank load run once per bank content, family versions and twofold version."""

from __future__ import annotations

import pytest
from _simdata import make_bank, tally_registered
from twofold.study.bank import load_bank, write_bank
from twofold.study.families import get_family


@pytest.fixture
def counted(monkeypatch, tmp_path):
    monkeypatch.setenv("TWOFOLD_CACHE_DIR", str(tmp_path / "cache"))
    calls: list[bool] = []
    with tally_registered():
        fam = get_family("tallyup")
        original = type(fam).validate_item

        def spy(self, item, *, where=None, deep=False):
            calls.append(deep)
            return original(self, item, where=where, deep=deep)

        monkeypatch.setattr(type(fam), "validate_item", spy)
        yield calls


def test_full_checks_run_once_per_bank_content(counted, tmp_path):
    bank = make_bank(6, isomorphs=False)
    write_bank(bank, tmp_path / "bank")
    load_bank(tmp_path / "bank")
    assert counted == [True] * 6  # every item, with the generator's own checks
    load_bank(tmp_path / "bank")
    assert len(counted) == 6  # remembered: the same bytes are not checked again
    other = make_bank(6, seed=2, isomorphs=False)
    write_bank(other, tmp_path / "other")
    load_bank(tmp_path / "other")
    assert len(counted) == 12  # another content is checked in full


def test_an_unwritable_cache_only_costs_the_checks_again(counted, tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    monkeypatch.setenv("TWOFOLD_CACHE_DIR", str(blocker))
    bank = make_bank(4, isomorphs=False)
    write_bank(bank, tmp_path / "bank")
    load_bank(tmp_path / "bank")
    load_bank(tmp_path / "bank")
    assert counted == [True] * 8
