"""Machine sweeps under deliberate faults, through the real ``twofold`` command.

kill -9 at seeded points (one worker process or two), two sweeps at once, a killed concurrent
sweep, failed trials retried, unreadable caches, an unreachable Dask scheduler, malformed solver
replies (table-driven) and secrets that must never reach a file (a fake endpoint on 127.0.0.1 that
echoes the key back).
"""

from __future__ import annotations

import csv
import http.server
import json
import os
import random
import re
import shutil
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from _cli import TWOFOLD
from twofold.experiments.machine import run_trial
from twofold.experiments.machine._core import MAX_ANSWER_CHARS, FreeText
from twofold.experiments.machine.cache import CACHE_FILE
from twofold.experiments.solvers import Answer
from twofold.study import load_study

pytestmark = pytest.mark.skipif(
    not sys.platform.startswith("linux"), reason="kill -9, /proc and prctl checks need Linux"
)

GENERATE = """
seed = 41
[families.strings]
n = 4
modes = ["generate", "select"]
[families.matrices]
n = 4
modes = ["generate", "select"]
[families.contrast]
n = 4
modes = ["select"]
[families.grids]
n = 4
modes = ["generate", "select"]
"""

STUDY = """
[study]
name = "fault-drill"
seed = 7
[bank]
spec = "generate.toml"
path = "bank"
[[solvers]]
name = "ref"
spec = "reference"
seeds = 2
[[solvers]]
name = "coin"
spec = "random"
modes = ["select"]
"""

#: columns that hold wall-clock time; everything else must match between runs
TIMING = ("onset_s", "response_s", "rt_ms")

# a slow wrapper of the built-in reference solver, importable by the child processes
SLOW_MODULE = """
import os, time
from twofold.experiments.solvers import make_builtin

class Slow:
    medium = "structured"
    def __init__(self, *, seed=0, pause=0.15):
        self.inner = make_builtin("reference", seed=seed)
        self.pause = pause
    def solve(self, view, mode):
        time.sleep(float(os.environ.get("SLOW_PAUSE", self.pause)))
        return self.inner.solve(view, mode)

class Flaky:
    '''Raises while the file named by FLAKY_FLAG exists; answers like the reference otherwise.'''
    medium = "structured"
    def __init__(self, *, seed=0):
        self.inner = make_builtin("reference", seed=seed)
    def solve(self, view, mode):
        if os.path.exists(os.environ["FLAKY_FLAG"]) and hash(view["item"]) % 2 == 0:
            raise RuntimeError("flaky today")
        return self.inner.solve(view, mode)

class Broken:
    medium = "structured"
    def __init__(self, *, seed=0):
        pass
    def solve(self, view, mode):
        raise RuntimeError("always down")
"""


def _env(tmp: Path, **extra: str) -> dict[str, str]:
    return {
        **os.environ,
        "PYTHONPATH": os.pathsep.join([str(tmp / "mods"), os.environ.get("PYTHONPATH", "")]),
        "PYTHONHASHSEED": "0",
        "CI": "1",
        "COLUMNS": "200",
        **extra,
    }


