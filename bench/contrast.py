"""Contrast generator and reference-solver speed.

Run: ``python bench/contrast.py [n]``. Prints items per second with validity checks on (target
1,000 items/s) for several parameter settings, through the bank machinery (rejections included),
as wall-clock and per CPU-second rates (best of three runs; the per-CPU rate is steadier on a
shared, loaded machine), then the reference solver's time per item, then the time to sample
and score one error for a simulated respondent (target < 2 ms per trial).
"""

from __future__ import annotations

import sys
import time

import numpy as np
from twofold.experiments.solvers import make_builtin
from twofold.study import generate_bank, parse_spec
from twofold.study.families import get_family
from twofold.study.render import render

TARGET = 1000
ERROR_TARGET_MS = 2.0


def rate(body: dict, n: int) -> tuple[float, float, int, int]:
    best = (0.0, 0.0, 0, 0)
    for rep in range(3):
        spec = parse_spec({"seed": 1 + rep, "families": {"contrast": {"n": n, **body}}})
        t0, c0 = time.perf_counter(), time.process_time()
        bank = generate_bank(spec)
        dt, cpu = time.perf_counter() - t0, time.process_time() - c0
        rej = sum(bank.meta["generation"]["contrast"]["rejections"].values())
        if len(bank) / cpu > best[1]:
            best = (len(bank) / dt, len(bank) / cpu, rej, len(bank))
    return best


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    both = {"modes": ["select", "generate"]}
    cases = {
        "default, select": {"modes": ["select"]},
        "default, both modes": both,
        "length 2": {**both, "params": {"length": 2}},
        "length 4": {**both, "params": {"length": 4}},
        "length 5": {**both, "params": {"length": 5}},
        "length 6": {**both, "params": {"length": 6}},
        "relational": {**both, "params": {"kind": "relational"}},
        "6 objects, 4 distractors": {**both, "params": {"objects": 6, "distractors": 4}},
    }
    print(f"{'case':<26} {'items/s':>9} {'per cpu-s':>9} {'target':>7} {'rejected':>9}")
    for name, body in cases.items():
        k = n if "length 5" not in name and "length 6" not in name else max(50, n // 5)
        r, rc, rej, made = rate(body, k)
        verdict = "ok" if rc >= TARGET else "BELOW"
        print(f"{name:<26} {r:>9.0f} {rc:>9.0f} {TARGET:>7} {rej:>5}/{made:<4} {verdict}")
    spec = parse_spec({"seed": 9, "families": {"contrast": {"n": 60, **both}}})
    bank = generate_bank(spec)
    ref = make_builtin("contrast-ref")
    for mode in ("select", "generate"):
        views = [render(it, "structured", mode) for it in bank]
        t0 = time.perf_counter()
        for v in views:
            ref.solve(v, mode)
        print(f"contrast-ref {mode}: {(time.perf_counter() - t0) / len(views) * 1000:.1f} ms/item")
    # simulated respondents: one sampled error and its scoring per trial, three trials per item
    fam = get_family("contrast")
    rng = np.random.default_rng(0)
    for mode in ("select", "generate"):
        t0 = time.perf_counter()
        for it in bank:
            for _ in range(3):
                resp, _ = fam.sample_error(it, mode, rng)
                fam.score(it, resp, mode)
        ms = (time.perf_counter() - t0) / (len(bank) * 3) * 1000
        verdict = "ok" if ms < ERROR_TARGET_MS else "ABOVE"
        print(f"sample_error+score {mode}: {ms:.2f} ms/trial (target {ERROR_TARGET_MS}) {verdict}")


if __name__ == "__main__":
    main()
