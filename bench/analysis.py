"""Analysis benchmarks; prints figures (run: ``python bench/analysis.py [--quick] [--only irt]``).

Sections (one function each, ``bench_<section>(quick) -> list of row dicts``; ``main`` runs the
selected ones and prints one table per section):

irt
    2PL marginal-ML fit (Bock-Aitkin EM + SQUAREM, 41 Gauss-Hermite points) on simulated data
    at 2,000 x 100, 10,000 x 200 and 50,000 x 200 (persons x items): wall time of the fit
    (best of 3, without and with standard errors and item fit), EM cycles and E-steps, time of
    one E-step, recovery RMSE of a and b, peak traced memory (tracemalloc) of a full fit, and
    girth's ``twopl_mml`` on the same data in the same run (skipped at 50,000 x 200 unless
    ``--girth-all``; it takes minutes there). Targets: 10,000 x 200 <= 0.5 s, 50,000 x 200
    <= 2.5 s, >= 50x faster than girth at equal or better RMSE, peak memory <= 500 MB at
    50,000 x 200.

The machine has 2 cores shared with other work; the load average is printed first, because
multi-threaded BLAS slows down several-fold when the cores are busy.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import tracemalloc
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
from twofold.analysis import _quadrature as _q
from twofold.analysis.irt import fit_irt, simulate_responses

# -- irt -----------------------------------------------------------------------------------------

IRT_SIZES = ((2_000, 100), (10_000, 200), (50_000, 200))
GIRTH_LIMIT = 10_000 * 200  # cells; girth is skipped above this unless --girth-all


def _irt_data(n: int, j: int, seed: int = 20240601):
    rng = np.random.default_rng(seed)
    a = rng.uniform(0.6, 2.0, j)
    b = rng.normal(0.0, 1.0, j)
    theta = rng.normal(size=n)
    return a, b, simulate_responses(a, b, theta, rng)


def _rmse(x: np.ndarray, y: np.ndarray) -> float:
    return float(np.sqrt(np.mean((np.asarray(x) - np.asarray(y)) ** 2)))


def _best_of(fn: Callable[[], Any], repeat: int) -> tuple[float, Any]:
    best, out = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def bench_irt(quick: bool = False, *, girth_all: bool = False) -> list[dict[str, Any]]:
    """2PL fits at the benchmark sizes; one row per size."""
    sizes = IRT_SIZES[:1] if quick else IRT_SIZES
    rows = []
    for n, j in sizes:
        a, b, x = _irt_data(n, j)
        fit_s, res = _best_of(lambda x=x: fit_irt(x, se=False, fit_statistics=False), 3)
        full_s, full = _best_of(lambda x=x: fit_irt(x), 1)
        nodes, logw = _q.normal_quadrature(41)
        xx = np.nan_to_num(x)
        args = (xx, None, res.a, res.d, nodes, logw)
        estep_s, _ = _best_of(lambda args=args: _q.posterior(*args), 5)
        tracemalloc.start()
        fit_irt(x)
        peak_mb = tracemalloc.get_traced_memory()[1] / 1e6
        tracemalloc.stop()
        row: dict[str, Any] = {
            "size": f"{n:,} x {j}",
            "fit_s": fit_s,
            "fit_se_s": full_s,
            "converged": bool(res.converged and full.converged),
            "cycles": res.n_iter,
            "e_steps": res.n_estep,
            "estep_ms": 1e3 * estep_s,
            "rmse_a": _rmse(res.a, a),
            "rmse_b": _rmse(res.items["b"], b),
            "peak_mb": peak_mb,
            "girth_s": np.nan,
            "girth_rmse_a": np.nan,
            "girth_rmse_b": np.nan,
            "speedup": np.nan,
        }
        if n * j <= GIRTH_LIMIT or girth_all:
            try:
                import girth
            except ImportError:  # pragma: no cover - girth is a test extra
                girth = None
            if girth is not None:
                t0 = time.perf_counter()
                ref = girth.twopl_mml(x.T.astype(int))
                row["girth_s"] = time.perf_counter() - t0
                row["girth_rmse_a"] = _rmse(ref["Discrimination"], a)
                row["girth_rmse_b"] = _rmse(ref["Difficulty"], b)
                row["speedup"] = row["girth_s"] / fit_s
        rows.append(row)
    return rows


# -- runner --------------------------------------------------------------------------------------

SECTIONS: dict[str, Callable[..., list[dict[str, Any]]]] = {
    "irt": bench_irt,
}


def _fmt(v: Any) -> str:
    if isinstance(v, float):
        if np.isnan(v):
            return "-"
        return f"{v:.3f}" if abs(v) < 100 else f"{v:.1f}"
    return str(v)


def print_table(title: str, rows: Sequence[dict[str, Any]], file=sys.stdout) -> None:
    """Print rows (dicts with the same keys) as an aligned plain-text table."""
    print(f"\n== {title} ==", file=file)
    if not rows:
        print("(no rows)", file=file)
        return
    cols = list(rows[0])
    cells = [[_fmt(r[c]) for c in cols] for r in rows]
    widths = [max(len(c), *(len(row[i]) for row in cells)) for i, c in enumerate(cols)]
    print("  ".join(c.rjust(w) for c, w in zip(cols, widths, strict=True)), file=file)
    for row in cells:
        print("  ".join(v.rjust(w) for v, w in zip(row, widths, strict=True)), file=file)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smallest size of each section")
    parser.add_argument("--only", action="append", choices=sorted(SECTIONS),
                        help="run only this section (repeatable)")
    parser.add_argument("--girth-all", action="store_true",
                        help="also run girth at 50,000 x 200 (minutes)")
    args = parser.parse_args(argv)
    load = os.getloadavg()
    print(f"load average: {load[0]:.2f} {load[1]:.2f} {load[2]:.2f} on {os.cpu_count()} cores")
    for name in args.only or list(SECTIONS):
        kwargs = {"girth_all": args.girth_all} if name == "irt" else {}
        print_table(name, SECTIONS[name](args.quick, **kwargs))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