def _twofold(*args: str, env: dict[str, str], timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run(
        [*TWOFOLD, *args],
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
    )


@pytest.fixture(scope="module")
def template(tmp_path_factory) -> Path:
    """A study folder with a 16-item bank of all four families, made by `twofold items generate`."""
    root = tmp_path_factory.mktemp("faults")
    (root / "mods").mkdir()
    (root / "mods" / "slowpoke.py").write_text(SLOW_MODULE, "utf-8")
    study = root / "template"
    study.mkdir()
    (study / "generate.toml").write_text(GENERATE, "utf-8")
    (study / "study.toml").write_text(STUDY, "utf-8")
    res = _twofold(
        "items", "generate", str(study / "generate.toml"), "--out", str(study / "bank"),
        env=_env(root),
    )  # fmt: skip
    assert res.returncode == 0, res.stderr
    return study


def _copy(template: Path, dest: Path, study_toml: str | None = None) -> Path:
    shutil.copytree(template, dest)
    if study_toml is not None:
        (dest / "study.toml").write_text(study_toml, "utf-8")
    return dest


def _rows(csv_path: Path) -> list[dict[str, str]]:
    with open(csv_path, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def _comparable(csv_path: Path) -> list[dict[str, str]]:
    out = []
    for row in _rows(csv_path):
        row = {k: v for k, v in row.items() if k not in TIMING}
        if row["effort_unit"] == "seconds":
            row["effort"] = "*"
        out.append(row)
    return out


def _count_rows(logs: Path) -> int:
    n = 0
    for p in logs.glob("*.csv"):
        try:
            n += max(0, p.read_bytes().count(b"\n") - 1)
        except OSError:
            pass
    return n


def _children(pid: int) -> set[int]:
    """Every descendant of ``pid`` (from /proc)."""
    parents: dict[int, int] = {}
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                stat = (d / "stat").read_text()
            except OSError:
                continue
            parents[int(d.name)] = int(stat.rsplit(")", 1)[1].split()[1])
    out: set[int] = set()
    frontier = {pid}
    while frontier:
        frontier = {c for c, p in parents.items() if p in frontier} - out
        out |= frontier
    return out


def _alive(pid: int) -> bool:
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return False
    return stat.rsplit(")", 1)[1].split()[0] != "Z"


def _cache_snapshot(db: Path) -> dict[tuple, tuple]:
    if not db.exists():
        return {}
    con = sqlite3.connect(db)
    try:
        rows = con.execute(
            "SELECT solver, seed, item, mode, status, finished FROM trial_rows"
        ).fetchall()
    except sqlite3.OperationalError:
        return {}
    finally:
        con.close()
    return {(s, seed, i, m): (st, f) for s, seed, i, m, st, f in rows}


# -- kill -9 ---------------------------------------------------------------------------------------


def test_kill_9_at_20_seeded_points_loses_and_repeats_nothing(template, tmp_path):
    env = _env(template.parent)
    ref = _copy(template, tmp_path / "uninterrupted")
    res = _twofold("run", "machine", str(ref / "study.toml"), env=env)
    assert res.returncode == 0, res.stderr
    expected = {p.name: _comparable(p) for p in (ref / "logs" / "machine").glob("*.csv")}
    n_total = sum(len(v) for v in expected.values())
    assert n_total == 2 * 28 + 16

    study = _copy(template, tmp_path / "killed")
    logs, db = study / "logs" / "machine", study / "cache" / CACHE_FILE
    rng = random.Random(20260611)
    # two kills at seeded times during start-up, then 20 at seeded trial counts
    targets = sorted(rng.sample(range(1, n_total - 1), 20))
    plan = [("time", rng.uniform(0.05, 0.6)) for _ in range(2)] + [("rows", t) for t in targets]
    families_hit: set[str] = set()
    kept_before: dict[tuple, tuple] = {}
    orphans: list[int] = []
    for k, (how, where) in enumerate(plan):
        workers = "2" if k % 2 else "1"
        err_file = tmp_path / f"kill{k}.err"
        with open(err_file, "wb") as err_fh:
            proc = subprocess.Popen(
                [*TWOFOLD, "run", "machine", str(study / "study.toml"), "--workers", workers],
                env=env, stdout=subprocess.DEVNULL, stderr=err_fh,
            )  # fmt: skip
        deadline = time.monotonic() + 60
        if how == "time":
            time.sleep(where)
        else:
            while time.monotonic() < deadline and proc.poll() is None:
                if _count_rows(logs) >= where:
                    break
                time.sleep(0.003)
        kids = _children(proc.pid)
        # a run that ended on its own before its kill point is a failure of the test setup
        assert proc.poll() is None, (k, how, where, proc.returncode, err_file.read_text())
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
        gone = time.monotonic() + 5
        while time.monotonic() < gone and any(_alive(c) for c in kids):
            time.sleep(0.02)
        orphans += [c for c in kids if _alive(c)]
        snap = _cache_snapshot(db)
        # a trial finished before a kill is never run again (its finish time is unchanged)
        for key, value in kept_before.items():
            assert snap.get(key) == value, key
        # the families whose trials were running when this run was killed
        families_hit |= {key[2].split("-")[0] for key in set(snap) - set(kept_before)}
        kept_before = snap
    assert not orphans, f"worker processes outlived their killed parent: {orphans}"
    assert len(families_hit) == 4, families_hit  # kills landed in trials of every family

    res = _twofold("run", "machine", str(study / "study.toml"), "--workers", "2", env=env)
    assert res.returncode == 0, res.stderr
    for key, value in kept_before.items():
        assert _cache_snapshot(db)[key] == value
    got = {p.name: _comparable(p) for p in logs.glob("*.csv")}
    assert got == expected  # same rows, same order, same answers: only timing differs
    for name in expected:
        side = json.loads((logs / name).with_suffix(".json").read_text("utf-8"))
        assert side["status"] == "complete" and side["n_trials"] == len(expected[name])
        trials = [r["trial"] for r in _rows(logs / name)]
        assert trials == [str(i) for i in range(len(trials))]  # none lost, none twice


# -- one sweep at a time --------------------------------------------------------------------------

SLOW_STUDY = (
    STUDY.split("[[solvers]]")[0]
    + """
[[solvers]]
name = "slow"
spec = "python:slowpoke:Slow"
"""
)


def _start(study: Path, env: dict[str, str]) -> subprocess.Popen:
    return subprocess.Popen(
        [*TWOFOLD, "run", "machine", str(study / "study.toml")],
        env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip


def test_two_sweeps_started_together_one_is_refused_naming_the_holder(template, tmp_path):
    study = _copy(template, tmp_path / "s", SLOW_STUDY)
    env = _env(template.parent)
    a, b = _start(study, env), _start(study, env)
    outs = {p.pid: (p.wait(timeout=120), *p.communicate()) for p in (a, b)}
    codes = sorted(code for code, _, _ in outs.values())
    assert codes == [0, 2], outs
    (loser,) = [pid for pid, (code, _, _) in outs.items() if code == 2]
    (winner,) = [pid for pid in outs if pid != loser]
    err = outs[loser][2].strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    m = re.search(r"another machine sweep is running on this study \(process (\d+) on .*, "
                  r"started (\d{4}-\d\d-\d\dT[\d:]+\+00:00)\)", err)  # fmt: skip
    assert m and int(m.group(1)) == winner, err
    rows = _rows(study / "logs" / "machine" / "slow-s0.csv")
    assert len(rows) == 28 and len({(r["item"], r["mode"]) for r in rows}) == 28


def test_a_killed_sweep_leaves_a_lock_the_next_sweep_takes_over(template, tmp_path):
    study = _copy(template, tmp_path / "s", SLOW_STUDY)
    env = _env(template.parent, SLOW_PAUSE="1.0")
    a = _start(study, env)
    info = study / "cache" / "machine.lock.json"
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and _count_rows(study / "logs" / "machine") < 5:
        time.sleep(0.01)
    assert info.exists()
    b = _start(study, env)  # refused while a runs
    b_err = b.communicate(timeout=60)[1]
    assert b.returncode == 2 and f"process {a.pid}" in b_err, b_err
    os.kill(a.pid, signal.SIGKILL)
    a.communicate()
    c = _start(study, _env(template.parent, SLOW_PAUSE="0"))  # takes over the dead holder's lock
    out, err = c.communicate(timeout=120)
    assert c.returncode == 0, err
    assert re.search(r"slow-s0: 28 trials \((\d+) resumed", err + out)
    assert int(re.search(r"\((\d+) resumed", err + out).group(1)) >= 5
    side = json.loads((study / "logs" / "machine" / "slow-s0.json").read_text("utf-8"))
    assert side["status"] == "complete" and side["interruptions"]


# -- failures retried, not replayed ---------------------------------------------------------------

FLAKY_STUDY = (
    STUDY.split("[[solvers]]")[0]
    + """
[[solvers]]
name = "flaky"
spec = "python:slowpoke:Flaky"
"""
)


def test_failed_trials_are_retried_on_rerun_unless_kept(template, tmp_path):
    study = _copy(template, tmp_path / "s", FLAKY_STUDY)
    flag = tmp_path / "flag"
    flag.touch()
    env = _env(template.parent, FLAKY_FLAG=str(flag))
    toml = str(study / "study.toml")
    res = _twofold("run", "machine", toml, env=env)
    assert res.returncode == 0, res.stderr
    first = _rows(study / "logs" / "machine" / "flaky-s0.csv")
    n_failed = sum(r["status"] == "failed" for r in first)
    assert 0 < n_failed < 28
    res = _twofold("run", "machine", toml, "--keep-failures", env=env)
    assert "(28 resumed, 0 run" in res.stderr + res.stdout
    flag.unlink()
    res = _twofold("run", "machine", toml, env=env)
    assert res.returncode == 0, res.stderr
    assert f"({28 - n_failed} resumed, {n_failed} run" in res.stderr + res.stdout
    again = _rows(study / "logs" / "machine" / "flaky-s0.csv")
    assert all(r["status"] == "ok" for r in again) and len(again) == 28


def test_a_run_where_every_trial_failed_exits_2_with_one_line(template, tmp_path):
    toml = (
        STUDY.split("[[solvers]]")[0]
        + '[[solvers]]\nname = "down"\nspec = "python:slowpoke:Broken"\n'
    )
    study = _copy(template, tmp_path / "s", toml)
    res = _twofold("run", "machine", str(study / "study.toml"), env=_env(template.parent))
    assert res.returncode == 2
    last = res.stderr.strip().splitlines()[-1]
    assert "every trial failed (28 trials in 1 sessions); first reason: solver raised " \
        "RuntimeError: always down" in last  # fmt: skip
    assert "Traceback" not in res.stderr


def test_changing_the_solver_reruns_and_fresh_discards_only_that_solver(template, tmp_path):
    study = _copy(template, tmp_path / "s")
    env = _env(template.parent)
    toml = str(study / "study.toml")
    assert _twofold("run", "machine", toml, env=env).returncode == 0
    res = _twofold("run", "machine", toml, "--solver", "ref", "--option", "budget=3", env=env)
    assert "ref-s0: 28 trials (0 resumed, 28 run" in res.stderr + res.stdout  # new identity
    db = study / "cache" / CACHE_FILE
    before = _cache_snapshot(db)
    res = _twofold("run", "machine", toml, "--solver", "coin", "--fresh", env=env)
    assert res.returncode == 0 and "coin-s0: 16 trials (0 resumed, 16 run" in res.stderr
    after = _cache_snapshot(db)
    for key, value in before.items():
        if key[0] != "coin":
            assert after[key] == value  # other solvers' trials untouched


# -- unreadable caches, unreachable schedulers ----------------------------------------------------


def test_a_cache_that_is_not_sqlite_gives_one_line_and_fresh_moves_it_aside(template, tmp_path):
    study = _copy(template, tmp_path / "s")
    env = _env(template.parent)
    db = study / "cache" / CACHE_FILE
    db.parent.mkdir()
    db.write_bytes(b"this is not a database\n" * 100)
    res = _twofold("run", "machine", str(study / "study.toml"), env=env)
    assert res.returncode == 2
    assert res.stderr.strip().splitlines() == [
        f"error: {db}: trial cache is unreadable (file is not a database); move the file aside "
        "(rename it) or run again with --fresh."
    ]
    assert not (study / "logs" / "machine").exists()
    res = _twofold("run", "machine", str(study / "study.toml"), "--fresh", env=env)
    assert res.returncode == 0, res.stderr
    assert [p.name.split(".unreadable-")[0] for p in db.parent.glob("*.unreadable-*")] == [
        CACHE_FILE
    ]


def test_a_broken_cache_row_gives_one_line(template, tmp_path):
    study = _copy(template, tmp_path / "s")
    env = _env(template.parent)
    assert _twofold("run", "machine", str(study / "study.toml"), env=env).returncode == 0
    con = sqlite3.connect(study / "cache" / CACHE_FILE)
    con.execute(
        "UPDATE trial_rows SET row = '{broken' WHERE solver = 'coin' AND seed = 0 AND "
        "item = (SELECT MIN(item) FROM trial_rows WHERE solver = 'coin')"
    )
    con.commit()
    con.close()
    res = _twofold("run", "machine", str(study / "study.toml"), env=env)
    assert res.returncode == 2 and len(res.stderr.strip().splitlines()) == 1
    assert "cached trial of solver 'coin'" in res.stderr and "--fresh" in res.stderr
    res = _twofold("run", "machine", str(study / "study.toml"), "--solver", "coin", "--fresh",
                   env=env)  # fmt: skip
    assert res.returncode == 0, res.stderr


def test_an_unreachable_dask_scheduler_fails_in_time_and_writes_nothing(template, tmp_path):
    study = _copy(template, tmp_path / "s")
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    t0 = time.monotonic()
    res = _twofold(
        "run", "machine", str(study / "study.toml"), "--dask", f"tcp://127.0.0.1:{port}",
        "--dask-timeout", "2", env=_env(template.parent), timeout=60,
    )  # fmt: skip
    took = time.monotonic() - t0
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and f"cannot reach the scheduler at tcp://127.0.0.1:{port}" in lines[0]
    assert took < 30  # 2 s connect timeout plus start-up, never the 30 s hang
    assert not (study / "logs").exists() and not (study / "cache" / CACHE_FILE).exists()


# -- malformed replies ----------------------------------------------------------------------------

_NESTED: list = []
for _ in range(5000):
    _NESTED = [_NESTED]

MALFORMED = [
    # (what the solver returns, words the reason must hold)
    (Answer(1, explanation=42), "field 'explanation': got int 42; accepted: text"),
    (Answer(1, explanation=list(range(10_000))), "field 'explanation': got list"),
    (Answer(1, explanation="x" * 30_000), "field 'explanation': got str '30000 characters'"),
    (Answer(1, effort=float("nan")), "field 'effort': got float nan"),
    (Answer(1, effort=float("inf")), "field 'effort': got float inf"),
    (Answer(1, effort=-3.0), "field 'effort': got float -3.0"),
    (Answer(1, effort="fast"), "field 'effort': got str 'fast'"),  # type: ignore[arg-type]
    (Answer(1, effort=True), "field 'effort': got bool True"),  # type: ignore[arg-type]
    (Answer(1, effort=1.0, effort_unit=7), "field 'effort_unit': got int 7"),  # type: ignore[arg-type]
    (Answer(float("nan")), "field 'answer': got float nan"),
    (Answer({"a": float("inf")}), "field 'answer': got dict"),
    (Answer({1, 2}), "field 'answer': got set"),
    (Answer(_NESTED), "field 'answer': got list"),
    (Answer("y" * (MAX_ANSWER_CHARS + 10)), "field 'answer': got str"),
    (Answer(FreeText("z" * (MAX_ANSWER_CHARS + 10))), "field 'text': got str"),
    ({"answer": 1, "explanation": 3.5}, "field 'explanation': got float 3.5"),
    ({"answer": 1, "effort": "lots"}, "field 'effort': got str 'lots'"),
    ({"text": "3", "explanation": ["a"] * 50}, "field 'explanation': got list"),
    (None, "solver gave no answer"),
    (object(), "field 'answer': got object"),
]


@pytest.fixture(scope="module")
def bank(template):
    return load_study(template).bank(create=False)


@pytest.mark.parametrize(
    ("reply", "reason"), MALFORMED, ids=[f"case{i}" for i in range(len(MALFORMED))]
)
@pytest.mark.parametrize("mode", ["generate", "select"])
def test_a_malformed_reply_is_an_invalid_trial_with_its_reason(bank, reply, reason, mode):
    item = next(it for it in bank if mode in it.modes)

    class Replies:
        medium = "structured"

        def solve(self, view, mode):
            return reply

    row = run_trial(Replies(), item, mode, medium="structured")
    assert row["status"] == "invalid", row
    assert row["correct"] is False
    assert reason in row["detail"], row["detail"]
    assert len(row["detail"]) <= 4000


# -- secrets --------------------------------------------------------------------------------------

KEY = "sk-test-7f3a9c1e5b2d4860"
HEADER_SECRET = "hdr-secret-51c0ffee"
CHILD_SECRET = "child-secret-0badf00d"


class _Echo(http.server.BaseHTTPRequestHandler):
    """Echoes the Authorization and X-Token headers back, in replies and in errors."""

    calls = 0

    def log_message(self, *args):  # keep test output quiet
        pass

    def do_GET(self):
        self._send(200, {"ok": True})

    def do_POST(self):
        body = self.rfile.read(int(self.headers.get("content-length", 0)))
        auth = self.headers.get("authorization", "")
        token = self.headers.get("x-token", "")
        _Echo.calls += 1
        n = _Echo.calls
        if n % 4 == 0:
            self._send(401, {"error": f"bad key {auth} / {token}"})
        elif n % 4 == 1:
            self._send(200, {"choices": [{"message": {"content": f"{auth} {token} ANSWER: 1"}}]})
        elif n % 4 == 2:
            self._send(200, {"not": "a chat reply", "echo": auth, "token": token})
        else:
            self._send(200, {"choices": [{"message": {"content": f"my key is {auth[7:]}"}}],
                             "len": len(body)})  # fmt: skip

    def _send(self, code, data):
        raw = json.dumps(data).encode()
        self.send_response(code)
        self.send_header("content-type", "application/json")
        self.send_header("content-length", str(len(raw)))
        self.end_headers()
        self.wfile.write(raw)


CHILD = """
import json, os, sys
secret = os.environ.get("SECRET_FOR_CHILD", "")
for line in sys.stdin:
    msg = json.loads(line)
    if msg.get("type") == "hello":
        print(json.dumps({"protocol": "twofold-jsonl", "version": 1, "type": "hello",
                          "medium": "structured"}), flush=True)
        continue
    n = int(msg["id"][1:])
    if n % 3 == 0:
        print(json.dumps({"version": 1, "id": msg["id"], "error": "env says " + secret}),
              flush=True)
    elif n % 3 == 1:
        print(json.dumps({"version": 1, "id": msg["id"], "answer": 1,
                          "explanation": "I was told " + secret}), flush=True)
    else:
        sys.stderr.write("leaking " + secret + "\\n"); sys.stderr.flush()
        sys.exit(3)
"""


def test_secrets_never_reach_a_file(template, tmp_path):
    study = _copy(template, tmp_path / "s")
    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), _Echo)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        url = f"http://127.0.0.1:{server.server_address[1]}/v1/chat"
        env = _env(template.parent, TWOFOLD_TEST_KEY=KEY)
        res = _twofold(
            "run", "machine", str(study / "study.toml"), "--solver", url, "--name", "echo",
            "--option", "model=echo-model", "--option", "api_key_env=TWOFOLD_TEST_KEY",
            "--option", "headers=" + json.dumps({"X-Token": HEADER_SECRET}),
            "--option", "retries=0", "--option", "request_timeout=5", "--option", "concurrency=2",
            env=env, timeout=120,
        )  # fmt: skip
        assert res.returncode == 0, res.stderr
    finally:
        server.shutdown()
        server.server_close()
    (template.parent / "mods" / "echo_child.py").write_text(CHILD, "utf-8")
    res = _twofold(
        "run", "machine", str(study / "study.toml"), "--name", "child",
        "--solver", f"command:{sys.executable} {template.parent / 'mods' / 'echo_child.py'}",
        "--option", "env=" + json.dumps({"SECRET_FOR_CHILD": CHILD_SECRET}),
        env=_env(template.parent), timeout=120,
    )  # fmt: skip
    assert res.returncode == 0, res.stderr
    for secret in (KEY, HEADER_SECRET, CHILD_SECRET):
        assert secret not in res.stdout + res.stderr
    written = [p for p in study.rglob("*") if p.is_file()]
    assert any(p.suffix == ".csv" for p in written) and any(p.name == CACHE_FILE for p in written)
    hits = [
        (p.name, secret)
        for p in written
        for secret in (KEY, HEADER_SECRET, CHILD_SECRET)
        if secret.encode() in p.read_bytes()
    ]
    assert hits == []  # target 0
    # the echoes were logged, with the secrets shown as ***
    echo = _rows(study / "logs" / "machine" / "echo-s0.csv")
    assert any("***" in (r["detail"] + r["response"]) for r in echo)
    child = _rows(study / "logs" / "machine" / "child-s0.csv")
    assert any("***" in r["detail"] for r in child)
    side = json.loads((study / "logs" / "machine" / "child-s0.json").read_text("utf-8"))
    assert side["solver_config"]["options"]["env"] == {"SECRET_FOR_CHILD": "***"}
