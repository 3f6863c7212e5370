"""End-to-end time of the example study: ``twofold example`` (target < 180 s on 2 cores) and
``twofold example --quick`` (target < 30 s).

Run: ``python bench/example.py [--quick-only]``. Each stage's time is printed by the command
itself (plain progress lines); this script prints the totals against the targets.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path


def run(quick: bool) -> float:
    with tempfile.TemporaryDirectory() as tmp:
        cmd = [
            sys.executable,
            "-m",
            "twofold.experiments.cli",
            "example",
            "--out",
            str(Path(tmp) / "study"),
        ]
        if quick:
            cmd.append("--quick")
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True)
        return time.perf_counter() - t0


def main() -> None:
    quick_only = "--quick-only" in sys.argv
    rows = [("example --quick", run(True), 30.0)]
    if not quick_only:
        rows.append(("example", run(False), 180.0))
    print(f"\n{'command':<18} {'seconds':>8} {'target':>7}")
    for name, sec, target in rows:
        print(f"{name:<18} {sec:>8.1f} {target:>7.0f}  {'ok' if sec < target else 'ABOVE TARGET'}")


if __name__ == "__main__":
    main()
