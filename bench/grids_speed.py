"""Generation speed of the grids family with every validity check on.

Prints items per second (wall clock and CPU time) through the bank machinery
(``generate_family``: retries, rejection counting, duplicate checks) for a few parameter levels.
Target: at least 100 items/s at default parameters.

    python bench/grids_speed.py [n]
"""

from __future__ import annotations

import sys
import time

from twofold.study.generate import generate_family, parse_spec


def run(n: int, params: dict, modes: list[str]) -> None:
    spec = parse_spec(
        {"seed": 1, "families": {"grids": {"n": n, "modes": modes, "params": params}}}
    )
    (fs,) = spec.families
    t0, c0 = time.perf_counter(), time.process_time()
    items, stats = generate_family(fs, spec.seed)
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    rejected = sum(stats["rejections"].values())
    label = ", ".join(f"{k}={v}" for k, v in params.items()) or "defaults"
    print(
        f"{label:<28} modes={'+'.join(modes):<16} items={len(items):>5} "
        f"items/s wall={len(items) / wall:7.1f} cpu={len(items) / cpu:7.1f} "
        f"rejected={rejected}"
    )


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 500
    run(n, {}, ["generate"])
    run(n, {}, ["generate", "select"])
    for depth in (1, 3):
        run(n, {"depth": depth}, ["generate"])
    run(n, {"size": 15, "objects": 8}, ["generate"])


if __name__ == "__main__":
    main()
