"""Simulation-based sample planning for people-versus-machine comparisons.

How many participants does a study need so that its confidence intervals are narrow enough?
Starting from item parameters (assumed, or calibrated on a pilot study) and a machine's per-item
error probabilities, :func:`plan_sample_size` simulates many studies for each candidate number of
participants with the 2PL simulator of :mod:`twofold.analysis.irt` and reports, per sample size,
the expected width of the confidence interval of

- the **difficulty-profile correlation**: Spearman's rank correlation between the human error
  rate of each item and the machine's error rate on it (over its seeds);
- the **respondent-kind effect**: machine accuracy minus mean human accuracy (proportion
  correct over the items).

The expected confidence-interval width at a sample size is estimated as the width of the
central ``ci`` range of the estimates over the simulated studies (the items are held fixed; the
participants and the machine's seeds are redrawn). Simulations run in parallel across processes
with ``workers > 1`` and give the same numbers for any number of workers.
"""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor
from typing import Any

import numpy as np
import pandas as pd
from scipy.special import expit
from twofold.study.checks import check_int, check_number, fail

from ._ranks import spearman_rows
from .irt import IRTResult, fit_irt, response_matrix

__all__ = [
    "PLAN_COLUMNS",
    "QUANTITIES",
    "plan_from_pilot",
    "plan_sample_size",
    "required_sample_size",
]

QUANTITIES = ("profile_correlation", "kind_effect")
#: columns of the table returned by :func:`plan_sample_size`
PLAN_COLUMNS = (
    "quantity",
    "n_humans",
    "n_seeds",
    "n_items",
    "n_sim",
    "n_undefined",
    "true_value",
    "mean_estimate",
    "sd_estimate",
    "ci_low",
    "ci_high",
    "ci_width",
    "ci_level",
    "target_width",
    "meets_target",
)
_CELLS_PER_BLOCK = 4_000_000
_SIMS_PER_TASK = 50


def _item_parameters(items: Any) -> tuple[np.ndarray, np.ndarray]:
    if isinstance(items, IRTResult):
        return items.a, items.d
    if isinstance(items, pd.DataFrame):
        if "a" not in items.columns or not ({"b", "d"} & set(items.columns)):
            raise fail(
                "items",
                sorted(map(str, items.columns)),
                "an IRTResult or a table with columns a and b (or d)",
            )
        a = items["a"].to_numpy(dtype=np.float64)
        d = (
            items["d"].to_numpy(dtype=np.float64)
            if "d" in items.columns
            else -a * items["b"].to_numpy(dtype=np.float64)
        )
        return a, d
    raise fail("items", type(items).__name__, "an IRTResult or a table with columns a and b")


