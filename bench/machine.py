"""Machine-runner benchmarks; prints figures (run: ``python bench/machine.py [--quick]``).

1. Runner overhead per trial: a null solver (answers at once) over 10,000 trials of a trivial
   family, through the whole path (render, solve, score, SQLite cache, CSV log). Target < 1 ms.
2. HTTP adapter throughput: a local chat endpoint (ThreadingHTTPServer on 127.0.0.1, same
   machine, so server and client share the 2 cores) with 32 requests in flight. Target >= 200/s.
3. Accuracy and mean effort of every reference solver (``<family>-ref`` in the registry) per
   family and difficulty level; families without a reference solver are skipped.
4. Subprocess adapter: seconds for one 1 MB reply line from a child, through
   ``CommandSolver`` (buffered line reads on a reader thread), beside a reference measured in the
   same run: the same child's bytes read with one ``readline`` on a buffered pipe. Target: within
   a few times the reference (reading one byte per system call took about 25x longer).
"""

from __future__ import annotations

import argparse
import concurrent.futures as cf
import json
import sys
import tempfile
import threading
import time
from collections.abc import Mapping, Sequence
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any

import numpy as np
from twofold.experiments.machine import ChatSolver, parse_solver_entry, run_solvers, run_trial
from twofold.experiments.solvers import Answer, builtin_solvers, register_solver
from twofold.study import families, get_family, known_families, load_study, read_trials
from twofold.study.families import Family
from twofold.study.item import Item

# -- 1. runner overhead ----------------------------------------------------------------------------


class _Tally(Family):
    """A trivial family (answer = the stimulus number) so family costs do not hide the runner's."""

    name, prefix, version = "benchtally", "bnt", "1"
    modes = ("generate", "select")
    distractor_schemes = {"shift": "the number plus 1 to 3"}
    default_choices = 4
    answer_format = "an integer"

    def generate(self, params, rng, *, seed, modes, distractor_scheme, n_choices):  # type: ignore[override]
        n = int(rng.integers(0, 10**9))
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params={},
            factors={},
            modes=list(modes),
            stimulus={"n": n},
            answer=n,
            choices=[n, n + 1, n + 2, n + 3] if "select" in modes else None,
            distractor_scheme=distractor_scheme,
            seed=seed,
        )

    def vary(self, item, operator, rng):  # type: ignore[override]
        raise NotImplementedError

    def classify_error(self, item, response, mode):  # type: ignore[override]
        return "other"

    def sample_error(self, item, mode, rng):  # type: ignore[override]
        return 1, "other"

    def render_text(self, item, mode):  # type: ignore[override]
        return f"Say {item.stimulus['n']}."

    def render_structured(self, item, mode):  # type: ignore[override]
        view: dict[str, Any] = {"n": item.stimulus["n"]}
        if mode == "select":
            view["choices"] = list(item.choices)
        return view

    def draw(self, item, mode, fig):  # type: ignore[override]
        pass


class _Null:
    medium = "structured"

    def solve(self, view: Any, mode: str) -> Answer:
        return Answer(1 if mode == "select" else view["n"], effort=0.0, effort_unit="calls")


def _study(root: Path, body: str) -> Any:
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(body, "utf-8")
    return load_study(root)


