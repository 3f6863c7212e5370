"""Matrices generator and bank-audit speed.

Run: ``python bench/matrices.py``. Prints items per second with validity checks on (target
1,000 items/s) for each mode and distractor scheme, and the audit time of a 2,000-item bank.
"""

from __future__ import annotations

import time

from twofold.study import generate_bank, parse_spec
from twofold.study.audit import audit_bank

TARGET = 1000


def rate(body: dict, n: int = 3000) -> tuple[float, float, int]:
    spec = parse_spec({"seed": 1, "families": {"matrices": {"n": n, **body}}})
    t0, c0 = time.perf_counter(), time.process_time()
    bank = generate_bank(spec)
    dt, cpu = time.perf_counter() - t0, time.process_time() - c0
    rej = sum(bank.meta["generation"]["matrices"]["rejections"].values())
    return len(bank) / dt, len(bank) / cpu, rej


def main() -> None:
    cases = {
        "generate": {"modes": ["generate"]},
        "select one-off": {"modes": ["select"], "distractor_scheme": "one-off"},
        "select balanced": {"modes": ["select"], "distractor_scheme": "balanced"},
        "both, 5 rules, hard": {
            "modes": ["generate", "select"],
            "params": {"n_rules": 5, "rule_set": "three-sum"},
        },
        "both, 2 irrelevant": {
            "modes": ["generate", "select"],
            "params": {"n_rules": 2, "n_irrelevant": 2},
        },
    }
    # wall-clock rate, and the rate per CPU second (steadier on a shared, loaded machine)
    print(f"{'case':<22} {'items/s':>9} {'per cpu-s':>9} {'target':>7} {'rejected':>9}")
    for name, body in cases.items():
        r, rc, rej = rate(body)
        verdict = "ok" if r >= TARGET else "BELOW"
        print(f"{name:<22} {r:>9.0f} {rc:>9.0f} {TARGET:>7} {rej:>9}  {verdict}")
    spec = parse_spec(
        {
            "seed": 2,
            "families": {
                "matrices": {
                    "n": 2000,
                    "modes": ["generate", "select"],
                    "distractor_scheme": "balanced",
                }
            },
        }
    )
    bank = generate_bank(spec)
    t0, c0 = time.perf_counter(), time.process_time()
    report = audit_bank(bank)
    dt, cpu = time.perf_counter() - t0, time.process_time() - c0
    pics = report["rendering"]["checked"]["picture"]
    print(
        f"\naudit of {len(bank)} matrices items (both modes, {pics} pictures): "
        f"{dt:.2f} s wall, {cpu:.2f} s cpu"
    )


if __name__ == "__main__":
    main()
