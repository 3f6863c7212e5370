"""Rank correlations of many rows at once, their paired bootstrap, and their p-values.

The one home of the rank-correlation machinery: :mod:`twofold.analysis.agreement` (difficulty
profiles), :mod:`twofold.analysis.reliability` (split halves) and
:mod:`twofold.analysis.planning` (simulated studies) all use these functions.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from typing import Literal

import numpy as np
import pandas as pd
from scipy import special, stats
from twofold.study.checks import check_choice, check_int, check_number, fail
from twofold.study.exceptions import DegenerateWarning

__all__ = [
    "STATISTICS",
    "bootstrap_ci",
    "corr_p",
    "kendall_resampled",
    "kendall_rows",
    "spearman_rows",
]


def spearman_rows(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Spearman's rho of every row pair of ``x`` and ``y`` (shape (..., n)); average ranks for
    ties, NaN where a row is constant."""
    rx = stats.rankdata(x, axis=-1)
    ry = stats.rankdata(y, axis=-1)
    rx = rx - rx.mean(axis=-1, keepdims=True)
    ry = ry - ry.mean(axis=-1, keepdims=True)
    den = np.sqrt((rx * rx).sum(-1) * (ry * ry).sum(-1))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, (rx * ry).sum(-1) / den, np.nan)


def kendall_rows(x: np.ndarray, y: np.ndarray, chunk: int = 64) -> np.ndarray:
    """Kendall's tau-b of every row pair (vectorised over pairs, in chunks of rows)."""
    x = np.atleast_2d(x)
    y = np.atleast_2d(y)
    n = x.shape[-1]
    n0 = n * (n - 1) / 2
    out = np.empty(x.shape[0])
    for s in range(0, x.shape[0], chunk):
        xs, ys = x[s : s + chunk], y[s : s + chunk]
        sx = np.sign(xs[:, :, None] - xs[:, None, :]).astype(np.int8)
        sy = np.sign(ys[:, :, None] - ys[:, None, :]).astype(np.int8)
        con = np.einsum("bij,bij->b", sx, sy, dtype=np.int64) / 2
        tx = ((sx == 0).sum(axis=(1, 2)) - n) / 2
        ty = ((sy == 0).sum(axis=(1, 2)) - n) / 2
        with np.errstate(invalid="ignore", divide="ignore"):
            out[s : s + chunk] = con / np.sqrt((n0 - tx) * (n0 - ty))
    return out


