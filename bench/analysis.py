"""Analysis benchmarks; prints figures (run: ``python bench/analysis.py [--quick] [--only irt]``).

Sections (one function each, ``bench_<section>(quick) -> list of row dicts``; ``main`` runs the
selected ones and prints one table per section):

irt
    2PL marginal-ML fit (Bock-Aitkin EM + SQUAREM, 41-point normal grid on [-6, 6]) on
    simulated data at 2,000 x 100, 10,000 x 200 and 50,000 x 200 (persons x items): wall time of
    the fit (best of 3; without, then with standard errors and item fit), time of the EAP
    abilities with person fit (computed on first access, not part of the fit), EM cycles and
    E-steps, time of one E-step, recovery RMSE of a and b, peak traced memory (tracemalloc) of a
    full fit and its abilities, and girth's ``twopl_mml`` on the same data in the same run
    (skipped at 50,000 x 200 unless ``--girth-all``; it takes minutes there). Targets:
    10,000 x 200 <= 0.5 s, 50,000 x 200 <= 2.5 s, >= 50x faster than girth at equal or better
    RMSE, peak memory <= 500 MB at 50,000 x 200.

agreement
    Paired bootstrap of the difficulty-profile rank correlation (``bootstrap_ci``: percentile and
    BCa from one vectorised resample array) with 2,000 resamples on 200 items, Spearman and
    Kendall: wall time (best of 3). Target: < 5 s.

mixed
    Mixed models with crossed random intercepts (respondents x items) on simulated trials:
    ``fit_glmm`` (logistic, Laplace ML with analytic gradients; beside statsmodels' variational
    ``method="vb"`` measured in the same run at 20,000 trials) and ``fit_lmm`` (log response
    time, penalised least squares) at 20,000 (200 respondents x 100 items) and 100,000 trials
    (500 x 200), the by-item slope model ``correct ~ kind + factor_width + (1|respondent) +
    (1 + kind|item)`` at 100,000, and 500,000 trials (2,500 x 200) with ``--mixed-large``.
    Reported: wall time, traced peak memory, convergence, recovery of the two random-effect SDs
    and of the slope, with the target beside each. Targets: 20,000 trials >= 30x faster than
    the variational fit; 100,000 trials <= 5 s and <= 500 MB; 500,000 trials <= 60 s.

lmm
    Linear mixed model ``log_rt ~ factor_width + (1|respondent) + (1|item)`` with 200
    respondents x 200 items crossed (each trial a random cell): ``fit_lmm(engine="pls")``
    (profiled REML by penalised least squares) against ``fit_lmm(engine="statsmodels")``
    (``MixedLM`` with variance components) at 20,000 trials, and the fast path alone at 100,000
    trials. Reported: wall time (fast path best of 3), the ratio, and how far the two engines'
    variance components, fixed effects and REML log-likelihoods differ. Target: 20,000 trials
    in < 1 s. ``--quick``: 50 x 50 at 2,000 trials.

The machine has 2 cores shared with other work; the load average is printed first, because
multi-threaded BLAS slows down several-fold when the cores are busy. ``--threads 1`` re-runs the
script with single-threaded BLAS (OPENBLAS_NUM_THREADS, OMP_NUM_THREADS, MKL_NUM_THREADS), which is
the faster choice on a busy machine.
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
        eap_s, _ = _best_of(lambda res=res: res.abilities, 1)  # EAP + lz, computed on demand
        nodes, logw = _q.normal_quadrature(41)
        xx = np.nan_to_num(x)
        args = (xx, None, res.a, res.d, nodes, logw)
        estep_s, _ = _best_of(lambda args=args: _q.posterior(*args), 5)
        tracemalloc.start()
        _ = fit_irt(x).abilities
        peak_mb = tracemalloc.get_traced_memory()[1] / 1e6
        tracemalloc.stop()
        row: dict[str, Any] = {
            "size": f"{n:,} x {j}",
            "fit_s": fit_s,
            "fit_se_s": full_s,
            "eap_s": eap_s,
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


# -- agreement -----------------------------------------------------------------------------------


def bench_agreement(quick: bool = False) -> list[dict[str, Any]]:
    """Bootstrap CIs of Spearman and Kendall correlations, 2,000 resamples on 200 items."""
    from twofold.analysis.compare import bootstrap_ci

    rng = np.random.default_rng(7)
    n_items, n_boot = (50, 500) if quick else (200, 2000)
    human = rng.normal(size=n_items)
    machine = np.clip(1 / (1 + np.exp(-(human + rng.normal(0, 1, n_items)))), 0, 1)
    machine = np.round(machine * 8) / 8  # error rates over 8 seeds: many ties
    rows = []
    for statistic in ("spearman", "kendall"):
        secs, out = _best_of(
            lambda statistic=statistic: bootstrap_ci(
                human, machine, statistic=statistic, n_boot=n_boot, seed=1
            ),
            3,
        )
        bca = out.set_index("interval").loc["bca"]
        rows.append(
            {
                "statistic": statistic,
                "items": n_items,
                "resamples": n_boot,
                "seconds": secs,
                "estimate": float(bca["estimate"]),
                "bca_low": float(bca["ci_low"]),
                "bca_high": float(bca["ci_high"]),
                "target_s": 5.0,
            }
        )
    return rows


# -- mixed ---------------------------------------------------------------------------------------


def _mixed_trials(n_resp: int, n_items: int, seed: int = 3):
    import pandas as pd

    rng = np.random.default_rng(seed)
    sd_resp, sd_item, slope = 0.8, 0.5, -0.6
    u = rng.normal(0, sd_resp, n_resp)
    v = rng.normal(0, sd_item, n_items)
    width = rng.integers(2, 6, n_items).astype(float)
    r = np.repeat(np.arange(n_resp), n_items)
    i = np.tile(np.arange(n_items), n_resp)
    kind = np.where(r < n_resp // 10, "machine", "human")
    eta = 1.0 + u[r] + v[i] + slope * (width[i] - width.mean())
    correct = (rng.random(r.size) < 1 / (1 + np.exp(-eta))).astype(int)
    log_rt = 7.5 + 0.3 * u[r] + 0.2 * v[i] + 0.15 * width[i] + rng.normal(0, 0.3, r.size)
    df = pd.DataFrame(
        {
            "respondent": [f"r{k}" for k in r],
            "item": [f"i{k}" for k in i],
            "kind": kind,
            "factor_width": width[i] - width.mean(),
            "correct": correct,
            "log_rt": log_rt,
        }
    )
    return df, {"sd_resp": sd_resp, "sd_item": sd_item, "slope": slope}


def _timed_fit(fn: Callable[[], Any]) -> tuple[float, float, Any]:
    """Wall time and peak traced memory (MB) of one call."""
    tracemalloc.start()
    t0 = time.perf_counter()
    out = fn()
    sec = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1] / 1e6
    tracemalloc.stop()
    return sec, peak, out


def bench_mixed(quick: bool = False, *, large: bool = False) -> list[dict[str, Any]]:
    """Laplace GLMM (crossed intercepts + one factor; by-item slope of kind) against statsmodels'
    variational fit measured in the same run, and the REML LMM.

    Targets: 20,000 trials >= 30x faster than fit_vb; 100,000 trials <= 5 s and <= 500 MB;
    500,000 trials <= 60 s (``--mixed-large``). Peak memory is traced numpy/Python memory.
    """
    import warnings

    from twofold.analysis.mixed import fit_glmm, fit_lmm

    sizes = [(50, 40)] if quick else [(200, 100), (500, 200)]
    if large:
        sizes.append((2500, 200))
    rows = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # one small fit first, so that module imports are not timed as fitting
        fit_glmm(_mixed_trials(20, 20)[0], "correct ~ factor_width", random=["respondent", "item"])
        for n_resp, n_items in sizes:
            df, truth = _mixed_trials(n_resp, n_items)
            n = len(df)
            target = {20_000: "vb/lap >= 30", 100_000: "<= 5 s, <= 500 MB", 500_000: "<= 60 s"}
            sec, peak, g = _timed_fit(
                lambda df=df: fit_glmm(df, "correct ~ factor_width", random=["respondent", "item"])
            )
            sd = g.random_effects.set_index("group")["sd"]
            row = {
                "model": "glmm_laplace",
                "trials": f"{n:,}",
                "seconds": sec,
                "peak_mb": peak,
                "converged": g.converged,
                "sd_resp": float(sd["respondent"]),
                "sd_item": float(sd["item"]),
                "slope": float(g.fixed.set_index("term").loc["factor_width", "estimate"]),
                "true": f"{truth['sd_resp']}/{truth['sd_item']}/{truth['slope']}",
                "vb_seconds": np.nan,
                "speedup": np.nan,
                "target": target.get(n, ""),
            }
            if n <= 20_000:  # statsmodels fit_vb, same run (about 170 s at 100,000)
                t0 = time.perf_counter()
                fit_glmm(df, "correct ~ factor_width", random=["respondent", "item"], method="vb")
                row["vb_seconds"] = time.perf_counter() - t0
                row["speedup"] = row["vb_seconds"] / sec
            rows.append(row)
            if n == 100_000:
                sec, peak, gs = _timed_fit(
                    lambda df=df: fit_glmm(
                        df,
                        "correct ~ kind + factor_width",
                        random={"respondent": "1", "item": "1 + kind"},
                    )
                )
                rows.append(
                    {
                        "model": "glmm_laplace item slope",
                        "trials": f"{n:,}",
                        "seconds": sec,
                        "peak_mb": peak,
                        "converged": gs.converged,
                        "target": "reported",
                    }
                )
            t0 = time.perf_counter()
            m = fit_lmm(df, "log_rt ~ factor_width", random=["respondent", "item"])
            sd = m.random_effects.set_index("group")["sd"]
            rows.append(
                {
                    "model": "lmm_reml",
                    "trials": f"{n:,}",
                    "seconds": time.perf_counter() - t0,
                    "converged": m.converged,
                    "sd_resp": float(sd["respondent"]),
                    "sd_item": float(sd["item"]),
                    "slope": float(m.fixed.set_index("term").loc["factor_width", "estimate"]),
                    "true": "0.24/0.1/0.15",
                }
            )
    cols = list(dict.fromkeys(c for r in rows for c in r))
    return [{c: r.get(c, np.nan) for c in cols} for r in rows]


# -- lmm ---------------------------------------------------------------------------------------

LMM_TARGET_S = 1.0


def _lmm_trials(n_trials: int, n_resp: int, n_items: int, seed: int = 5):
    import pandas as pd

    rng = np.random.default_rng(seed)
    n_cells = n_resp * n_items
    if n_trials <= n_cells:
        cells = rng.choice(n_cells, n_trials, replace=False)
    else:
        cells = rng.integers(0, n_cells, n_trials)
    r, i = cells // n_items, cells % n_items
    width = rng.integers(2, 6, n_items).astype(float)
    u = rng.normal(0, 0.25, n_resp)
    v = rng.normal(0, 0.1, n_items)
    log_rt = 7.5 + u[r] + v[i] + 0.15 * width[i] + rng.normal(0, 0.3, r.size)
    return pd.DataFrame(
        {
            "respondent": [f"r{k}" for k in r],
            "item": [f"i{k}" for k in i],
            "factor_width": width[i] - width.mean(),
            "log_rt": log_rt,
        }
    )


def bench_lmm(quick: bool = False) -> list[dict[str, Any]]:
    """Penalised least squares vs statsmodels MixedLM for crossed random intercepts."""
    import warnings

    from twofold.analysis.mixed import fit_lmm

    n_resp, n_items = (50, 50) if quick else (200, 200)
    sizes = [(2_000, True)] if quick else [(20_000, True), (100_000, False)]
    formula, random = "log_rt ~ factor_width", ["respondent", "item"]
    rows = []
    for n_trials, with_statsmodels in sizes:
        df = _lmm_trials(n_trials, n_resp, n_items)
        pls_s, fast = _best_of(lambda df=df: fit_lmm(df, formula, random=random, engine="pls"), 3)
        row: dict[str, Any] = {
            "trials": f"{n_trials:,}",
            "levels": f"{n_resp} x {n_items}",
            "pls_s": pls_s,
            "statsmodels_s": np.nan,
            "ratio": np.nan,
            "converged": fast.converged,
            "max_rel_var": np.nan,
            "max_rel_fixed": np.nan,
            "loglik_diff": np.nan,
            "sd_resp": float(np.sqrt(fast.raw.variances[0])),
            "sd_item": float(np.sqrt(fast.raw.variances[1])),
            "target_s": LMM_TARGET_S if n_trials == 20_000 else np.nan,
        }
        if with_statsmodels:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                sm_s, slow = _best_of(
                    lambda df=df: fit_lmm(df, formula, random=random, engine="statsmodels"), 1
                )
            va = fast.random_effects["variance"].to_numpy()
            vb = slow.random_effects["variance"].to_numpy()
            fa, fb = fast.fixed["estimate"].to_numpy(), slow.fixed["estimate"].to_numpy()
            row.update(
                statsmodels_s=sm_s,
                ratio=sm_s / pls_s,
                converged=f"{fast.converged}/{slow.converged}",
                max_rel_var=f"{np.max(np.abs(va / vb - 1)):.1e}",
                max_rel_fixed=f"{np.max(np.abs(fa / fb - 1)):.1e}",
                loglik_diff=f"{fast.loglik - slow.loglik:.1e}",
            )
        rows.append(row)
    return rows


# -- runner --------------------------------------------------------------------------------------

SECTIONS: dict[str, Callable[..., list[dict[str, Any]]]] = {
    "irt": bench_irt,
    "agreement": bench_agreement,
    "mixed": bench_mixed,
    "lmm": bench_lmm,
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
    parser.add_argument(
        "--only",
        action="append",
        choices=sorted(SECTIONS),
        help="run only this section (repeatable)",
    )
    parser.add_argument(
        "--girth-all", action="store_true", help="also run girth at 50,000 x 200 (minutes)"
    )
    parser.add_argument(
        "--mixed-large",
        action="store_true",
        help="also fit the GLMM at 500,000 trials (about 10 s)",
    )
    parser.add_argument(
        "--scale-size",
        default="quick",
        choices=("quick", "100k", "1m"),
        help="study size of the scale section (default quick)",
    )
    parser.add_argument(
        "--scale-keep", default=None, help="folder to build and keep the scale section's study in"
    )
    parser.add_argument(
        "--threads",
        type=int,
        default=0,
        help="BLAS threads (re-runs the script with the thread variables set)",
    )
    args = parser.parse_args(argv)
    if args.threads and os.environ.get("OPENBLAS_NUM_THREADS") != str(args.threads):
        env = dict(os.environ)
        for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            env[var] = str(args.threads)
        argv_all = [sys.executable, os.path.abspath(__file__), *sys.argv[1:]]
        os.execve(sys.executable, argv_all, env)
    load = os.getloadavg()
    threads = os.environ.get("OPENBLAS_NUM_THREADS", "default")
    print(
        f"load average: {load[0]:.2f} {load[1]:.2f} {load[2]:.2f} on {os.cpu_count()} cores; "
        f"BLAS threads: {threads}"
    )
    for name in args.only or list(SECTIONS):
        kwargs: dict[str, Any] = {}
        if name == "irt":
            kwargs = {"girth_all": args.girth_all}
        elif name == "scale":
            kwargs = {"size": args.scale_size, "keep": args.scale_keep}
        elif name == "mixed":
            kwargs = {"large": args.mixed_large}
        print_table(name, SECTIONS[name](args.quick, **kwargs))
    return 0


# -- scale ---------------------------------------------------------------------------------------
# Full ``analyze_study`` on simulated studies (bench/analysis_scale.py builds them: the example's
# families at 100 items, simulated people, the reference solver under three budgets x 3 seeds):
# seconds of loading and of every part, peak memory of the analysing process, cold (logs parsed)
# and warm (Parquet cache found). Targets: 100k trials <= 60 s; 1M trials <= 600 s within 4 GB.
# ``--scale-size`` picks quick (100 people, the default), 100k (1,000) or 1m (10,000; long:
# run it once in the background), ``--scale-keep DIR`` keeps the built study for the next run.


def bench_scale(
    quick: bool = False, *, size: str = "quick", keep: str | None = None
) -> list[dict[str, Any]]:
    """Full analyze at one study size; one row per run (cold, warm)."""
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from analysis_scale import bench_scale as run_scale

    return run_scale("quick" if quick else size, keep=keep)


SECTIONS["scale"] = bench_scale


if __name__ == "__main__":
    raise SystemExit(main())
