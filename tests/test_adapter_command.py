"""The subprocess adapter (twofold-jsonl v1), against real child processes."""

from __future__ import annotations

import sys
import textwrap
from pathlib import Path

import pytest
from _toyfamily import make_study, use_toy
from twofold.experiments.machine import (
    CommandSolver,
    TrialFailure,
    build_solver,
    parse_solver_entry,
    run_solvers,
)
from twofold.study import read_trials
from twofold.study.exceptions import SolverError

EXAMPLE = Path(__file__).parents[1] / "experiments" / "machine" / "examples" / "jsonl_solver.py"
PY = sys.executable

# a child in plain Python (no twofold) that misbehaves on chosen requests, counted across restarts
FAULTY = textwrap.dedent("""
    import json, sys, time
    from pathlib import Path
    counter = Path(sys.argv[1])
    for line in sys.stdin:
        msg = json.loads(line)
        if msg["type"] == "hello":
            print(json.dumps({"protocol": "twofold-jsonl", "version": 1, "type": "hello",
                              "medium": "structured"}), flush=True)
            continue
        k = int(counter.read_text()) + 1 if counter.exists() else 1
        counter.write_text(str(k))
        view, mode = msg["view"], msg["mode"]
        total = view["a"] + view["b"]
        answer = view["choices"].index(total) + 1 if mode == "select" else total
        reply = {"version": 1, "id": msg["id"], "answer": answer, "effort": k,
                 "effort_unit": "steps"}
        if k == 3:
            print("about to crash", file=sys.stderr, flush=True)
            sys.exit(3)
        if k == 5:
            time.sleep(30)
        if k == 7:
            print("debug noise, not json", flush=True)
        if k == 9:
            reply = {"version": 1, "id": msg["id"], "error": "cannot do this one"}
        if k == 11:
            reply = {"version": 1, "id": msg["id"], "thoughts": "hmm"}
        if k == 13:
            reply = {"version": 1, "id": msg["id"], "text": f"I'd say {answer}.", "effort": k}
        print(json.dumps(reply), flush=True)
""")


@pytest.fixture(autouse=True)
def _toy(monkeypatch):
    use_toy(monkeypatch)


def child(tmp_path: Path, body: str, name: str = "child.py") -> str:
    path = tmp_path / name
    path.write_text(body, encoding="utf-8")
    return str(path)


def test_example_child_runs_a_sweep(tmp_path):
    study = make_study(tmp_path)
    s = parse_solver_entry({"spec": f"command:{PY} {EXAMPLE}", "name": "example"})
    table = run_solvers(study, [s])
    df = read_trials(study.logs_dir / "machine" / "example-s0.csv")
    assert len(df) == 24 and table.loc[0, "n_failed"] == 0
    sel = df[df["mode"] == "select"]
    assert (sel["status"] == "ok").all() and set(sel["effort_unit"]) == {"attributes"}
    gen = df[df["mode"] == "generate"]
    # the naive child has no generate answer for toy items: free text the family cannot read
    assert (gen["status"] == "invalid").all()
    assert gen["detail"].str.contains("I have no idea").all()


def test_crash_hang_noise_and_errors_are_per_trial(tmp_path):
    study = make_study(tmp_path, n=8)
    counter = tmp_path / "count.txt"
    script = child(tmp_path, FAULTY)
    s = parse_solver_entry(
        {"spec": f"command:{PY} {script} {counter}", "name": "faulty", "timeout": 2.0}
    )
    run_solvers(study, [s])
    df = read_trials(study.logs_dir / "machine" / "faulty-s0.csv").sort_values("effort")
    assert len(df) == 16
    by_k = {int(k): row for k, row in df.set_index("effort", drop=False).iterrows() if k == k}
    failed = df[df["status"] == "failed"]
    assert any("exited with code 3" in d and "about to crash" in d for d in failed["detail"])
    assert any("cannot do this one" in d for d in failed["detail"])
    timeouts = df[df["status"] == "timeout"]
    assert len(timeouts) == 1 and "restarted" in timeouts["detail"].iloc[0]
    invalid = df[df["status"] == "invalid"]
    assert len(invalid) == 1 and "thoughts" in invalid["detail"].iloc[0]
    assert by_k[7]["status"] == "ok" and by_k[7]["correct"]  # noise line skipped
    assert by_k[13]["status"] == "ok" and by_k[13]["correct"]  # free text parsed by the family
    # crashed (3), hung (5) and error (9) and no-answer (11): every other trial is correct
    ok = df[df["status"] == "ok"]
    assert len(ok) == 16 - 4 and ok["correct"].all()


@pytest.mark.parametrize(
    ("body", "message"),
    [
        ("print('hello there', flush=True)\n", "printed non-JSON instead of its hello reply"),
        ("import sys; sys.exit(4)\n", "child exited with code 4 before its hello reply"),
        (
            "import json; print(json.dumps({'protocol': 'other', 'version': 9}), flush=True)\n",
            "hello reply names protocol 'other' version 9",
        ),
    ],
)
def test_bad_children_fail_at_start_with_one_line(tmp_path, body, message):
    script = child(tmp_path, "import sys\nsys.stdin.readline()\n" + body)
    s = parse_solver_entry({"spec": f"command:{PY} {script}", "name": "bad-child"})
    with pytest.raises(SolverError) as err:
        build_solver(s)
    text = str(err.value)
    assert text.startswith("solver 'bad-child': ") and message in text
    assert "\n" not in text


def test_missing_program_is_a_clear_error():
    s = parse_solver_entry({"spec": "command:/no/such/program --x", "name": "ghost"})
    with pytest.raises(SolverError, match=r"solver 'ghost': cannot start '/no/such/program'"):
        build_solver(s)


def test_direct_use_and_restart_count(tmp_path):
    counter = tmp_path / "c.txt"
    solver = CommandSolver(f"{PY} {child(tmp_path, FAULTY)} {counter}", timeout=5.0)
    try:
        assert solver.medium == "structured"
        assert solver.solve({"a": 1, "b": 2}, "generate").answer == 3
        assert solver.solve({"a": 2, "b": 2}, "generate").answer == 4
        with pytest.raises(TrialFailure) as err:
            solver.solve({"a": 2, "b": 2}, "generate")  # k == 3: crash
        assert err.value.status == "failed"
        assert solver.solve({"a": 5, "b": 2}, "generate").answer == 7  # restarted
        assert solver.restarts == 1
    finally:
        solver.close()
    assert solver._child is None
