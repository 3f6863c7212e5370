"""End-to-end time of the example study, stage by stage, against its targets.

Targets: the full example in < 180 s on 2 cores, ``--quick`` in < 30 s. The stages are those of
``twofold example`` (generate, audit, forms, simulate, machine, analyze, report), timed in this
process through the same pipeline function the command runs. As a reference measured in the
same run, the script first times generating the bank alone (no audit, nothing written), so a
loaded machine shows up as a slow reference too.

Run: ``python bench/example.py [--quick-only] [--workers N]``.
"""

from __future__ import annotations

import contextlib
import sys
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

TARGETS = {"example --quick": 30.0, "example": 180.0}


class _Bar:
    """A silent progress bar with the methods the stages call."""

    def advance(self, k: int = 1, **counts: Any) -> None:
        pass

    def set_total(self, total: int | None) -> None:
        pass

    def note(self, text: str) -> None:
        pass

    def __call__(self, *args: Any, **kwargs: Any) -> None:  # used as a callback by some stages
        pass


def run(quick: bool, workers: int) -> tuple[float, list[tuple[str, float]]]:
    from twofold.experiments.cli._pipeline import run_example
    from twofold.experiments.cli.example import copy_example

    stages: list[tuple[str, float]] = []

    @contextlib.contextmanager
    def progress(label: str, total: Any = None) -> Iterator[_Bar]:
        t0 = time.perf_counter()
        yield _Bar()
        stages.append((label.split(" ", 1)[1], time.perf_counter() - t0))

    with tempfile.TemporaryDirectory() as tmp:
        study = copy_example(Path(tmp) / "study")
        t0 = time.perf_counter()
        run_example(study, quick=quick, workers=workers, progress=progress, note=lambda s: None)
        return time.perf_counter() - t0, stages


def reference() -> float:
    """Seconds to generate the example bank in memory (the same work as stage 1)."""
    from twofold.study import generate_bank, load_study
    from twofold.study.generate import load_spec

    with tempfile.TemporaryDirectory() as tmp:
        from twofold.experiments.cli.example import copy_example

        study = load_study(copy_example(Path(tmp) / "study"))
        spec = load_spec(study.root / study.table("bank")["spec"])
        t0 = time.perf_counter()
        generate_bank(spec)
        return time.perf_counter() - t0


def main() -> None:
    quick_only = "--quick-only" in sys.argv
    workers = int(sys.argv[sys.argv.index("--workers") + 1]) if "--workers" in sys.argv else 2
    print(f"reference: generating the example bank alone takes {reference():.2f} s")
    runs = [("example --quick", True)] + ([] if quick_only else [("example", False)])
    for name, quick in runs:
        total, stages = run(quick, workers)
        print(f"\n{name} (workers = {workers})")
        for label, sec in stages:
            print(f"  {label:<42} {sec:>7.1f} s")
        target = TARGETS[name]
        verdict = "ok" if total < target else "ABOVE TARGET"
        print(f"  {'total':<42} {total:>7.1f} s   target < {target:.0f} s: {verdict}")


if __name__ == "__main__":
    main()
