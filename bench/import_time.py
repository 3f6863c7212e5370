"""Start-up cost: how long ``import twofold.study`` (and the other two packages) take.

Run: ``python bench/import_time.py [repeats]``. Each import runs in a fresh interpreter (best of
``repeats``, default 5) and is printed beside the cost of ``import numpy`` measured the same way
in the same run, as a reference for how loaded the machine is. Target: ``import twofold.study``
under 0.3 s; it must load no family module (they load on first use) and neither scipy nor
matplotlib.
"""

from __future__ import annotations

import subprocess
import sys

TARGET_S = 0.3
_CODE = (
    "import sys, time; t = time.perf_counter(); import {mod}; d = time.perf_counter() - t; "
    "heavy = sorted({{m.split('.')[0] for m in sys.modules if m.startswith(('scipy', "
    "'matplotlib'))}} | {{m for m in sys.modules if m.startswith('twofold.study.families.') "
    "and m != 'twofold.study.families._base'}}); print(d, ','.join(heavy))"
)


def best_of(mod: str, repeats: int) -> tuple[float, str]:
    best, heavy = float("inf"), ""
    for _ in range(repeats):
        cmd = [sys.executable, "-c", _CODE.format(mod=mod)]
        out = subprocess.run(cmd, capture_output=True, text=True, check=True).stdout.split(" ", 1)
        best, heavy = min(best, float(out[0])), out[1].strip()
    return best, heavy


def main() -> None:
    repeats = int(sys.argv[1]) if len(sys.argv) > 1 else 5
    ref, _ = best_of("numpy", repeats)
    print(f"reference: import numpy                  {ref:.3f} s")
    for mod in ("twofold.study", "twofold.experiments", "twofold.analysis"):
        t, heavy = best_of(mod, repeats)
        note = f"  loads: {heavy}" if heavy else ""
        print(f"import {mod:<28} {t:.3f} s  ({t / ref:.1f} x numpy){note}")
        if mod == "twofold.study":
            verdict = "meets" if t < TARGET_S and not heavy else "MISSES"
            print(f"  {verdict} the target: under {TARGET_S} s; no family, scipy or matplotlib")


if __name__ == "__main__":
    main()