def bench_overhead(n_trials: int) -> None:
    families.register(_Tally())
    register_solver("bench-null", "benchmark: answers at once")(lambda **_: _Null())
    n_items = n_trials // 2
    with tempfile.TemporaryDirectory() as tmp:
        study = _study(
            Path(tmp),
            f"""[study]
name = "bench"
seed = 1
[bank]
path = "bank"
[bank.spec]
seed = 1
[bank.spec.families.benchtally]
n = {n_items}
modes = ["generate", "select"]
""",
        )
        t = time.perf_counter()
        bank = study.bank()
        t_bank = time.perf_counter() - t
        spec = parse_solver_entry({"spec": "bench-null"})
        import pandas  # noqa: F401 - imported once by the runner; not a per-trial cost

        t = time.perf_counter()
        table = run_solvers(study, [spec], bank=bank)
        total = time.perf_counter() - t
        t = time.perf_counter()
        study.bank()
        t_load = time.perf_counter() - t
        n = int(table.loc[0, "n_trials"])
        assert n == 2 * n_items and table.loc[0, "n_correct"] == n
        # the same trials without cache and CSV: what rendering and scoring cost alone
        solver = _Null()
        t = time.perf_counter()
        for item in bank:
            for mode in item.modes:
                run_trial(solver, item, mode, medium="structured")
        bare = time.perf_counter() - t
        t = time.perf_counter()
        again = run_solvers(study, [spec], bank=bank)
        resume = time.perf_counter() - t
        assert again.loc[0, "n_run"] == 0
    print(
        f"[1] runner overhead, null solver, {n} trials (bank of {len(bank)} made in {t_bank:.1f} s)"
    )
    print(
        f"    sweep (bank loaded): {total:.2f} s = {1000 * total / n:.3f} ms/trial  (target < 1 ms)"
    )
    print(
        f"    of which render+solve+score: {1000 * bare / n:.3f} ms/trial; cache+log: "
        f"{1000 * (total - bare) / n:.3f} ms/trial"
    )
    print(
        f"    plus loading and validating the bank once per run: {t_load:.2f} s "
        f"({1000 * t_load / len(bank):.3f} ms/item)"
    )
    print(f"    rerun with everything cached: {resume:.2f} s ({1000 * resume / n:.3f} ms/trial)")


# -- 2. HTTP throughput ----------------------------------------------------------------------------


def _server() -> tuple[ThreadingHTTPServer, str]:
    reply = json.dumps(
        {
            "choices": [{"message": {"role": "assistant", "content": "The answer is 7."}}],
            "usage": {"completion_tokens": 5},
        }
    ).encode()

    class Handler(BaseHTTPRequestHandler):
        protocol_version = "HTTP/1.1"

        def log_message(self, *args: Any) -> None:
            pass

        def do_GET(self) -> None:  # noqa: N802
            self.send_response(405)
            self.send_header("Content-Length", "0")
            self.end_headers()

        def do_POST(self) -> None:  # noqa: N802
            self.rfile.read(int(self.headers["Content-Length"]))
            self.send_response(200)
            self.send_header("Content-Type", "application/json")
            self.send_header("Content-Length", str(len(reply)))
            self.end_headers()
            self.wfile.write(reply)

    class Server(ThreadingHTTPServer):
        daemon_threads = True
        request_queue_size = 128

    httpd = Server(("127.0.0.1", 0), Handler)
    threading.Thread(target=httpd.serve_forever, daemon=True).start()
    return httpd, f"http://127.0.0.1:{httpd.server_address[1]}/v1/chat"


def bench_http(n_requests: int, in_flight: int = 32) -> None:
    httpd, url = _server()
    try:
        solver = ChatSolver(url, options={"model": "bench", "concurrency": in_flight}, timeout=30)
        prompt = "What is 3 + 4?\nReply with an integer."
        for _ in range(in_flight):  # open the connections
            solver.solve(prompt, "generate")
        t = time.perf_counter()
        with cf.ThreadPoolExecutor(in_flight) as pool:
            answers = list(pool.map(lambda _: solver.solve(prompt, "generate"), range(n_requests)))
        dt = time.perf_counter() - t
        solver.close()
        assert all(a.answer.endswith("7.") for a in answers)
    finally:
        httpd.shutdown()
        httpd.server_close()
    print(
        f"[2] HTTP adapter, local endpoint, {in_flight} in flight: {n_requests} requests in "
        f"{dt:.2f} s = {n_requests / dt:.0f} requests/s  (target >= 200/s)"
    )


# -- 3. reference solvers per family and level -----------------------------------------------------

#: the generator parameter that sets each family's difficulty level, and its levels
LEVELS: Mapping[str, tuple[str, Sequence[Any]]] = {
    "strings": ("length", (3, 5, 7, 9)),
    "matrices": ("n_rules", (1, 2, 3, 4)),
    "contrast": ("length", (1, 2, 3, 4)),
    "grids": ("depth", (1, 2, 3)),
}