def kendall_resampled(x: np.ndarray, y: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """Kendall's tau-b of ``(x[idx[b]], y[idx[b]])`` for every row ``b`` of ``idx``.

    A resample only repeats original pairs, so with ``c`` the multiplicity of each original
    pair in it, concordance minus discordance is ``c' (Sx * Sy) c / 2`` and the tie counts are
    ``(c' Tx c - m) / 2`` (``S`` the sign matrices of the original data, ``T`` their zeros,
    ``m`` the resample size): a few matrix products instead of ``m^2`` work per resample.
    """
    n = x.size
    b, m = idx.shape
    sx = np.sign(x[:, None] - x[None, :])
    sy = np.sign(y[:, None] - y[None, :])
    offsets = (idx + n * np.arange(b)[:, None]).ravel()
    c = np.bincount(offsets, minlength=b * n).reshape(b, n).astype(float)
    con = ((c @ (sx * sy)) * c).sum(1) / 2
    tx = (((c @ (sx == 0).astype(float)) * c).sum(1) - m) / 2
    ty = (((c @ (sy == 0).astype(float)) * c).sum(1) - m) / 2
    n0 = m * (m - 1) / 2
    with np.errstate(invalid="ignore", divide="ignore"):
        return con / np.sqrt((n0 - tx) * (n0 - ty))


STATISTICS: dict[str, Callable[[np.ndarray, np.ndarray], np.ndarray]] = {
    "spearman": spearman_rows,
    "kendall": kendall_rows,
}


def bootstrap_ci(
    x: Sequence[float] | np.ndarray,
    y: Sequence[float] | np.ndarray,
    *,
    statistic: Literal["spearman", "kendall"] = "spearman",
    n_boot: int = 2000,
    conf_level: float = 0.95,
    seed: int | np.random.Generator | None = 0,
) -> pd.DataFrame:
    """Paired bootstrap intervals (percentile and BCa) of a rank correlation.

    Parameters
    ----------
    x, y : array-like, shape (n,)
        Paired values (e.g. human item difficulty and a machine's item error rate).
    statistic : {"spearman", "kendall"}, default "spearman"
        Spearman's rho or Kendall's tau-b (ties handled as in scipy).
    n_boot : int, default 2000
        Number of resamples; all are drawn as one ``(n_boot, n)`` index array
        (``rng.integers(0, n, (n_boot, n))``) and evaluated at once.
    conf_level : float, default 0.95
    seed : int, Generator or None, default 0

    Returns
    -------
    pandas.DataFrame
        Two rows (``interval`` = ``"percentile"``, ``"bca"``) with columns ``statistic,
        estimate, interval, ci_low, ci_high, conf_level, n_boot, n``. Resamples where the
        statistic is undefined (a constant resample) are dropped before the intervals.

    Notes
    -----
    BCa (Efron 1987): bias ``z0 = Phi^-1(share of resampled values below the estimate, ties
    counted half)``, acceleration ``a = sum(d^3) / (6 (sum d^2)^1.5)`` with ``d`` the
    jackknife deviations ``mean(theta_(i)) - theta_(i)``; limits at the percentiles
    ``Phi(z0 + (z0 + z_alpha) / (1 - a (z0 + z_alpha)))``.

    References
    ----------
    Efron, B. (1987). Better bootstrap confidence intervals. JASA 82(397), 171-185.
    """
    check_choice("statistic", statistic, tuple(STATISTICS))
    n_boot = check_int("n_boot", n_boot, low=10)
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    xa = np.asarray(x, dtype=float)
    ya = np.asarray(y, dtype=float)
    if xa.ndim != 1 or xa.shape != ya.shape:
        raise fail("y", f"shape {ya.shape}", f"a 1-d array of the shape of x {xa.shape}")
    n = xa.size
    f = STATISTICS[statistic]
    cols = ["statistic", "estimate", "interval", "ci_low", "ci_high", "conf_level", "n_boot", "n"]
    est = float(f(xa[None, :], ya[None, :])[0]) if n >= 2 else float("nan")
    if n < 3 or not np.isfinite(est):
        warnings.warn(
            f"bootstrap_ci: {statistic} is undefined for these {n} pairs (fewer than 3 or "
            "constant values); reported as NaN.",
            DegenerateWarning,
            stacklevel=2,
        )
        return pd.DataFrame(
            [[statistic, est, k, np.nan, np.nan, level, n_boot, n] for k in ("percentile", "bca")],
            columns=cols,
        )
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    idx = rng.integers(0, n, (n_boot, n))

    def f_idx(ix: np.ndarray) -> np.ndarray:
        if statistic == "kendall":
            return kendall_resampled(xa, ya, ix)
        return f(xa[ix], ya[ix])

    boot = f_idx(idx)
    boot = boot[np.isfinite(boot)]
    alpha = (1 - level) / 2
    pct = np.percentile(boot, [100 * alpha, 100 * (1 - alpha)])
    # BCa
    z0 = special.ndtri(((boot < est).sum() + (boot <= est).sum()) / (2 * boot.size))
    keep = ~np.eye(n, dtype=bool)
    jidx = np.broadcast_to(np.arange(n), (n, n))[keep].reshape(n, n - 1)
    jack = f_idx(jidx)
    d = jack.mean() - jack
    den = 6 * (d**2).sum() ** 1.5
    a = (d**3).sum() / den if den > 0 else 0.0
    za = special.ndtri(np.array([alpha, 1 - alpha]))
    # every resample on one side of the estimate (z0 infinite): BCa is undefined, not an error
    with np.errstate(invalid="ignore", divide="ignore"):
        adj = special.ndtr(z0 + (z0 + za) / (1 - a * (z0 + za)))
    if np.all(np.isfinite(adj)):
        bca = np.percentile(boot, 100 * adj)
    else:
        bca = np.array([np.nan, np.nan])
    return pd.DataFrame(
        [
            [statistic, est, "percentile", pct[0], pct[1], level, n_boot, n],
            [statistic, est, "bca", bca[0], bca[1], level, n_boot, n],
        ],
        columns=cols,
    )


def corr_p(x: np.ndarray, y: np.ndarray, statistic: str) -> float:
    if len(x) < 3 or np.ptp(x) == 0 or np.ptp(y) == 0:
        return float("nan")
    if statistic == "spearman":
        return float(stats.spearmanr(x, y).pvalue)
    return float(stats.kendalltau(x, y).pvalue)
