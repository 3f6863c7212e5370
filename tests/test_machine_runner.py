"""The machine runner: logs, sidecars, scoring, resume from the trial cache, parallel backends."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import _toyfamily
import pandas as pd
import pytest
from _toyfamily import make_study, use_toy
from twofold.experiments import machine
from twofold.experiments.machine import (
    SolverSpec,
    TrialCache,
    parse_solver_entry,
    run_solvers,
    study_solvers,
)
from twofold.experiments.machine.cache import CACHE_FILE
from twofold.study import read_sidecar, read_trials
from twofold.study.exceptions import SolverError
from twofold.study.logs import TRIAL_COLUMNS

TESTS = Path(__file__).parent


@pytest.fixture(autouse=True)
def _toy(monkeypatch):
    use_toy(monkeypatch)


def spec(s: str, **kw) -> SolverSpec:
    return parse_solver_entry({"spec": s, **kw})


def trials(study, session: str) -> pd.DataFrame:
    return read_trials(study.logs_dir / "machine" / f"{session}.csv")


def test_public_names_sorted():
    # isort-style order, as in twofold.study: CONSTANTS, Classes, functions
    order = sorted(machine.__all__, key=lambda n: (not n.isupper(), not n[0].isupper(), n))
    assert machine.__all__ == order
    for name in machine.__all__:
        assert hasattr(machine, name)


def test_run_writes_scored_sessions_with_sidecars(tmp_path):
    study = make_study(
        tmp_path,
        '[[solvers]]\nname = "fn"\nspec = "python:_toyfamily:solve_structured"\nseeds = 2\n',
    )
    table = run_solvers(study, study_solvers(study))
    assert list(table["session"]) == ["fn-s0", "fn-s1"]
    bank = study.bank()
    df = trials(study, "fn-s0")
    assert list(df.columns) == [c.name for c in TRIAL_COLUMNS]
    assert len(df) == 2 * len(bank)  # every item in both of its modes
    assert df["correct"].all() and (df["status"] == "ok").all()
    assert list(df["trial"]) == list(range(len(df)))
    assert set(df["kind"]) == {"machine"} and set(df["bank_hash"]) == {bank.hash}
    sel = df[df["mode"] == "select"]
    for row in sel.itertuples():
        assert int(row.response) == bank[row.item].answer_choice
    assert set(df["effort_unit"]) == {"sums"}
    side = read_sidecar(study.logs_dir / "machine" / "fn-s1.json")
    for key in (
        "study",
        "bank_hash",
        "session",
        "respondent",
        "kind",
        "synthetic",
        "form",
        "status",
        "started",
        "ended",
        "twofold_version",
        "n_trials",
        "interruptions",
        "solver",
        "seed",
        "solver_spec",
        "config_hash",
        "effort_unit",
    ):
        assert key in side, key
    assert side["status"] == "complete" and side["seed"] == 1 and side["kind"] == "machine"
    assert side["config_hash"] == study_solvers(study)[0].identity_hash()
    assert (study.logs_dir / "machine" / "trials.schema.json").exists()


def test_wrong_answers_get_family_error_types(tmp_path):
    study = make_study(tmp_path)
    s = spec("python:_toyfamily:ToySolver", options={"wrong_every": 2}, modes=["generate"])
    run_solvers(study, [s])
    df = trials(study, s.session_id(0))
    assert set(df["mode"]) == {"generate"}
    wrong = df[~df["correct"].astype(bool)]
    assert len(wrong) == len(df) // 2
    assert set(wrong["error_type"]) == {"off_by_one"}
    assert df[df["correct"].astype(bool)]["error_type"].isna().all()


def test_solver_faults_are_logged_and_the_sweep_goes_on(tmp_path):
    study = make_study(tmp_path)
    s = spec("python:_toyfamily:Faulty", options={"sleep_every": 11, "sleep": 0.8}, timeout=0.4)
    table = run_solvers(study, [s])
    df = trials(study, s.session_id(0))
    n = len(df)
    assert table.loc[0, "n_trials"] == n == 24
    failed = df[df["status"] == "failed"]
    assert len(failed) == n // 3
    assert failed["detail"].str.contains("RuntimeError: boom").all()
    assert failed["correct"].isna().all()
    invalid = df[df["status"] == "invalid"]
    assert len(invalid) >= 1 and (~invalid["correct"].astype(bool)).all()
    assert invalid["detail"].str.contains("not a number").all()
    assert (df["status"] == "timeout").sum() >= 2  # calls 11 and 22 slept past the soft timeout


def test_resume_after_ctrl_c_runs_only_the_rest_without_duplicates(tmp_path):
    study = make_study(tmp_path)
    _toyfamily.StopAfter.calls = 0
    s = spec("python:_toyfamily:StopAfter", options={"stop": 6})
    with pytest.raises(KeyboardInterrupt):
        run_solvers(study, [s])
    side = read_sidecar(study.logs_dir / "machine" / f"{s.session_id(0)}.json")
    assert side["status"] == "aborted" and side["n_trials"] == 5
    assert len(trials(study, s.session_id(0))) == 5
    table = run_solvers(study, [s])
    assert table.loc[0, "n_cached"] == 5 and table.loc[0, "n_run"] == 19
    df = trials(study, s.session_id(0))
    assert len(df) == 24 and not df.duplicated(["item", "mode"]).any()
    assert list(df["trial"]) == list(range(24))
    side = read_sidecar(study.logs_dir / "machine" / f"{s.session_id(0)}.json")
    assert side["status"] == "complete" and len(side["interruptions"]) == 1
    with TrialCache(study.path("cache", "cache") / CACHE_FILE) as cache:
        assert cache.count() == 24


def test_a_csv_damaged_after_the_cache_is_rebuilt_on_rerun(tmp_path):
    study = make_study(tmp_path)
    s = spec("random", seeds=1)
    run_solvers(study, [s])
    path = study.logs_dir / "machine" / "random-s0.csv"
    before = path.read_text("utf-8")
    lines = before.splitlines(keepends=True)
    path.write_text("".join(lines[:5] + lines[3:8]) + lines[8][:20], "utf-8")  # dupes + cut line
    table = run_solvers(study, [s])
    assert table.loc[0, "n_run"] == 0
    assert path.read_text("utf-8") == before


def test_kill_9_loses_at_most_the_trials_in_flight(tmp_path):
    make_study(tmp_path)
    script = textwrap.dedent(f"""
        import sys
        sys.path.insert(0, {str(TESTS)!r})
        import _toyfamily
        _toyfamily.use_toy()
        from twofold.study import load_study
        from twofold.experiments.machine import parse_solver_entry, run_solvers
        s = parse_solver_entry({{"spec": "python:_toyfamily:StopAfter",
                                 "options": {{"stop": 10**6}}}})
        run_solvers(load_study({str(tmp_path)!r}), [s])
    """)
    env = {**os.environ, "TWOFOLD_TOY_SLEEP": "0.2"}
    proc = subprocess.Popen([sys.executable, "-c", script], env=env)
    db = tmp_path / "cache" / CACHE_FILE
    deadline = time.monotonic() + 60
    n = 0
    while time.monotonic() < deadline and n < 4:
        time.sleep(0.05)
        if db.exists():
            try:
                with TrialCache(db) as c:
                    n = c.count()
            except Exception:  # the file may be mid-creation
                n = 0
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert n >= 4
    with TrialCache(db) as c:
        kept = c.count()
    assert 4 <= kept < 24
    study = make_study(tmp_path)
    s = spec("python:_toyfamily:StopAfter", options={"stop": 10**6})
    table = run_solvers(study, [s])
    assert table.loc[0, "n_cached"] == kept and table.loc[0, "n_run"] == 24 - kept
    df = trials(study, s.session_id(0))
    assert len(df) == 24 and not df.duplicated(["item", "mode"]).any()
    side = read_sidecar(study.logs_dir / "machine" / f"{s.session_id(0)}.json")
    assert side["interruptions"][0]["event"].startswith("resumed")


def _key_rows(df: pd.DataFrame) -> list[tuple]:
    cols = ["trial", "item", "mode", "response", "correct", "error_type", "status"]
    return [tuple(r) for r in df[cols].astype(str).itertuples(index=False)]


def test_local_processes_give_the_same_logs(tmp_path):
    a = make_study(tmp_path / "a")
    b = make_study(tmp_path / "b")
    s = spec("python:_toyfamily:ToySolver", options={"wrong_every": 3})
    s1 = spec("choices-only")
    run_solvers(a, [s, s1], workers=1)
    run_solvers(b, [s, s1], workers=2)
    for sess in (s.session_id(0), s1.session_id(0)):
        # per-process solver state (the call counter) differs, so compare the stateless parts
        da, db = trials(a, sess), trials(b, sess)
        assert len(da) == len(db) == 24
        if sess.startswith("choices"):
            assert _key_rows(da) == _key_rows(db.sort_values("trial"))
        else:
            assert set(db["trial"]) == set(range(24))


def test_dask_local_cluster_runs_the_same_sweep(tmp_path):
    from dask.distributed import Client, LocalCluster

    study = make_study(tmp_path)
    s = spec("python:_toyfamily:solve_structured", seeds=2)
    with (
        LocalCluster(
            n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None
        ) as cluster,
        Client(cluster) as client,
    ):
        table = run_solvers(study, [s], dask=client)
    assert list(table["n_run"]) == [24, 24]
    df = trials(study, s.session_id(1))
    assert sorted(df["trial"]) == list(range(24)) and df["correct"].all()


def test_bad_solver_stops_before_anything_is_written(tmp_path):
    study = make_study(tmp_path)
    good = spec("random")
    bad = spec("python:no_such_module_xyz:solve")
    with pytest.raises(SolverError) as err:
        run_solvers(study, [good, bad])
    assert "no_such_module_xyz" in str(err.value)
    assert not (study.logs_dir / "machine").exists()
    assert not (tmp_path / "cache" / CACHE_FILE).exists()


def test_progress_sink_gets_total_and_every_trial(tmp_path):
    study = make_study(tmp_path)

    class Sink:
        def __init__(self):
            self.total, self.done, self.failed = None, 0, 0

        def set_total(self, total):
            self.total = total

        def advance(self, k=1, *, failed=0):
            self.done += k
            self.failed += failed

    sink = Sink()
    run_solvers(study, [spec("python:_toyfamily:Faulty")], progress=sink)
    assert sink.total == sink.done == 24 and sink.failed == 8
    # the 8 failed trials are run again (not replayed); with keep_failures nothing is left
    sink2 = Sink()
    run_solvers(study, [spec("python:_toyfamily:Faulty")], progress=sink2)
    assert sink2.total == sink2.done == 8
    sink3 = Sink()
    run_solvers(study, [spec("python:_toyfamily:Faulty")], progress=sink3, keep_failures=True)
    assert sink3.total == 0 and sink3.done == 0


def test_cache_keys_separate_configs_and_seeds(tmp_path):
    study = make_study(tmp_path)
    rx = spec("python:_toyfamily:ToySolver", options={"wrong_every": 3}, name="rx")
    run_solvers(study, [spec("random", seeds=2), rx])
    with TrialCache(tmp_path / "cache" / CACHE_FILE) as cache:
        assert cache.count() == 3 * 24
    a = json.loads((study.logs_dir / "machine" / "random-s0.json").read_text())
    b = json.loads((study.logs_dir / "machine" / "rx-s0.json").read_text())
    assert a["config_hash"] != b["config_hash"]


def test_two_solvers_with_one_name_are_refused(tmp_path):
    study = make_study(tmp_path)
    with pytest.raises(SolverError, match="solver name 'random' is used twice"):
        run_solvers(study, [spec("random"), spec("random", seeds=2)])
    assert not (study.logs_dir / "machine").exists()
