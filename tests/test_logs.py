"""The trial log: writer, reader, sidecar and table schema."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from twofold.study.exceptions import LogError, LogWarning
from twofold.study.logs import (
    TRIAL_COLUMNS,
    SessionRecord,
    TrialLogWriter,
    check_session,
    parse_session_id,
    read_session,
    read_sidecar,
    read_trials,
    session_id,
    session_logs,
    table_schema,
)


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
        "response": "pqrt",
        "correct": True,
        "status": "ok",
        "rt_ms": 1234.5,
        "onset_s": 1.0,
        "response_s": 2.2345,
    }
    row.update(kw)
    return row


def _record(session: str) -> dict:
    return dict(
        study="s",
        bank_hash="ab" * 32,
        session=session,
        respondent=session,
        kind="human",
        synthetic=False,
        form="F1",
        status="running",
    )


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
    assert json.loads(df["response"][0]) == "pqrt"
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


def test_a_line_cut_short_by_a_crash_is_not_dropped_silently(tmp_path):
    path = tmp_path / "P003.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0))
    with open(path, "a", encoding="utf-8") as fh:
        fh.write("s,abab,P003,human")  # a crash in the middle of a row
    with pytest.warns(LogWarning, match="P003.csv: the last row is cut short"):
        assert read_trials(path)["trial"].tolist() == [0]
    with pytest.raises(LogError, match="cut short"):
        read_trials(path, torn="raise")


def _torn_tail(path, kind):
    """Damage the end of a log the ways a power cut or a full disk do."""
    data = path.read_bytes()
    if kind == "unterminated":  # the whole last row but its newline
        path.write_bytes(data[:-1])
    elif kind == "half_row":  # the last row cut in the middle
        path.write_bytes(data[: len(data) - 40])
    elif kind == "open_quote":  # cut inside a quoted cell holding a newline
        with open(path, "a", encoding="utf-8") as fh:
            fh.write('s,x,P004,human,false,P004,F1,main,2,i,strings,generate,"ab\ncd')
    return data


@pytest.mark.parametrize("kind", ["unterminated", "half_row", "open_quote"])
def test_resume_repairs_a_torn_last_row_and_records_it(tmp_path, kind):
    path = tmp_path / "P004.csv"
    with TrialLogWriter(path) as log:
        log.update_sidecar(**_record("P004"))
        log.append(_row(0, session="P004", respondent="P004"))
        log.append(_row(1, session="P004", respondent="P004", detail="two\nlines"))
    _torn_tail(path, kind)
    kept = [0] if kind != "open_quote" else [0, 1]
    with TrialLogWriter(path) as log:
        assert len(log.repairs) == 1 and log.repairs[0]["after_row"] == len(kept)
        for t in range(len(kept), 3):
            log.append(_row(t, session="P004", respondent="P004"))
        side = log.update_sidecar(status="complete", n_trials=3)
    df = read_trials(path, torn="raise")  # nothing torn is left
    assert df["trial"].tolist() == [0, 1, 2]
    assert side["status"] == "complete" and side["n_rows"] == 3
    assert read_sidecar(tmp_path / "P004.json")["repairs"][0]["bytes_cut"] > 0


def test_a_sidecar_never_says_complete_with_rows_missing(tmp_path):
    path = tmp_path / "P005.csv"
    with TrialLogWriter(path) as log:
        log.update_sidecar(**_record("P005"))
        log.append(_row(0, session="P005", respondent="P005"))
        side = log.update_sidecar(status="complete", n_trials=2)
    assert side["status"] == "incomplete" and "1 rows on disk" in side["problem"]
    assert read_sidecar(tmp_path / "P005.json")["status"] == "incomplete"


def test_a_broken_middle_row_is_an_error_not_a_gap(tmp_path):
    path = tmp_path / "P006.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0))
        log.append(_row(1))
    lines = path.read_text().splitlines(keepends=True)
    path.write_text(lines[0] + "a,b,c\n" + lines[2])
    with pytest.raises(LogError, match="row 1: 3 cells; accepted: 23 cells"):
        read_trials(path)
    with pytest.raises(LogError, match="row 1: 3 cells"):
        TrialLogWriter(path)


@pytest.mark.parametrize(
    ("column", "cell", "accepted"),
    [
        ("trial", "abc", "an integer"),
        ("rt_ms", "fast", "a finite number or empty"),
        ("rt_ms", "inf", "a finite number or empty"),
        ("correct", "yes", "true, false or empty"),
        ("status", "done", "one of ok, timeout, invalid, failed"),
        ("kind", "", "a string value (required)"),
        ("choice_order", "3;1", "choice numbers separated by spaces, or empty"),
        ("choice_order", "0 1", "choice numbers separated by spaces, or empty"),
    ],
)
def test_bad_cells_are_named_on_reading(tmp_path, column, cell, accepted):
    path = tmp_path / "P007.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0))
    names = [c.name for c in TRIAL_COLUMNS]
    head, row = path.read_text().splitlines()
    cells = next(__import__("csv").reader([row]))
    cells[names.index(column)] = cell
    path.write_text(head + "\n" + ",".join(cells) + "\n")
    with pytest.raises(LogError) as info:
        read_trials(path)
    assert str(info.value) == (
        f"P007.csv row 1: field '{column}': got {cell!r}; accepted: {accepted}."
    )


def test_session_ids_build_and_parse_in_one_place():
    assert session_id("ref-model", 12) == "ref-model-s12"
    assert parse_session_id("ref-model-s12") == ("ref-model", 12)
    assert parse_session_id("P001") is None
    with pytest.raises(LogError, match="field 'seed'"):
        session_id("x", -1)


def test_session_record_checks_its_fields():
    rec = SessionRecord(**_record("P008"))
    assert SessionRecord.from_dict(rec.to_dict()) == rec
    with pytest.raises(LogError, match="field 'status': got 'done'; accepted: one of running"):
        SessionRecord(**{**_record("P008"), "status": "done"})
    with pytest.raises(LogError, match="field 'synthetic': got 'no'; accepted: a boolean"):
        check_session({**rec.to_dict(), "synthetic": "no"})
    with pytest.raises(LogError, match="field 'kind': got None"):
        check_session({k: v for k, v in rec.to_dict().items() if k != "kind"})


def test_only_declared_session_logs_are_found_and_read(tmp_path):
    human = tmp_path / "human"
    with TrialLogWriter(human / "P009.csv") as log:
        log.update_sidecar(**_record("P009"))
        log.append(_row(0, session="P009", respondent="P009"))
    (human / "frames").mkdir()
    (human / "frames" / "P009.frames.csv").write_text("trial,n\n0,1\n")
    (human / "notes.csv").write_text("a,b\n1,2\n")  # a lab's own file
    assert session_logs(tmp_path) == [human / "P009.csv"]
    log = read_session(human / "P009.csv", bank_hash="ab" * 32, item_ids={"str-000000000000"})
    assert (log.session, log.kind, len(log.trials)) == ("P009", "human", 1)
    with pytest.raises(LogError, match="field 'bank_hash'"):
        read_session(human / "P009.csv", bank_hash="cd" * 32)
    with pytest.raises(LogError, match="field 'item': got 'str-000000000000'"):
        read_session(human / "P009.csv", item_ids=set())
    (human / "P009.json").unlink()
    assert session_logs(tmp_path) == [human / "P009.csv"]  # a trial log: reported, not skipped
    with pytest.raises(LogError, match="session sidecar is missing"):
        read_session(human / "P009.csv")


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


def _old_format(path, n_rows: int) -> None:
    """Rewrite ``path`` the way logs were written before ``choice_order`` (header and rows
    without the last column)."""
    import csv
    import io

    rows = list(csv.reader(io.StringIO(path.read_text("utf-8"), newline="")))
    assert rows[0][-1] == "choice_order" and len(rows) == n_rows + 1
    buf = io.StringIO(newline="")
    csv.writer(buf, lineterminator="\n").writerows(r[:-1] for r in rows)
    path.write_text(buf.getvalue(), "utf-8")


def test_choice_order_round_trips_and_is_the_last_column(tmp_path):
    assert TRIAL_COLUMNS[-1].name == "choice_order" and not TRIAL_COLUMNS[-1].required
    path = tmp_path / "P010.csv"
    with TrialLogWriter(path) as log:
        log.append(_row(0, mode="select", response=3, choice_order="3 1 4 2"))
        log.append(_row(1))
        with pytest.raises(LogError, match="field 'choice_order': got '3,1,4,2'"):
            log.append(_row(2, choice_order="3,1,4,2"))
    df = read_trials(path)
    assert df["choice_order"].tolist() == ["3 1 4 2", None]


def test_a_log_without_choice_order_still_reads_and_resumes(tmp_path):
    path = tmp_path / "P011.csv"
    with TrialLogWriter(path) as log:
        log.update_sidecar(**_record("P011"))
        log.append(_row(0, session="P011", respondent="P011"))
        log.append(_row(1, session="P011", respondent="P011", correct=False))
    _old_format(path, 2)
    head = path.read_text("utf-8").splitlines()[0]
    assert head.endswith(",detail") and "choice_order" not in head
    df = read_trials(path)
    assert list(df.columns) == [c.name for c in TRIAL_COLUMNS]
    assert df["choice_order"].isna().all() and df["correct"].tolist() == [True, False]
    # a torn last row in the old layout is still recognised as torn
    with open(path, "a", encoding="utf-8") as fh:
        fh.write("s,ab")
    with pytest.warns(LogWarning, match="cut short"):
        assert len(read_trials(path)) == 2
    # resuming on it: the header is brought up to date, the torn row cut, old rows kept
    with TrialLogWriter(path) as log:
        assert log.n_rows == 2 and log.repairs and log.repairs[0]["text"] == "s,ab"
        log.append(_row(2, session="P011", respondent="P011", choice_order="2 1"))
    lines = path.read_text("utf-8").splitlines()
    assert lines[0].endswith(",detail,choice_order") and len(lines) == 4
    df = read_trials(path)
    assert df["trial"].tolist() == [0, 1, 2]
    assert df["choice_order"].tolist() == [None, None, "2 1"]
    assert df["correct"].tolist() == [True, False, True]
