"""People versus machines: difficulty profiles, error consistency, error types and robustness.

Every function takes a tidy trials table (see :mod:`twofold.analysis.data`) and returns a tidy
DataFrame with fixed columns, listed in each docstring and in the ``*_COLUMNS`` constants.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd
from scipy import special, stats
from twofold.study._check import check_choice, check_int, check_number, fail
from twofold.study.exceptions import DegenerateWarning, InputError

from .data import check_columns, logit, scored

__all__ = [
    "AGREEMENT_COLUMNS",
    "CONSISTENCY_COLUMNS",
    "CONSISTENCY_SUMMARY_COLUMNS",
    "ERROR_TEST_COLUMNS",
    "ERROR_TYPE_COLUMNS",
    "ERROR_ODDS_COLUMNS",
    "RELIABILITY_COLUMNS",
    "ROBUSTNESS_COLUMNS",
    "bootstrap_ci",
    "difficulty_agreement",
    "difficulty_reliability",
    "error_consistency",
    "error_consistency_kappa",
    "error_consistency_summary",
    "error_type_odds",
    "error_type_tests",
    "error_types",
    "item_difficulty",
    "machine_error_rates",
    "robustness",
    "robustness_test",
]

AGREEMENT_COLUMNS = (
    "group",
    "family",
    "statistic",
    "estimate",
    "p_val",
    "n_items",
    "interval",
    "ci_low",
    "ci_high",
    "conf_level",
    "n_boot",
    "human_difficulty",
)
CONSISTENCY_COLUMNS = (
    "respondent_a",
    "respondent_b",
    "kind_a",
    "kind_b",
    "group_a",
    "group_b",
    "pair_type",
    "n_items",
    "p_a",
    "p_b",
    "observed",
    "expected",
    "kappa",
)
CONSISTENCY_SUMMARY_COLUMNS = (
    "group_a",
    "group_b",
    "pair_type",
    "n_pairs",
    "n_defined",
    "mean",
    "sd",
    "median",
    "q_low",
    "q_high",
    "conf_level",
)
ERROR_TYPE_COLUMNS = ("family", "group", "error_type", "n", "share", "n_errors")
ERROR_TEST_COLUMNS = (
    "family",
    "group",
    "n_human",
    "n_group",
    "n_types",
    "test",
    "statistic",
    "df",
    "p_val",
    "cramers_v",
)
ERROR_ODDS_COLUMNS = (
    "family",
    "group",
    "error_type",
    "n_group",
    "n_human",
    "log_odds_ratio",
    "se",
    "ci_low",
    "ci_high",
    "conf_level",
)
ROBUSTNESS_COLUMNS = (
    "group",
    "kind",
    "family",
    "n_parent",
    "n_isomorph",
    "acc_parent",
    "acc_isomorph",
    "difference",
    "se",
    "ci_low",
    "ci_high",
    "conf_level",
)


# -- bootstrap -----------------------------------------------------------------------------------
def _rank_rows(a: np.ndarray) -> np.ndarray:
    return stats.rankdata(a, axis=-1)


def _spearman_rows(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Spearman's rho of every row pair of ``x`` and ``y`` (shape (..., n))."""
    rx = _rank_rows(x)
    ry = _rank_rows(y)
    rx = rx - rx.mean(axis=-1, keepdims=True)
    ry = ry - ry.mean(axis=-1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        return (rx * ry).sum(-1) / np.sqrt((rx * rx).sum(-1) * (ry * ry).sum(-1))


def _kendall_rows(x: np.ndarray, y: np.ndarray, chunk: int = 64) -> np.ndarray:
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


def _kendall_resampled(x: np.ndarray, y: np.ndarray, idx: np.ndarray) -> np.ndarray:
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


_STATISTICS: dict[str, Callable[[np.ndarray, np.ndarray], np.ndarray]] = {
    "spearman": _spearman_rows,
    "kendall": _kendall_rows,
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
    check_choice("statistic", statistic, tuple(_STATISTICS))
    n_boot = check_int("n_boot", n_boot, low=10)
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    xa = np.asarray(x, dtype=float)
    ya = np.asarray(y, dtype=float)
    if xa.ndim != 1 or xa.shape != ya.shape:
        raise fail("y", f"shape {ya.shape}", f"a 1-d array of the shape of x {xa.shape}")
    n = xa.size
    f = _STATISTICS[statistic]
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
            return _kendall_resampled(xa, ya, ix)
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


# -- difficulty profiles -------------------------------------------------------------------------
def item_difficulty(
    trials: pd.DataFrame,
    *,
    irt: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Human item difficulty: IRT ``b`` when given, else the logit of the error rate.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; human scored trials are used.
    irt : pandas.DataFrame, optional
        Item parameters with columns ``item`` and ``b`` (e.g. from
        :func:`twofold.analysis.irt.fit_irt`); items missing from it fall back to nothing (NaN).

    Returns
    -------
    pandas.DataFrame
        Columns ``item, family, n, n_errors, error_rate, difficulty, source`` (``source`` is
        ``"irt_b"`` or ``"logit_error"``). The logit uses ``(errors + 0.5) / (n + 1)`` so all-right
        and all-wrong items stay finite.
    """
    check_columns(trials, ["kind", "item", "family", "correct"])
    h = scored(trials.loc[trials["kind"] == "human"])
    g = h.groupby(["item", "family"], sort=True)["correct"].agg(n="size", n_correct="sum")
    g = g.reset_index()
    g["n_errors"] = g["n"] - g["n_correct"]
    g["error_rate"] = g["n_errors"] / g["n"]
    if irt is not None:
        check_columns(irt, ["item", "b"], name="irt")
        b = irt.drop_duplicates("item").set_index("item")["b"]
        g["difficulty"] = g["item"].map(b).astype(float)
        g["source"] = "irt_b"
    else:
        g["difficulty"] = logit((g["n_errors"] + 0.5) / (g["n"] + 1))
        g["source"] = "logit_error"
    return g[["item", "family", "n", "n_errors", "error_rate", "difficulty", "source"]]


def machine_error_rates(trials: pd.DataFrame) -> pd.DataFrame:
    """Each machine group's error rate per item, pooled over seeds (sessions).

    Returns
    -------
    pandas.DataFrame
        Columns ``group, item, family, n, n_errors, error_rate``.
    """
    check_columns(trials, ["kind", "group", "item", "family", "correct"])
    m = scored(trials.loc[trials["kind"] == "machine"])
    g = m.groupby(["group", "item", "family"], sort=True)["correct"].agg(n="size", n_correct="sum")
    g = g.reset_index()
    g["n_errors"] = g["n"] - g["n_correct"]
    g["error_rate"] = g["n_errors"] / g["n"]
    return g[["group", "item", "family", "n", "n_errors", "error_rate"]]


def difficulty_agreement(
    trials: pd.DataFrame,
    *,
    irt: pd.DataFrame | None = None,
    statistics: Sequence[str] = ("spearman", "kendall"),
    n_boot: int = 2000,
    conf_level: float = 0.95,
    by_family: bool = True,
    seed: int = 0,
) -> pd.DataFrame:
    """Do machines find the same items hard as people? Rank correlations with bootstrap CIs.

    For each machine group, correlates human item difficulty (:func:`item_difficulty`) with the
    group's item error rate (:func:`machine_error_rates`) over the items both answered, overall
    and per family, with paired bootstrap intervals over items (:func:`bootstrap_ci`).

    Parameters
    ----------
    trials : pandas.DataFrame
    irt : pandas.DataFrame, optional
        Item parameters (``item``, ``b``) to use as human difficulty.
    statistics : sequence of {"spearman", "kendall"}
    n_boot : int, default 2000
    conf_level : float, default 0.95
    by_family : bool, default True
        Add one block of rows per family besides ``family="all"`` (when there are several).
    seed : int, default 0
        Seed of the resampling (each group x family x statistic gets its own stream).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`AGREEMENT_COLUMNS`; two rows per group x family x statistic
        (``interval`` = ``percentile`` and ``bca``). ``p_val`` is scipy's test of no association.
    """
    for s in statistics:
        check_choice("statistics", s, tuple(_STATISTICS))
    hum = item_difficulty(trials, irt=irt)
    mach = machine_error_rates(trials)
    rows: list[pd.DataFrame] = []
    ss = np.random.SeedSequence(seed)
    for group, m in mach.groupby("group", sort=True):
        j = hum.merge(m[["item", "error_rate"]], on="item", suffixes=("_h", "_m"))
        j = j.loc[j["difficulty"].notna()]
        parts = [("all", j)]
        if by_family and j["family"].nunique() > 1:
            parts += list(j.groupby("family", sort=True))
        for fam, sub in parts:
            x = sub["difficulty"].to_numpy(float)
            y = sub["error_rate_m"].to_numpy(float)
            for s in statistics:
                (child,) = ss.spawn(1)
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", DegenerateWarning)
                    ci = bootstrap_ci(
                        x,
                        y,
                        statistic="kendall" if s == "kendall" else "spearman",
                        n_boot=n_boot,
                        conf_level=conf_level,
                        seed=np.random.default_rng(child),
                    )
                p = _corr_p(x, y, s)
                if not np.isfinite(ci["estimate"].iloc[0]):
                    warnings.warn(
                        f"difficulty_agreement: {s} for {group} on {fam} is undefined "
                        f"({len(x)} items, or constant difficulty/error rates); NaN.",
                        DegenerateWarning,
                        stacklevel=2,
                    )
                ci = ci.assign(
                    group=group,
                    family=fam,
                    p_val=p,
                    n_items=len(x),
                    human_difficulty=hum["source"].iloc[0] if len(hum) else "logit_error",
                )
                rows.append(ci)
    if not rows:
        return pd.DataFrame(columns=list(AGREEMENT_COLUMNS))
    out = pd.concat(rows, ignore_index=True)
    return out[list(AGREEMENT_COLUMNS)]


#: columns of :func:`difficulty_reliability`
RELIABILITY_COLUMNS = (
    "family",
    "n_items",
    "n_respondents",
    "n_splits",
    "split_half",
    "spearman_brown",
    "q_low",
    "q_high",
    "conf_level",
)


def difficulty_reliability(
    trials: pd.DataFrame,
    *,
    n_splits: int = 200,
    conf_level: float = 0.95,
    by_family: bool = True,
    seed: int = 0,
) -> pd.DataFrame:
    """How reliable is the human difficulty profile itself? The ceiling for machine agreement.

    People are split at random into two halves; each half's item error rates (logit, with 0.5
    added to the counts) are rank-correlated over the items both halves answered. Repeated over
    ``n_splits`` splits, the mean correlation is stepped up to the full sample with the
    Spearman–Brown formula ``2r / (1 + r)``. A machine whose difficulty-profile correlation
    (:func:`difficulty_agreement`) reaches this value agrees with people as well as people agree
    with each other.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; human scored trials are used.
    n_splits : int, default 200
    conf_level : float, default 0.95
        Coverage of the ``q_low``/``q_high`` quantiles of the split-half correlations.
    by_family : bool, default True
        Also one row per family (``family = "all"`` is always present).
    seed : int, default 0

    Returns
    -------
    pandas.DataFrame
        Columns :data:`RELIABILITY_COLUMNS`; ``split_half`` is the mean Spearman correlation
        between halves, ``spearman_brown`` its step-up; NaN (with a
        :class:`DegenerateWarning`) with fewer than 4 people or 3 items.

    References
    ----------
    Spearman, C. (1910). Correlation calculated from faulty data. British Journal of Psychology,
    3, 271–295. Brown, W. (1910). Some experimental results in the correlation of mental
    abilities. British Journal of Psychology, 3, 296–322.
    """
    check_columns(trials, ["kind", "respondent", "item", "family", "correct"])
    n_splits = check_int("n_splits", n_splits, low=2)
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    h = scored(trials.loc[trials["kind"] == "human"])
    rng = np.random.default_rng(seed)
    people = np.array(sorted(h["respondent"].unique()))
    parts: list[tuple[str, pd.DataFrame]] = [("all", h)]
    if by_family and h["family"].nunique() > 1:
        parts += [(str(f), g) for f, g in h.groupby("family", sort=True)]
    rows = []
    splits = [rng.permutation(len(people)) < len(people) // 2 for _ in range(n_splits)]
    for fam, sub in parts:
        wrong = (~sub["correct"].astype(bool)).astype(float)
        err = pd.crosstab(sub["respondent"], sub["item"], values=wrong, aggfunc="sum")
        n = pd.crosstab(sub["respondent"], sub["item"])
        err = err.reindex(people).fillna(0.0).to_numpy()
        n = n.reindex(people).fillna(0).to_numpy(float)
        rs = []
        for half in splits:
            e1, n1 = err[half].sum(0), n[half].sum(0)
            e2, n2 = err[~half].sum(0), n[~half].sum(0)
            ok = (n1 > 0) & (n2 > 0)
            if ok.sum() < 3:
                continue
            d1 = logit((e1[ok] + 0.5) / (n1[ok] + 1))
            d2 = logit((e2[ok] + 0.5) / (n2[ok] + 1))
            if np.ptp(d1) == 0 or np.ptp(d2) == 0:  # a constant half: no ranking to compare
                continue
            r = stats.spearmanr(d1, d2).statistic
            if np.isfinite(r):
                rs.append(r)
        n_items = int((n.sum(0) > 0).sum())
        if len(people) < 4 or len(rs) == 0:
            warnings.warn(
                f"difficulty_reliability: {fam}: too few people ({len(people)}) or items "
                f"({n_items}) for split halves; NaN.",
                DegenerateWarning,
                stacklevel=2,
            )
            r_mean = lo = hi = sb = np.nan
        else:
            arr = np.asarray(rs)
            r_mean = float(arr.mean())
            lo, hi = np.quantile(arr, [(1 - level) / 2, 1 - (1 - level) / 2])
            sb = 2 * r_mean / (1 + r_mean) if r_mean > -1 else np.nan
        rows.append(
            dict(
                family=fam,
                n_items=n_items,
                n_respondents=len(people),
                n_splits=len(rs),
                split_half=r_mean,
                spearman_brown=sb,
                q_low=lo,
                q_high=hi,
                conf_level=level,
            )
        )
    return pd.DataFrame(rows, columns=list(RELIABILITY_COLUMNS))


def _corr_p(x: np.ndarray, y: np.ndarray, statistic: str) -> float:
    if len(x) < 3 or np.ptp(x) == 0 or np.ptp(y) == 0:
        return float("nan")
    if statistic == "spearman":
        return float(stats.spearmanr(x, y).pvalue)
    return float(stats.kendalltau(x, y).pvalue)


# -- error consistency ---------------------------------------------------------------------------
def error_consistency_kappa(
    a: Sequence[bool] | np.ndarray, b: Sequence[bool] | np.ndarray
) -> float:
    """Error consistency of two correct/incorrect vectors over the same trials.

    Parameters
    ----------
    a, b : array-like of bool, shape (n,)
        Whether each observer answered each shared item correctly.

    Returns
    -------
    float
        ``kappa = (c_obs - c_exp) / (1 - c_exp)`` with ``c_obs`` the share of items where both
        are right or both wrong and ``c_exp = p_a p_b + (1 - p_a)(1 - p_b)``. NaN with a
        :class:`DegenerateWarning` when undefined (``c_exp = 1``: both always right or both
        always wrong; or no items) — never 0.

    References
    ----------
    Geirhos, R., Meding, K., & Wichmann, F. A. (2020). Beyond accuracy: quantifying trial-by-trial
    behaviour of CNNs and humans by measuring error consistency. NeurIPS 33.
    """
    x = np.asarray(a, dtype=bool)
    y = np.asarray(b, dtype=bool)
    if x.shape != y.shape or x.ndim != 1:
        raise fail("b", f"shape {y.shape}", f"a 1-d vector of the shape of a {x.shape}")
    if x.size == 0:
        warnings.warn("error consistency of no items is undefined; NaN.", DegenerateWarning, 2)
        return float("nan")
    obs = float(np.mean(x == y))
    p1, p2 = x.mean(), y.mean()
    exp = p1 * p2 + (1 - p1) * (1 - p2)
    if exp >= 1:
        warnings.warn(
            "error consistency is undefined when both observers are always right or both always "
            "wrong (expected agreement 1); NaN.",
            DegenerateWarning,
            stacklevel=2,
        )
        return float("nan")
    return float((obs - exp) / (1 - exp))


def _pair_type(ka: str, kb: str) -> str:
    return "-".join(sorted((ka, kb)))


def error_consistency(
    trials: pd.DataFrame,
    *,
    min_items: int = 10,
    respondents: Sequence[str] | None = None,
) -> pd.DataFrame:
    """Error consistency (Geirhos et al. 2020) for every pair of respondents on shared items.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; scored trials are used, the first answer per respondent and item.
    min_items : int, default 10
        Pairs sharing fewer scored items get NaN (counted in the warning).
    respondents : sequence of str, optional
        Restrict to these respondents.

    Returns
    -------
    pandas.DataFrame
        One row per unordered pair; columns :data:`CONSISTENCY_COLUMNS`. ``pair_type`` is
        ``human-human``, ``human-machine`` or ``machine-machine``; ``p_a``/``p_b`` are the two
        accuracies on the shared items, ``observed``/``expected`` the agreement shares, and
        ``kappa`` the error consistency (NaN when undefined, with one
        :class:`DegenerateWarning` giving the count).

    Notes
    -----
    Computed for all pairs at once from the respondent x item matrix ``C`` (1 = correct) and
    mask ``M`` (1 = answered): shared ``n = M M'``, both right ``C C'``, ``a`` right on shared
    ``C M'``; both wrong ``n - a - b + both``.
    """
    check_columns(trials, ["respondent", "kind", "group", "item", "correct"])
    min_items = check_int("min_items", min_items, low=1)
    s = scored(trials)
    if respondents is not None:
        s = s.loc[s["respondent"].isin(list(respondents))]
    s = s.drop_duplicates(["respondent", "item"], keep="first")
    info = s.groupby("respondent", sort=True)[["kind", "group"]].first()
    resp = info.index.to_numpy()
    if len(resp) < 2:
        return pd.DataFrame(columns=list(CONSISTENCY_COLUMNS))
    r_code = pd.Categorical(s["respondent"], categories=resp).codes
    items, i_code = np.unique(s["item"].to_numpy(), return_inverse=True)
    mask = np.zeros((len(resp), len(items)))
    corr = np.zeros((len(resp), len(items)))
    mask[r_code, i_code] = 1.0
    corr[r_code, i_code] = s["correct"].to_numpy(float)
    n = mask @ mask.T
    both = corr @ corr.T
    a_right = corr @ mask.T  # [i, j]: i right among items shared with j
    iu, ju = np.triu_indices(len(resp), k=1)
    nn = n[iu, ju]
    ar = a_right[iu, ju]
    br = a_right[ju, iu]
    bb = both[iu, ju]
    with np.errstate(invalid="ignore", divide="ignore"):
        obs = (bb + (nn - ar - br + bb)) / nn
        pa, pb = ar / nn, br / nn
        exp = pa * pb + (1 - pa) * (1 - pb)
        kappa = (obs - exp) / (1 - exp)
    few = nn < min_items
    undefined = (~few) & (exp >= 1 - 1e-12)
    kappa = np.where(few | undefined, np.nan, kappa)
    if few.any() or undefined.any():
        warnings.warn(
            f"error_consistency: {int(undefined.sum())} pairs undefined (both always right or "
            f"both always wrong) and {int(few.sum())} pairs sharing fewer than {min_items} items; "
            "their kappa is NaN.",
            DegenerateWarning,
            stacklevel=2,
        )
    kinds = info["kind"].astype(str).to_numpy()
    groups = info["group"].astype(str).to_numpy()
    out = pd.DataFrame(
        {
            "respondent_a": resp[iu],
            "respondent_b": resp[ju],
            "kind_a": kinds[iu],
            "kind_b": kinds[ju],
            "group_a": groups[iu],
            "group_b": groups[ju],
            "pair_type": [_pair_type(x, y) for x, y in zip(kinds[iu], kinds[ju], strict=True)],
            "n_items": nn.astype(int),
            "p_a": pa,
            "p_b": pb,
            "observed": obs,
            "expected": exp,
            "kappa": kappa,
        },
        columns=list(CONSISTENCY_COLUMNS),
    )
    # order each pair so a human (then the alphabetically first group) is on side a
    swap = (out["kind_a"] == "machine") & (out["kind_b"] == "human")
    swap |= (out["kind_a"] == out["kind_b"]) & (out["group_a"] > out["group_b"])
    for x, y in (
        ("respondent_a", "respondent_b"),
        ("kind_a", "kind_b"),
        ("group_a", "group_b"),
        ("p_a", "p_b"),
    ):
        out.loc[swap, [x, y]] = out.loc[swap, [y, x]].to_numpy()
    return out


def error_consistency_summary(pairs: pd.DataFrame, *, conf_level: float = 0.95) -> pd.DataFrame:
    """Distribution of error consistency per group pair; the human-human row is the ceiling.

    Parameters
    ----------
    pairs : pandas.DataFrame
        Output of :func:`error_consistency`.
    conf_level : float, default 0.95
        Coverage of the central quantile range ``q_low``-``q_high`` of the pairs' kappas.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CONSISTENCY_SUMMARY_COLUMNS`, one row per (group_a, group_b); ``n_pairs``
        counts all pairs, ``n_defined`` those with a defined kappa; statistics over the defined.
    """
    check_columns(pairs, ["group_a", "group_b", "pair_type", "kappa"], name="pairs")
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    rows = []
    lo, hi = (1 - level) / 2, 1 - (1 - level) / 2
    for (ga, gb), sub in pairs.groupby(["group_a", "group_b"], sort=True):
        k = sub["kappa"].to_numpy(float)
        k = k[np.isfinite(k)]
        rows.append(
            dict(
                group_a=ga,
                group_b=gb,
                pair_type=sub["pair_type"].iloc[0],
                n_pairs=len(sub),
                n_defined=k.size,
                mean=k.mean() if k.size else np.nan,
                sd=k.std(ddof=1) if k.size > 1 else np.nan,
                median=np.median(k) if k.size else np.nan,
                q_low=np.quantile(k, lo) if k.size else np.nan,
                q_high=np.quantile(k, hi) if k.size else np.nan,
                conf_level=level,
            )
        )
    out = pd.DataFrame(rows, columns=list(CONSISTENCY_SUMMARY_COLUMNS))
    order = out["pair_type"].map({"human-human": 0, "human-machine": 1, "machine-machine": 2})
    return out.assign(_o=order).sort_values(["_o", "group_a", "group_b"]).drop(columns="_o")


# -- error types ---------------------------------------------------------------------------------
def _errors(trials: pd.DataFrame) -> pd.DataFrame:
    check_columns(trials, ["kind", "group", "family", "correct", "error_type"])
    s = scored(trials)
    e = s.loc[s["correct"] == 0].copy()
    e["error_type"] = e["error_type"].fillna("unclassified").astype(str)
    e["group"] = e["group"].astype(str)
    return e


def error_types(trials: pd.DataFrame) -> pd.DataFrame:
    """The distribution of error types per family, for people and for each machine group.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_TYPE_COLUMNS`: counts ``n`` of each error type among the wrong
        answers of the group in the family, ``share = n / n_errors``. Every type seen in the
        family is listed for every group (``n = 0`` when the group never made it).
    """
    e = _errors(trials)
    rows = []
    for fam, sub in e.groupby("family", sort=True):
        types = sorted(sub["error_type"].unique())
        for group, g in sub.groupby("group", sort=True):
            counts = g["error_type"].value_counts()
            tot = int(counts.sum())
            for t in types:
                k = int(counts.get(t, 0))
                rows.append(
                    dict(family=fam, group=group, error_type=t, n=k, share=k / tot, n_errors=tot)
                )
    return pd.DataFrame(rows, columns=list(ERROR_TYPE_COLUMNS))


def _g_stat(table: np.ndarray) -> float:
    exp = table.sum(1, keepdims=True) * table.sum(0, keepdims=True) / table.sum()
    nz = table > 0
    return float(2 * (table[nz] * np.log(table[nz] / exp[nz])).sum())


def error_type_tests(
    trials: pd.DataFrame,
    *,
    min_expected: float = 5.0,
    n_perm: int = 9999,
    seed: int = 0,
) -> pd.DataFrame:
    """Does a machine group's error-type distribution differ from people's? G-test per family.

    Parameters
    ----------
    trials : pandas.DataFrame
    min_expected : float, default 5
        When any expected count of the 2 x k table is below this, the p-value comes from a
        permutation test of the G statistic (margins fixed) instead of the chi-square law.
    n_perm : int, default 9999
        Permutations for the small-count test.
    seed : int, default 0

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_TEST_COLUMNS`, one row per family x machine group; ``test`` is
        ``g_test`` or ``permutation_g``; ``cramers_v = sqrt(X^2 / (n (min(r, c) - 1)))`` from
        Pearson's X^2. NaN (with a :class:`DegenerateWarning`) when either side has no errors or
        only one error type occurs.

    References
    ----------
    Sokal, R. R., & Rohlf, F. J. (1995). Biometry, 3rd ed., ch. 17 (the G-test).
    """
    n_perm = check_int("n_perm", n_perm, low=99)
    e = _errors(trials)
    rng = np.random.default_rng(seed)
    rows = []
    for fam, sub in e.groupby("family", sort=True):
        hum = sub.loc[sub["kind"] == "human"]
        for group, g in sub.loc[sub["kind"] == "machine"].groupby("group", sort=True):
            both = pd.concat([hum, g])
            types = sorted(both["error_type"].unique())
            table = np.array(
                [
                    [int((hum["error_type"] == t).sum()) for t in types],
                    [int((g["error_type"] == t).sum()) for t in types],
                ],
                dtype=float,
            )
            row: dict[str, Any] = dict(
                family=fam,
                group=group,
                n_human=int(table[0].sum()),
                n_group=int(table[1].sum()),
                n_types=len(types),
            )
            if table[0].sum() == 0 or table[1].sum() == 0 or len(types) < 2:
                warnings.warn(
                    f"error_type_tests: {fam}/{group}: needs errors on both sides and two or "
                    "more error types; NaN.",
                    DegenerateWarning,
                    stacklevel=2,
                )
                rows.append(
                    row
                    | dict(test="none", statistic=np.nan, df=np.nan, p_val=np.nan, cramers_v=np.nan)
                )
                continue
            g_stat = _g_stat(table)
            dof = len(types) - 1
            exp = table.sum(1, keepdims=True) * table.sum(0, keepdims=True) / table.sum()
            chi2 = float(((table - exp) ** 2 / exp).sum())
            v = float(np.sqrt(chi2 / (table.sum() * (min(table.shape) - 1))))
            if (exp < min_expected).any():
                labels = np.repeat(np.arange(len(types)), table.sum(0).astype(int))
                n_h = int(table[0].sum())
                perm = rng.permuted(np.broadcast_to(labels, (n_perm, labels.size)), axis=1)
                h_counts = np.stack(
                    [(perm[:, :n_h] == k).sum(1) for k in range(len(types))], axis=1
                ).astype(float)
                tab = np.stack([h_counts, table.sum(0) - h_counts], axis=1)
                ex = tab.sum(2, keepdims=True) * tab.sum(1, keepdims=True) / table.sum()
                with np.errstate(divide="ignore", invalid="ignore"):
                    terms = np.where(tab > 0, tab * np.log(tab / ex), 0.0)
                gs = 2 * terms.sum(axis=(1, 2))
                p = (1 + int((gs >= g_stat - 1e-9).sum())) / (n_perm + 1)
                test = "permutation_g"
            else:
                p = float(stats.chi2.sf(g_stat, dof))
                test = "g_test"
            rows.append(row | dict(test=test, statistic=g_stat, df=dof, p_val=p, cramers_v=v))
    return pd.DataFrame(rows, columns=list(ERROR_TEST_COLUMNS))


def error_type_odds(trials: pd.DataFrame, *, conf_level: float = 0.95) -> pd.DataFrame:
    """Per error type, the log-odds ratio of making that type (among errors), machine vs people.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_ODDS_COLUMNS`. ``log_odds_ratio = log((a d) / (b c))`` with ``a``/``b``
        the group's errors of / not of the type and ``c``/``d`` the people's; 0.5 is added to
        every cell when any cell is 0 (Haldane-Anscombe). ``se = sqrt(1/a + 1/b + 1/c + 1/d)``
        (Woolf); Wald interval. Positive: the machine makes this type relatively more often.
    """
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    z = stats.norm.ppf(0.5 + level / 2)
    e = _errors(trials)
    rows = []
    for fam, sub in e.groupby("family", sort=True):
        hum = sub.loc[sub["kind"] == "human", "error_type"]
        types = sorted(sub["error_type"].unique())
        for group, g in sub.loc[sub["kind"] == "machine"].groupby("group", sort=True):
            m = g["error_type"]
            for t in types:
                a, b = float((m == t).sum()), float((m != t).sum())
                c, d = float((hum == t).sum()), float((hum != t).sum())
                if min(a + b, c + d) == 0:
                    lor = se = np.nan
                else:
                    if min(a, b, c, d) == 0:
                        a, b, c, d = a + 0.5, b + 0.5, c + 0.5, d + 0.5
                    lor = float(np.log(a * d / (b * c)))
                    se = float(np.sqrt(1 / a + 1 / b + 1 / c + 1 / d))
                rows.append(
                    dict(
                        family=fam,
                        group=group,
                        error_type=t,
                        n_group=int((m == t).sum()),
                        n_human=int((hum == t).sum()),
                        log_odds_ratio=lor,
                        se=se,
                        ci_low=lor - z * se,
                        ci_high=lor + z * se,
                        conf_level=level,
                    )
                )
    return pd.DataFrame(rows, columns=list(ERROR_ODDS_COLUMNS))


# -- robustness ----------------------------------------------------------------------------------
def _isomorph_subset(trials: pd.DataFrame) -> pd.DataFrame:
    check_columns(trials, ["item", "parent", "isomorph", "correct", "group", "kind"])
    s = scored(trials)
    with_iso = set(s.loc[s["isomorph"].astype(bool), "parent"])
    return s.loc[s["parent"].isin(with_iso)]


def robustness(
    trials: pd.DataFrame,
    *,
    conf_level: float = 0.95,
    by_family: bool = True,
) -> pd.DataFrame:
    """Accuracy on isomorphs versus their parents, per respondent group.

    Only parents that have at least one isomorph in the data, and those isomorphs, are used.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ROBUSTNESS_COLUMNS`; ``difference = acc_isomorph - acc_parent`` with a
        Wald interval (``se`` from the two binomial proportions; trials treated as independent —
        see :func:`robustness_test` for the model with respondent and item effects). ``family``
        is ``"all"`` plus one row per family when ``by_family``.
    """
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    z = stats.norm.ppf(0.5 + level / 2)
    s = _isomorph_subset(trials)
    rows = []
    for group, g in s.groupby("group", sort=True):
        parts = [("all", g)]
        if by_family and g["family"].nunique() > 1:
            parts += list(g.groupby("family", sort=True))
        for fam, sub in parts:
            iso = sub["isomorph"].astype(bool)
            n1, n0 = int(iso.sum()), int((~iso).sum())
            p1 = sub.loc[iso, "correct"].mean() if n1 else np.nan
            p0 = sub.loc[~iso, "correct"].mean() if n0 else np.nan
            se = np.sqrt(p1 * (1 - p1) / n1 + p0 * (1 - p0) / n0) if n1 and n0 else np.nan
            rows.append(
                dict(
                    group=group,
                    kind=sub["kind"].iloc[0],
                    family=fam,
                    n_parent=n0,
                    n_isomorph=n1,
                    acc_parent=p0,
                    acc_isomorph=p1,
                    difference=p1 - p0,
                    se=se,
                    ci_low=p1 - p0 - z * se,
                    ci_high=p1 - p0 + z * se,
                    conf_level=level,
                )
            )
    return pd.DataFrame(rows, columns=list(ROBUSTNESS_COLUMNS))


def robustness_test(
    trials: pd.DataFrame,
    *,
    by: Literal["group", "kind"] = "group",
    conf_level: float = 0.95,
) -> Any:
    """Mixed-model test of whether isomorphs cost machines more accuracy than people.

    Fits ``correct ~ by * isomorph`` (logistic, crossed random intercepts for respondents and
    parent items; :func:`twofold.analysis.mixed.fit_glmm`). The ``by[T.<group>]:isomorph[T.True]``
    terms are the differences from people in the (log-odds) isomorph effect.

    Returns
    -------
    MixedResult
    """
    from .mixed import _with_human_first, fit_glmm

    check_choice("by", by, ("group", "kind"))
    s = _isomorph_subset(trials)
    if s.empty or s["isomorph"].nunique() < 2:
        raise InputError(
            "field 'trials': no parent items with isomorphs answered; accepted: a trials table "
            "holding parents and their isomorphs (variant_of set in the bank).",
            field="trials",
        )
    s = _with_human_first(s)
    s["isomorph"] = s["isomorph"].astype(bool).astype(int)
    return fit_glmm(
        s, f"correct ~ {by} * isomorph", random=("respondent", "parent"), conf_level=conf_level
    )
