"""Tidy data from session logs, and the open-layout export."""

from __future__ import annotations

import json
import re
import shutil
import warnings

import frictionless
import numpy as np
import pandas as pd
import pytest
from _simdata import make_bank, make_study, tally_registered, write_session
from twofold.analysis import export_dataset, item_table, load_study_data, trials_table_schema
from twofold.analysis.data import BASE_COLUMNS, ISSUE_COLUMNS, SESSION_COLUMNS
from twofold.study import load_study
from twofold.study.exceptions import InputError, LogError, LogWarning


@pytest.fixture(scope="module")
def registered():
    with tally_registered():
        yield


@pytest.fixture(scope="module")
def study_dir(registered, tmp_path_factory):
    root = tmp_path_factory.mktemp("toy")
    make_study(root, n_parents=8, n_humans=5, seeds=(0, 1))
    return root


@pytest.fixture()
def fresh(registered, tmp_path, study_dir):
    """A private copy of the toy study that a test may add logs to."""
    dest = tmp_path / "study"
    shutil.copytree(study_dir, dest)
    return dest


@pytest.fixture(scope="module")
def data(study_dir):
    return load_study_data(study_dir / "study.toml")


def test_trials_table_has_the_documented_columns_and_one_row_per_trial(data):
    t = data.trials
    assert list(t.columns) == list(BASE_COLUMNS) + ["factor_layout", "factor_width"]
    # 8 parents + 8 isomorphs, answered by 5 people and 2 solvers x 2 seeds
    assert len(t) == 16 * (5 + 4)
    assert not t.duplicated(["session", "trial"]).any()
    assert list(data.sessions.columns) == list(SESSION_COLUMNS)
    assert list(data.issues.columns) == list(ISSUE_COLUMNS) and data.issues.empty
    assert str(t["correct"].dtype) == "boolean" and str(t["seed"].dtype) == "Int64"
    assert t["factor_width"].dtype == np.float64


def test_group_seed_and_synthetic_come_from_the_sidecars(data):
    t = data.trials
    hum = t[t["kind"] == "human"]
    assert set(hum["group"]) == {"human"} and hum["seed"].isna().all()
    mach = t[t["kind"] == "machine"]
    assert set(mach["group"]) == {"steadybot", "widebot"}
    seeds = mach.groupby("respondent")["seed"].first().to_dict()
    assert seeds == {"steadybot-s0": 0, "steadybot-s1": 1, "widebot-s0": 0, "widebot-s1": 1}
    assert t["synthetic"].all()  # every simulated respondent stays marked
    assert set(mach["effort_unit"]) == {"nodes"} and mach["rt_ms"].isna().all()


def test_parent_is_the_variant_of_for_isomorphs_and_the_own_id_otherwise(data):
    t = data.trials.drop_duplicates("item")
    iso = t[t["isomorph"]]
    par = t[~t["isomorph"]]
    assert len(iso) == len(par) == 8
    assert (iso["parent"] == iso["variant_of"]).all()
    assert (iso["variant_operator"] == "shift").all()
    assert (par["parent"] == par["item"]).all() and par["variant_of"].isna().all()
    # factors are copied from the bank's items
    bank_items = {it.id: it for it in data.bank}
    for row in t.itertuples(index=False):
        assert row.factor_width == bank_items[row.item].factors["width"]
        assert row.factor_layout == bank_items[row.item].factors["layout"]


def test_item_table_follows_chains_of_isomorphs_to_the_root(registered):
    from _simdata import FAMILY

    bank = make_bank(2)
    parent = bank.items[0]
    child = bank.items[1]
    grandchild = FAMILY.vary(child, "shift", np.random.default_rng(0))
    from twofold.study import Bank

    items = item_table(Bank.from_items([*bank.items, grandchild]))
    assert items.set_index("item").loc[grandchild.id, "parent"] == parent.id


def test_a_log_from_another_bank_is_refused_naming_the_file(fresh):
    bank = load_study(fresh).bank(create=False)
    write_session(
        fresh / "logs",
        bank,
        respondent="odd-s0",
        kind="machine",
        ability=0.0,
        rng=np.random.default_rng(1),
        solver="odd",
        seed=0,
        bank_hash="f" * 64,
    )
    with pytest.raises(LogError, match=r"machine/odd-s0\.csv: field 'bank_hash'") as err:
        load_study_data(fresh)
    assert err.value.field == "bank_hash"


