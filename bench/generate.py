"""Generation speed: items per second per family (validity checks on), and a 2,000-item bank.

Run: ``python bench/generate.py``. Prints figures; targets from the issue tracker beside them.
"""

from __future__ import annotations

import time

from twofold.study import generate_bank, known_families, parse_spec
from twofold.study.audit import audit_bank
from twofold.study.families import get_family

TARGETS = {"strings": 1000, "matrices": 1000, "contrast": 1000, "grids": 100}


def family_rate(name: str, n: int) -> tuple[float, int]:
    fam = get_family(name)
    modes = list(fam.modes)
    spec = parse_spec({"seed": 1, "families": {name: {"n": n, "modes": modes}}})
    t0 = time.perf_counter()
    bank = generate_bank(spec)
    dt = time.perf_counter() - t0
    rejected = sum(bank.meta["generation"][name]["rejections"].values())
    return n / dt, rejected


def main() -> None:
    print(f"{'family':<10} {'items/s':>10} {'target':>8} {'rejected':>9}")
    for name in known_families():
        n = 2000 if TARGETS.get(name, 100) >= 1000 else 300
        rate, rej = family_rate(name, n)
        target = TARGETS.get(name, 100)
        flag = "ok" if rate >= target else "BELOW"
        print(f"{name:<10} {rate:>10.0f} {target:>8} {rej:>9}  {flag}  (n={n})")
    fams = known_families()
    per = 2000 // len(fams)
    spec = parse_spec(
        {
            "seed": 2,
            "families": {f: {"n": per, "modes": list(get_family(f).modes)} for f in fams},
        }
    )
    t0 = time.perf_counter()
    bank = generate_bank(spec)
    t1 = time.perf_counter()
    audit_bank(bank)
    t2 = time.perf_counter()
    total = t2 - t0
    print(
        f"\n{len(bank)}-item mixed bank: generate {t1 - t0:.2f} s + audit {t2 - t1:.2f} s "
        f"= {total:.2f} s (target < 20 s: {'ok' if total < 20 else 'BELOW'})"
    )


if __name__ == "__main__":
    main()
