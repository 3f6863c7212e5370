"""The trial log: writer, reader, sidecar and table schema."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from twofold.study.exceptions import LogError
from twofold.study.logs import TRIAL_COLUMNS, TrialLogWriter, read_trials, table_schema


def _row(trial: int, **kw):
    row: dict = {
        "study": "s",
        "bank_hash": "ab" * 32,
        "respondent": "P001",
        "kind": "human",
        "synthetic": False,
        "session": "P001",
        "form": "F1",
        "block": "main",
        "trial": trial,
        "item": "str-000000000000",
        "family": "strings",
        "mode": "generate",
        "response": "ijkm",
        "correct": True,
        "status": "ok",
        "rt_ms": 1234.5,
        "onset_s": 1.0,
        "response_s": 2.2345,
    }
    row.update(kw)
    return row


def test_rows_round_trip_with_types(tmp_path):
    path = tmp_path / "P001.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0))
        log.append(_row(1, correct=False, error_type="literal", response={"a": [1, 2]}))
        log.append(_row(2, correct=None, status="timeout", response=None, rt_ms=None))
        log.update_sidecar(session="P001", status="complete")
    df = read_trials(path)
    assert list(df.columns) == [c.name for c in TRIAL_COLUMNS]
    assert df["trial"].tolist() == [0, 1, 2]
    assert df["correct"].tolist()[:2] == [True, False] and pd.isna(df["correct"][2])
    assert json.loads(df["response"][0]) == "ijkm"
    assert json.loads(df["response"][1]) == {"a": [1, 2]}
    assert df["rt_ms"][0] == pytest.approx(1234.5) and pd.isna(df["rt_ms"][2])
    side = json.loads((tmp_path / "P001.json").read_text())
    assert side["status"] == "complete"
    assert (tmp_path / "trials.schema.json").exists()


def test_appending_to_an_existing_log_continues_it(tmp_path):
    path = tmp_path / "P002.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0))
    with TrialLogWriter(path) as log:
        log.append(_row(1))
    assert read_trials(path)["trial"].tolist() == [0, 1]


def test_a_line_cut_short_by_a_crash_is_dropped(tmp_path):
    path = tmp_path / "P003.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0))
    with open(path, "a", encoding="utf-8") as fh:
        fh.write("s,abab,P003,human")  # a crash in the middle of a row
    assert read_trials(path)["trial"].tolist() == [0]


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"kind": "robot"}, "kind"),
        ({"synthetic": "no"}, "synthetic"),
        ({"trial": 1.5}, "trial"),
        ({"status": "fine"}, "status"),
        ({"respondent": None}, "respondent"),
        ({"name": "Ada"}, "name"),
    ],
)
def test_bad_rows_are_refused_naming_the_column(tmp_path, change, field):
    with TrialLogWriter(tmp_path / "x.csv") as log, pytest.raises(LogError) as info:
        log.append({**_row(0), **change})
    assert f"field '{field}'" in str(info.value)


def test_table_schema_is_a_valid_frictionless_schema():
    # reference: SOURCES.md#frictionless — Table Schema specification, via frictionless
    from frictionless import Schema

    schema = Schema.from_descriptor(table_schema())
    assert [f.name for f in schema.fields] == [c.name for c in TRIAL_COLUMNS]
