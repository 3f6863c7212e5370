"""Full ``analyze`` on simulated studies of growing size: time per part and peak memory.

Run: ``python bench/analysis_scale.py [--size quick|100k|1m] [--keep DIR]`` (or through
``python bench/analysis.py --only scale --scale-size 100k``).

A study is built once per size (kept under ``--keep`` so a second run only analyses): the
example study's four families with 13, 13, 12 and 12 parents and one isomorph per parent (100
items), ``simulate_humans`` for the people (each answers every item) and the built-in reference
solver under the example's three budgets, 3 seeds each, over every item. Then ``analyze_study``
runs every part in a child process (twice: the first reads the logs, the second finds the
Parquet cache); the child reports the seconds of loading and of each part, and the parent reads
the child's peak resident memory (``ru_maxrss`` of the waited-for child).

Sizes (people x 100 items, plus 9 machine sessions x 100 items):

=======  ===========  =========  ==================================
size     people       trials     targets (issue 10, item 4)
=======  ===========  =========  ==================================
quick    100          10,900     none (a smoke run)
100k     1,000        100,900    full analyze <= 60 s
1m       10,000       1,000,900  full analyze <= 600 s, peak <= 4 GB
=======  ===========  =========  ==================================
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path
from typing import Any

SIZES = {"quick": 100, "100k": 1_000, "1m": 10_000}
TARGET_S = {"100k": 60.0, "1m": 600.0}
TARGET_MB = {"1m": 4096.0}
PARENTS = {"strings": 13, "matrices": 13, "contrast": 12, "grids": 12}

_CHILD = r"""
import json, sys, time, warnings
from twofold.analysis.data import load_study_data
from twofold.analysis.run import analyze_study
from twofold.study import load_study

st = load_study(sys.argv[1])
times = {}
t0 = time.perf_counter()
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    parts = None if sys.argv[2] == "all" else sys.argv[2]
    run = analyze_study(st, parts=parts, timing=lambda name, s: times.__setitem__(name, s))
total = time.perf_counter() - t0
status = {p: e["status"] for p, e in run.summary["parts"].items()}
print(json.dumps({"times": times, "total": total, "n_trials": run.summary["n_trials"],
                  "status": status}))
"""


def build_study(folder: Path, n_people: int, *, workers: int = 2) -> Path:
    """Copy the example study into ``folder`` at this size and run its sessions (once)."""
    import tomli_w
    from twofold.experiments.cli.example import copy_example
    from twofold.experiments.machine import run_solvers, study_solvers
    from twofold.experiments.simulate import simulate_humans
    from twofold.study import load_study
    from twofold.study.forms import build_forms, parse_forms, write_forms

    done = folder / "built.json"
    if done.is_file() and json.loads(done.read_text())["people"] == n_people:
        return folder
    copy_example(folder)
    st_path = folder / "study.toml"
    st = tomllib.loads(st_path.read_text("utf-8"))
    spec_path = folder / st["bank"]["spec"]
    spec = tomllib.loads(spec_path.read_text("utf-8"))
    for name, fam in spec["families"].items():
        fam["n"] = PARENTS[name]
    spec_path.write_text(tomli_w.dumps(spec), encoding="utf-8")
    st["simulate"]["humans"] = n_people
    st["analysis"]["irt_model"] = "2pl"
    st_path.write_text(tomli_w.dumps(st), encoding="utf-8")
    study = load_study(folder)
    t0 = time.perf_counter()
    bank = study.bank()
    write_forms(study, build_forms(study, parse_forms(study).respondents))
    print(f"  bank: {len(bank)} items ({time.perf_counter() - t0:.0f} s)", file=sys.stderr)
    t0 = time.perf_counter()
    simulate_humans(study, n=n_people)
    print(f"  {n_people} simulated people ({time.perf_counter() - t0:.0f} s)", file=sys.stderr)
    t0 = time.perf_counter()
    run_solvers(study, study_solvers(study), workers=workers, bank=bank)
    print(f"  machine sessions ({time.perf_counter() - t0:.0f} s)", file=sys.stderr)
    done.write_text(json.dumps({"people": n_people}))
    return folder


def _analyse(folder: Path, parts: str) -> tuple[dict[str, Any], float]:
    """One ``analyze_study`` in a child process: its report and its peak RSS in MB."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    out = subprocess.run(
        [sys.executable, "-c", _CHILD, str(folder / "study.toml"), parts],
        check=True,
        capture_output=True,
        text=True,
    )
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    # ru_maxrss of children is the largest child so far (KiB on Linux); the analysis child is
    # the largest this script starts, and each size runs in its own script process
    return json.loads(out.stdout.strip().splitlines()[-1]), max(peak, before) / 1024


def bench_scale(
    size: str = "quick", *, keep: str | None = None, parts: str = "all"
) -> list[dict[str, Any]]:
    """Rows: one per analysis run (cold = logs parsed, warm = cache found).

    ``parts`` (comma-separated, default all) restricts the analysis, e.g. to time the parts
    that do not fit models at the largest size."""
    n_people = SIZES[size]
    root = Path(keep) if keep else Path(tempfile.mkdtemp(prefix="twofold-scale-"))
    folder = build_study(root / f"study-{size}", n_people)
    results = folder / "results"
    if results.exists():
        import shutil

        shutil.rmtree(results)
    rows = []
    for label in ("cold", "warm"):
        rep, peak_mb = _analyse(folder, parts)
        row: dict[str, Any] = {"size": size, "run": label, "trials": f"{rep['n_trials']:,}"}
        row.update({k: float(v) for k, v in rep["times"].items()})
        row["total_s"] = rep["total"]
        row["target_s"] = TARGET_S.get(size, float("nan"))
        row["peak_mb"] = peak_mb
        row["target_mb"] = TARGET_MB.get(size, float("nan"))
        skipped = [p for p, s in rep["status"].items() if s != "ok"]
        row["skipped"] = ",".join(skipped) or "-"
        rows.append(row)
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", choices=sorted(SIZES), default="quick")
    parser.add_argument("--keep", help="folder to build the study in and keep (reused)")
    parser.add_argument("--parts", default="all", help="comma-separated parts (default all)")
    args = parser.parse_args(argv)
    load = os.getloadavg()
    print(f"load average: {load[0]:.2f} {load[1]:.2f} {load[2]:.2f} on {os.cpu_count()} cores")
    for row in bench_scale(args.size, keep=args.keep, parts=args.parts):
        cells = (f"{k}={v:.2f}" if isinstance(v, float) else f"{k}={v}" for k, v in row.items())
        print("  ".join(cells))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