def _levels(name: str) -> tuple[str, list[Any]]:
    if name in LEVELS:
        param, levels = LEVELS[name]
        return param, list(levels)
    fam = get_family(name)  # a family added later: its first integer parameter, 3 levels
    p = next(p for p in fam.params if p.kind == "int")
    return p.name, sorted({int(v) for v in np.linspace(p.low, p.high, 3)})


def bench_reference(n_per_level: int, workers: int) -> None:
    solvers = builtin_solvers()
    print(
        f"[3] reference solvers: accuracy and mean effort per family and level "
        f"({n_per_level} items per level, generate mode)"
    )
    print(f"    {'family':<10} {'level':<14} {'n':>4} {'accuracy':>9} {'mean effort':>12}  unit")
    for name in known_families():
        ref = f"{name}-ref"
        if name == _Tally.name:
            continue
        if ref not in solvers:
            print(f"    {name:<10} skipped (no {ref} registered)")
            continue
        param, levels = _levels(name)
        with tempfile.TemporaryDirectory() as tmp:
            for lv in levels:
                study = _study(
                    Path(tmp) / f"l{lv}",
                    f"""[study]
name = "bench"
seed = 1
[bank]
path = "bank"
[bank.spec]
seed = 11
[bank.spec.families.{name}]
n = {n_per_level}
modes = ["generate"]
[bank.spec.families.{name}.params]
{param} = {json.dumps(lv)}
""",
                )
                t = time.perf_counter()
                run_solvers(study, [parse_solver_entry({"spec": ref})], workers=workers)
                dt = time.perf_counter() - t
                df = read_trials(study.logs_dir / "machine" / f"{ref}-s0.csv")
                unit = ",".join(sorted(set(df["effort_unit"].dropna())))
                print(
                    f"    {name:<10} {param + '=' + str(lv):<14} {len(df):>4} "
                    f"{df['correct'].fillna(False).mean():>9.3f} {df['effort'].mean():>12.1f}  "
                    f"{unit} ({dt:.1f} s)"
                )


_BIG_CHILD = r"""
import json, sys
size = int(sys.argv[1])
for line in sys.stdin:
    msg = json.loads(line)
    if msg.get("type") == "hello":
        print(json.dumps({"protocol": "twofold-jsonl", "version": 1, "type": "hello",
                          "medium": "structured"}), flush=True)
    else:
        print(json.dumps({"version": 1, "id": msg.get("id", "x"), "answer": 1,
                          "explanation": "x" * size}), flush=True)
"""


def bench_command(size: int = 1_000_000, repeats: int = 5) -> None:
    import subprocess

    from twofold.experiments.machine import CommandSolver

    with tempfile.TemporaryDirectory() as tmp:
        script = Path(tmp) / "big_child.py"
        script.write_text(_BIG_CHILD, "utf-8")
        solver = CommandSolver(
            f"{sys.executable} {script} {size}",
            options={"max_reply_bytes": 4 * size},
            timeout=60,
        )
        adapter = []
        try:
            for _ in range(repeats):
                t = time.perf_counter()
                solver.solve({"x": 1}, "generate", item="i", family="f")
                adapter.append(time.perf_counter() - t)
        finally:
            solver.close()
        proc = subprocess.Popen(
            [sys.executable, str(script), str(size)],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            bufsize=-1,
        )
        assert proc.stdin is not None and proc.stdout is not None
        raw = []
        for _ in range(repeats):
            t = time.perf_counter()
            proc.stdin.write(b'{"type": "solve", "id": "t"}\n')
            proc.stdin.flush()
            proc.stdout.readline()
            raw.append(time.perf_counter() - t)
        proc.stdin.close()
        proc.wait()
    print(
        f"subprocess reply of {size / 1e6:.1f} MB: adapter median "
        f"{np.median(adapter) * 1000:.1f} ms; reference (one buffered readline, same run) "
        f"{np.median(raw) * 1000:.1f} ms; ratio {np.median(adapter) / np.median(raw):.2f}"
    )


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes (a smoke run)")
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args(argv)
    bench_overhead(1000 if args.quick else 10_000)
    bench_http(400 if args.quick else 3000)
    bench_command(1_000_000, 3 if args.quick else 7)
    bench_reference(3 if args.quick else 12, args.workers)
    return 0


if __name__ == "__main__":
    sys.exit(main())