def test_duplicate_trials_are_reported_with_a_specific_warning(fresh):
    bank = load_study(fresh).bank(create=False)
    first = bank.items[0]
    dup = dict(
        study="toy", bank_hash=bank.hash, respondent="P001", kind="human", synthetic=False,
        session="P001", form="F1", block="main", trial=0, item=first.id, family="tallyup",
        mode="generate", response=-7, correct=False, error_type="other", status="ok",
        rt_ms=999.0,
    )  # fmt: skip
    write_session(
        fresh / "logs", bank, respondent="P001", kind="human", ability=0.0,
        rng=np.random.default_rng(2), synthetic=False, extra_rows=[dup],
    )  # fmt: skip
    with pytest.warns(LogWarning, match="1 duplicate trial"):
        d = load_study_data(fresh)
    iss = d.issues
    assert iss[["session", "issue", "n"]].values.tolist() == [["P001", "duplicate_trial", 1]]
    p = d.trials[d.trials["respondent"] == "P001"]
    assert len(p) == 16 and p.loc[p["trial"] == 0, "rt_ms"].iloc[0] != 999.0  # first row kept
    row = d.sessions.set_index("session").loc["P001"]
    assert (row["n_rows"], row["n_trials"], row["n_duplicates"]) == (17, 16, 1)
    with pytest.raises(LogError, match="P001.csv: trial 0 is logged"):
        load_study_data(fresh, duplicates="raise")
    with pytest.warns(LogWarning):
        kept = load_study_data(fresh, duplicates="keep")
    assert (kept.trials["respondent"] == "P001").sum() == 17


def test_missing_trials_are_counted_against_the_sidecar(fresh):
    bank = load_study(fresh).bank(create=False)
    write_session(
        fresh / "logs", bank, respondent="P002", kind="human", ability=0.0,
        rng=np.random.default_rng(3), synthetic=False, items=bank.items[:10], n_trials=16,
    )  # fmt: skip
    with pytest.warns(LogWarning, match="6 missing trials"):
        d = load_study_data(fresh)
    assert d.issues["issue"].tolist() == ["missing_trials"]
    assert d.sessions.set_index("session").loc["P002", "n_missing"] == 6


def test_synthetic_respondents_can_be_kept_dropped_or_isolated(fresh):
    bank = load_study(fresh).bank(create=False)
    write_session(
        fresh / "logs", bank, respondent="P003", kind="human", ability=0.0,
        rng=np.random.default_rng(4), synthetic=False,
    )  # fmt: skip
    assert set(load_study_data(fresh, synthetic="drop").trials["respondent"]) == {"P003"}
    only = load_study_data(fresh, synthetic="only").trials
    assert "P003" not in set(only["respondent"]) and only["synthetic"].all()
    with pytest.raises(InputError, match="field 'synthetic'"):
        load_study_data(fresh, synthetic="maybe")


def test_an_item_missing_from_the_bank_is_an_error(fresh):
    bank = load_study(fresh).bank(create=False)
    path = write_session(
        fresh / "logs", bank, respondent="P004", kind="human", ability=0.0,
        rng=np.random.default_rng(5), synthetic=False,
    )  # fmt: skip
    text = path.read_text().replace(bank.items[3].id, "tly-000000000000")
    path.write_text(text)
    with pytest.raises(LogError, match=r"human/P004\.csv: field 'item': got 'tly-000000000000'"):
        load_study_data(fresh)


def test_summary_mentions_every_group(data):
    text = data.summary()
    assert "steadybot" in text and "widebot" in text and "(synthetic)" in text


# -- export ----------------------------------------------------------------------------------------
PSYCHDS_NAME = re.compile(r"^([a-z]+-[a-zA-Z0-9]+)(_[a-z]+-[a-zA-Z0-9]+)*_data\.(csv|json)$")


@pytest.fixture(scope="module")
def exported(data, study_dir, tmp_path_factory):
    out = tmp_path_factory.mktemp("export") / "dataset"
    return export_dataset(data, out, logs_dir=study_dir / "logs")


def test_export_is_a_valid_frictionless_package(exported):
    # reference: SOURCES.md#frictionless — Data Package / Table Schema, via frictionless
    report = frictionless.validate(exported / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])[:5]