def _simulate_block(task: tuple) -> tuple[np.ndarray, np.ndarray]:
    """One block of simulated studies: returns (profile correlations, kind effects)."""
    a, d, machine_error, n_humans, n_seeds, n_sim, missing, mean, sd, seed = task
    rng = np.random.default_rng(seed)
    J = a.size
    rho = np.empty(n_sim)
    effect = np.empty(n_sim)
    block = max(1, _CELLS_PER_BLOCK // max(n_humans * J, 1))
    for start in range(0, n_sim, block):
        k = min(block, n_sim - start)
        theta = rng.normal(mean, sd, size=(k, n_humans, 1))
        p = expit(a * theta + d)
        correct = rng.random(p.shape) < p
        if missing > 0:
            seen = rng.random(p.shape) >= missing
            n_seen = seen.sum(1)
            n_cor = (correct & seen).sum(1)
            with np.errstate(invalid="ignore", divide="ignore"):
                human_err = 1.0 - n_cor / n_seen
                person_acc = (correct & seen).sum(2) / seen.sum(2)
            human_acc = np.nanmean(person_acc, axis=1)
        else:
            human_err = 1.0 - correct.mean(1)
            human_acc = correct.mean((1, 2))
        mach_wrong = rng.random((k, n_seeds, J)) < machine_error
        mach_err = mach_wrong.mean(1)
        rho[start : start + k] = spearman_rows(human_err, mach_err)
        effect[start : start + k] = (1.0 - mach_err.mean(1)) - human_acc
    return rho, effect


def _true_values(a, d, machine_error, mean, sd) -> tuple[float, float]:
    nodes, weights = np.polynomial.hermite_e.hermegauss(61)
    weights = weights / weights.sum()
    p = expit(a * (mean + sd * nodes[:, None]) + d)  # nodes x items
    human_err = 1.0 - weights @ p
    rho = float(spearman_rows(human_err[None], machine_error[None])[0])
    return rho, float((1.0 - machine_error.mean()) - (1.0 - human_err.mean()))


def _as_sizes(name: str, values: Any) -> list[int]:
    vals = [values] if np.ndim(values) == 0 else list(values)
    if not vals:
        raise fail(name, values, "one or more positive integers")
    for v in vals:
        check_int(name, int(v) if isinstance(v, np.integer) else v, low=1)
    return sorted({int(v) for v in vals})


def plan_sample_size(
    items: Any,
    *,
    machine_error: Any = None,
    machine_theta: float = 0.0,
    alignment: float = 0.8,
    n_humans: int | Sequence[int] = (10, 20, 40, 80, 160),
    n_seeds: int | Sequence[int] = 5,
    target_width: float = 0.2,
    ci: float = 0.95,
    n_sim: int = 200,
    ability_mean: float = 0.0,
    ability_sd: float = 1.0,
    missing: float = 0.0,
    workers: int = 1,
    seed: int | None = 0,
) -> pd.DataFrame:
    """Expected confidence-interval widths by number of participants, by simulation.

    Parameters
    ----------
    items : IRTResult or pandas.DataFrame
        Item parameters: a calibration (e.g. from a pilot, see :func:`plan_from_pilot`) or a
        table with columns ``a`` and ``b`` (or ``d``), one row per item.
    machine_error : array_like, shape (n_items,), optional
        The machine's probability of failing each item (e.g. its pilot error rates). When not
        given, a machine is made up from ``machine_theta`` and ``alignment``.
    machine_theta : float, default 0.0
        Ability of the made-up machine on the human scale.
    alignment : float, default 0.8
        Correlation between the made-up machine's item difficulties and the human ones
        (logit scale; 1 = same order as people, 0 = unrelated). Drawn with ``seed``.
    n_humans : int or sequence of int, default (10, 20, 40, 80, 160)
        Candidate numbers of human participants.
    n_seeds : int or sequence of int, default 5
        Number of machine runs (seeds) per study.
    target_width : float, default 0.2
        Wanted confidence-interval width (same for both quantities; correlation units and
        proportion-correct units).
    ci : float, default 0.95
        Confidence level.
    n_sim : int, default 200
        Simulated studies per (n_humans, n_seeds) cell.
    ability_mean, ability_sd : float, default 0, 1
        Normal distribution of human abilities on the items' scale.
    missing : float, default 0.0
        Probability that a participant does not see an item (e.g. a form with a subset).
    workers : int, default 1
        Processes to use (``concurrent.futures.ProcessPoolExecutor``); 1 runs in this process.
    seed : int or None, default 0
        Seed; the result does not depend on ``workers``.

    Returns
    -------
    pandas.DataFrame
        One row per quantity, ``n_humans`` and ``n_seeds``; columns :data:`PLAN_COLUMNS`:
        ``quantity`` (``"profile_correlation"`` or ``"kind_effect"``), ``n_humans``,
        ``n_seeds``, ``n_items``, ``n_sim``, ``n_undefined`` (simulations where the
        correlation was undefined because a profile was constant; left out), ``true_value``
        (the value with infinitely many participants and seeds), ``mean_estimate``,
        ``sd_estimate``, ``ci_low`` and ``ci_high`` (central ``ci`` range of the estimates),
        ``ci_width``, ``ci_level``, ``target_width``, ``meets_target``.

    Notes
    -----
    Each simulated study draws ``n_humans`` abilities from ``N(ability_mean, ability_sd^2)``,
    their 2PL responses to every item, and ``n_seeds`` machine runs with independent failures
    at ``machine_error``. Human item difficulty is the item's error rate among the participants
    (rank-equivalent to the 2PL difficulty when slopes are equal), so the profile correlation is
    the Spearman correlation of two error-rate vectors with average ranks for ties.

    Examples
    --------
    >>> import pandas as pd
    >>> items = pd.DataFrame({"a": [1.0] * 12, "b": [i / 4 - 1.5 for i in range(12)]})
    >>> curve = plan_sample_size(items, n_humans=[20, 80], n_sim=50)
    >>> sorted(curve["quantity"].unique())
    ['kind_effect', 'profile_correlation']
    """
    a, d = _item_parameters(items)
    J = a.size
    if J < 3:
        raise fail("items", f"{J} items", "at least 3 items for a rank correlation")
    sizes = _as_sizes("n_humans", n_humans)
    seeds_list = _as_sizes("n_seeds", n_seeds)
    check_number("target_width", target_width, low=0.0)
    check_number("ci", ci, low=0.5, high=0.999)
    check_int("n_sim", n_sim, low=10)
    check_number("alignment", alignment, low=-1.0, high=1.0)
    check_number("machine_theta", machine_theta)
    check_number("ability_mean", ability_mean)
    check_number("ability_sd", ability_sd, low=0.0)
    check_number("missing", missing, low=0.0, high=0.95)
    check_int("workers", workers, low=1)
    master = np.random.SeedSequence(seed)
    made_up, *_ = master.spawn(1)
    if machine_error is None:
        b = -d / a
        rng = np.random.default_rng(made_up)
        zb = (b - b.mean()) / (b.std() or 1.0)
        bm = b.mean() + b.std() * (alignment * zb + np.sqrt(1 - alignment**2) * rng.normal(size=J))
        machine_error = 1.0 - expit(a * (machine_theta - bm))
    err = np.asarray(machine_error, dtype=np.float64).ravel()
    if err.size != J or np.any((err < 0) | (err > 1)) or np.isnan(err).any():
        raise fail("machine_error", f"{err.size} values", f"{J} probabilities in [0, 1]")

    cells = [(n, s) for n in sizes for s in seeds_list]
    # fixed-size blocks, each with its own child seed: results do not depend on ``workers``
    per_task = _SIMS_PER_TASK
    tasks, owners = [], []
    cell_seeds = master.spawn(len(cells))
    for c, (n, s) in enumerate(cells):
        starts = list(range(0, n_sim, per_task))
        for child, start in zip(cell_seeds[c].spawn(len(starts)), starts, strict=True):
            k = min(per_task, n_sim - start)
            tasks.append((a, d, err, n, s, k, missing, ability_mean, ability_sd, child))
            owners.append(c)
    if workers == 1:
        results = [_simulate_block(t) for t in tasks]
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            results = list(pool.map(_simulate_block, tasks))
    true_rho, true_effect = _true_values(a, d, err, ability_mean, ability_sd)
    alpha = 1.0 - ci
    rows = []
    for c, (n, s) in enumerate(cells):
        parts = [results[t] for t in range(len(tasks)) if owners[t] == c]
        for q, (qname, truth) in enumerate(zip(QUANTITIES, (true_rho, true_effect), strict=True)):
            est = np.concatenate([p[q] for p in parts])
            ok = est[np.isfinite(est)]
            lo, hi = np.quantile(ok, [alpha / 2, 1 - alpha / 2]) if ok.size else (np.nan, np.nan)
            width = hi - lo
            rows.append(
                {
                    "quantity": qname,
                    "n_humans": n,
                    "n_seeds": s,
                    "n_items": J,
                    "n_sim": n_sim,
                    "n_undefined": int(est.size - ok.size),
                    "true_value": truth,
                    "mean_estimate": ok.mean() if ok.size else np.nan,
                    "sd_estimate": ok.std(ddof=1) if ok.size > 1 else np.nan,
                    "ci_low": lo,
                    "ci_high": hi,
                    "ci_width": width,
                    "ci_level": ci,
                    "target_width": target_width,
                    "meets_target": bool(np.isfinite(width) and width <= target_width),
                }
            )
    table = pd.DataFrame(rows, columns=list(PLAN_COLUMNS))
    return table.sort_values(["quantity", "n_seeds", "n_humans"], ignore_index=True)


def required_sample_size(curve: pd.DataFrame) -> pd.DataFrame:
    """The smallest simulated number of participants meeting the target, per quantity and seeds.

    Parameters
    ----------
    curve : pandas.DataFrame
        A table from :func:`plan_sample_size`.

    Returns
    -------
    pandas.DataFrame
        Columns ``quantity``, ``n_seeds``, ``target_width``, ``n_humans`` (nullable integer;
        NA when no simulated size reached the target) and ``ci_width`` at that size.
    """
    missing = [c for c in PLAN_COLUMNS if c not in curve.columns]
    if missing:
        raise fail(
            "curve", f"a table without {', '.join(missing)}", "a table returned by plan_sample_size"
        )
    rows = []
    for (qname, s), grp in curve.groupby(["quantity", "n_seeds"], sort=True):
        ok = grp[grp["meets_target"]].sort_values("n_humans")
        rows.append(
            {
                "quantity": qname,
                "n_seeds": s,
                "target_width": grp["target_width"].iloc[0],
                "n_humans": ok["n_humans"].iloc[0] if len(ok) else pd.NA,
                "ci_width": ok["ci_width"].iloc[0] if len(ok) else np.nan,
            }
        )
    out = pd.DataFrame(rows)
    out["n_humans"] = out["n_humans"].astype("Int64")
    return out


def plan_from_pilot(
    trials: pd.DataFrame,
    *,
    solver: str | None = None,
    model: str = "2pl",
    **options: Any,
) -> pd.DataFrame:
    """Plan from a pilot study: calibrate items on its people, take the machine's error rates.

    Parameters
    ----------
    trials : pandas.DataFrame
        Pilot trials with columns ``respondent``, ``kind``, ``item``, ``correct`` (see
        :func:`twofold.analysis.irt.response_matrix`).
    solver : str, optional
        Use only machine respondents whose id is ``solver`` or starts with ``solver + "-s"``
        (the ``<solver>-s<seed>`` convention); default: all machine respondents pooled.
    model : {"2pl", "1pl", "rasch"}, default "2pl"
        Calibration model for the pilot's human respondents.
    **options
        Passed to :func:`plan_sample_size` (``n_humans``, ``target_width``, ``workers``...).

    Returns
    -------
    pandas.DataFrame
        As :func:`plan_sample_size`, over the items calibrated in the pilot that the machine
        answered.
    """
    cal = fit_irt(trials, model=model, kind="human")
    machine = response_matrix(trials, kind="machine", duplicates="first")
    if solver is not None:
        keep = [r for r in machine.index if r == solver or str(r).startswith(f"{solver}-s")]
        if not keep:
            raise fail("solver", solver, "a machine respondent id or its solver name")
        machine = machine.loc[keep]
    if machine.shape[0] == 0:
        raise fail("trials", "no machine rows", "a pilot with at least one machine respondent")
    machine = machine.reindex(columns=cal.item_names)
    err = 1.0 - machine.mean(axis=0, skipna=True)
    answered = err.notna().to_numpy()
    if answered.sum() < 3:
        raise fail(
            "trials",
            f"{int(answered.sum())} calibrated items answered by the machine",
            "at least 3",
        )
    items = cal.items.loc[answered, ["item", "a", "b", "d"]].reset_index(drop=True)
    return plan_sample_size(items, machine_error=err.to_numpy()[answered], **options)