def test_export_validation_catches_a_broken_value(exported, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(exported, copy)
    f = copy / "data" / "study-toy_table-trials_data.csv"
    lines = f.read_text().splitlines()
    cells = lines[1].split(",")
    cells[list(lines[0].split(",")).index("correct")] = "maybe"
    lines[1] = ",".join(cells)
    f.write_text("\n".join(lines) + "\n")
    assert not frictionless.validate(copy / "datapackage.json").valid


def test_export_uses_psychds_names_and_description(exported, data):
    names = sorted(p.name for p in (exported / "data").iterdir())
    assert all(PSYCHDS_NAME.match(n) for n in names), names
    assert "study-toy_kind-machine_respondent-steadybots0_data.csv" in names
    assert "study-toy_kind-machine_respondent-steadybots0_data.json" in names
    desc = json.loads((exported / "dataset_description.json").read_text())
    # common practice (SOURCES.md#psych-ds): Psych-DS requires @context, @type Dataset, name,
    # description, variableMeasured
    assert desc["@context"] == "https://schema.org/" and desc["@type"] == "Dataset"
    measured = {v["name"] for v in desc["variableMeasured"]}
    assert measured == set(data.trials.columns)
    side = json.loads(
        (exported / "data" / "study-toy_kind-machine_respondent-steadybots0_data.json").read_text()
    )
    assert side["solver"] == "steadybot" and side["seed"] == 0
    one = pd.read_csv(exported / "data" / "study-toy_kind-human_respondent-S001_data.csv")
    assert set(one["respondent"]) == {"S001"} and len(one) == 16


def test_table_schema_describes_every_column(data):
    schema = trials_table_schema(data.trials)
    by = {f["name"]: f for f in schema["fields"]}
    assert list(by) == list(data.trials.columns)
    assert by["correct"]["type"] == "boolean" and by["factor_width"]["type"] == "number"
    assert by["factor_layout"]["type"] == "string"
    assert by["kind"]["constraints"]["enum"] == ["human", "machine"]
    assert all(f["description"] and f["description"] != f["name"] for f in schema["fields"])


def test_export_refuses_to_overwrite_by_default(exported, data):
    with pytest.raises(InputError, match="folder exists"):
        export_dataset(data, exported)


def test_a_study_without_logs_is_a_clear_error(registered, tmp_path):
    toy = make_study(tmp_path, n_parents=2, n_humans=0, machines={})
    with pytest.raises(LogError, match="no session logs found"):
        load_study_data(toy)


# -- bulk reading and the Parquet cache ----------------------------------------------------------
def _per_file(logs_dir, bank):
    """Every log read one by one through study.logs.read_trials (the reader the bulk path must
    match), in the trials table's order."""
    from twofold.study.logs import read_trials

    frames = []
    for sub in ("human", "machine"):
        for p in sorted((logs_dir / sub).glob("*.csv")):
            df = read_trials(p)
            df = df.loc[~df["trial"].duplicated(keep="first")]
            frames.append(df.assign(source=pd.Series(f"{sub}/{p.name}", df.index, object)))
    df = pd.concat(frames, ignore_index=True)
    return df.sort_values(["kind", "session", "trial"], kind="stable").reset_index(drop=True)


def test_bulk_reader_matches_the_row_by_row_reader_including_a_cut_last_line(fresh):
    bank = load_study(fresh).bank(create=False)
    path = write_session(
        fresh / "logs", bank, respondent="P005", kind="human", ability=0.0,
        rng=np.random.default_rng(6), synthetic=False,
    )  # fmt: skip
    with open(path, "a", encoding="utf-8") as fh:  # a crash in the middle of a row
        fh.write("toy," + bank.hash + ',P005,human,false,P005,F1,main,16,"tly-')
    with warnings.catch_warnings(record=True) as bulk_warnings:
        warnings.simplefilter("always", LogWarning)
        d = load_study_data(fresh)
    with warnings.catch_warnings(record=True) as ref_warnings:
        warnings.simplefilter("always", LogWarning)
        ref = _per_file(fresh / "logs", bank)
    # whatever the row-by-row reader says about the cut row, the bulk reader says too
    assert [str(w.message) for w in bulk_warnings] == [str(w.message) for w in ref_warnings]
    got = d.trials.sort_values(["kind", "session", "trial"], kind="stable").reset_index(drop=True)
    assert len(got) == len(ref) == 16 * (5 + 4 + 1)
    for col in ("respondent", "session", "trial", "item", "response", "correct", "error_type",
                "status", "rt_ms", "effort", "effort_unit", "source"):  # fmt: skip
        pd.testing.assert_series_equal(got[col], ref[col], check_names=False, check_dtype=True)


def test_cache_is_reused_and_rebuilt_when_a_log_changes(fresh, monkeypatch):
    import twofold.analysis.data as data_mod

    cache = fresh / "results" / "cache"
    first = load_study_data(fresh, cache_dir=cache)
    assert (cache / "trials.parquet").is_file() and (cache / "cache.json").is_file()
    assert not list((fresh / "logs").rglob("*.parquet"))  # never beside the logs

    def no_parse(*args, **kwargs):
        raise AssertionError("the logs were parsed although the cache matches")

    with monkeypatch.context() as m:
        m.setattr(data_mod, "_read_bulk", no_parse)
        again = load_study_data(fresh, cache_dir=cache)
    pd.testing.assert_frame_equal(again.trials, first.trials)
    pd.testing.assert_frame_equal(again.sessions, first.sessions)
    assert again.study == first.study
    # flip the first trial's correct cell of one log (true <-> false: a content change)
    path = sorted((fresh / "logs" / "human").glob("*.csv"))[0]
    lines = path.read_text().splitlines(keepends=True)
    cells = lines[1].split(",")
    idx = [c.name for c in data_mod.TRIAL_COLUMNS].index("correct")
    assert cells[idx] in ("true", "false")
    cells[idx] = "false" if cells[idx] == "true" else "true"
    lines[1] = ",".join(cells)
    path.write_text("".join(lines))
    with monkeypatch.context() as m:
        m.setattr(data_mod, "_read_bulk", no_parse)
        with pytest.raises(AssertionError, match="parsed although"):
            load_study_data(fresh, cache_dir=cache)
    changed = load_study_data(fresh, cache_dir=cache)
    src = f"human/{path.name}"
    a = first.trials[(first.trials["source"] == src) & (first.trials["trial"] == 0)]["correct"]
    b = changed.trials[(changed.trials["source"] == src) & (changed.trials["trial"] == 0)]
    assert bool(b["correct"].iloc[0]) != bool(a.iloc[0])
    # another option is another key
    with monkeypatch.context() as m:
        m.setattr(data_mod, "_read_bulk", no_parse)
        with pytest.raises(AssertionError, match="parsed although"):
            load_study_data(fresh, cache_dir=cache, synthetic="drop")


def test_cache_inside_the_logs_folder_is_refused(fresh):
    with pytest.raises(InputError, match="field 'cache_dir'"):
        load_study_data(fresh, cache_dir=fresh / "logs" / "cache")


def test_failed_and_timed_out_machine_trials_are_counted_per_session(fresh):
    logs = sorted((fresh / "logs" / "machine").glob("*.csv"))
    path = logs[0]
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    header = lines[0].rstrip("\n").split(",")
    at = header.index("status")
    for k, status in ((1, "failed"), (2, "failed"), (3, "timeout")):
        cells = lines[k].rstrip("\n").split(",")
        assert cells[at] == "ok"  # the row layout this test relies on
        cells[at] = status
        cells[header.index("correct")] = ""
        cells[header.index("error_type")] = ""
        lines[k] = ",".join(cells) + "\n"
    path.write_text("".join(lines), encoding="utf-8")
    with pytest.warns(LogWarning, match="3 failed trials"):
        d = load_study_data(fresh)
    session = path.stem
    assert d.sessions.set_index("session").loc[session, "n_failed"] == 3
    assert (d.sessions.set_index("session").drop(session)["n_failed"] == 0).all()
    issue = d.issues.loc[d.issues["issue"] == "failed_trials"]
    assert issue["session"].tolist() == [session]
    assert issue["n"].tolist() == [3]
    assert issue["detail"].iloc[0].startswith("2 failed, 1 timeout")


def test_failed_trials_reach_the_report_as_a_data_section(fresh, tmp_path):
    from twofold.analysis._parts import ReportContext, _notes_data, _section_data

    logs = sorted((fresh / "logs" / "machine").glob("*.csv"))
    lines = logs[0].read_text(encoding="utf-8").splitlines(keepends=True)
    header = lines[0].rstrip("\n").split(",")
    cells = lines[1].rstrip("\n").split(",")
    cells[header.index("status")] = "failed"
    cells[header.index("correct")] = cells[header.index("error_type")] = ""
    lines[1] = ",".join(cells) + "\n"
    logs[0].write_text("".join(lines), encoding="utf-8")
    with pytest.warns(LogWarning):
        d = load_study_data(fresh)
    d.issues.to_csv(tmp_path / "issues.csv", index=False)
    notes = _notes_data({"issues": d.issues})
    warned = [n for n in notes if n["severity"] == "warning"]
    assert len(warned) == 1 and warned[0]["subject"] == logs[0].stem
    rc = ReportContext(results=tmp_path, out=tmp_path, notes=pd.DataFrame(), trials=None)
    sec = _section_data(rc)
    assert sec is not None and "1 failed trials" in sec["reading"]
    assert logs[0].stem in sec["tables"][0]["html"]
    (tmp_path / "issues.csv").write_text("source,session,issue,n,detail\n", encoding="utf-8")
    assert _section_data(rc) is None  # no problems, no section
