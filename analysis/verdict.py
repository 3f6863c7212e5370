"""The verdict: does each machine fail where people fail? Four questions, worded by fixed rules.

:func:`build_verdict` reads the tables of the analysis parts and answers, per machine group and
family:

=================  ====================================================  =========================
question           statistic (machine)                                   human reference
=================  ====================================================  =========================
same hard items    Spearman ρ of human difficulty with machine error,    split-half ρ of people's
                   BCa bootstrap interval over items                     own profile (its band)
same errors        mean error consistency κ with each person,            mean human–human κ, t
                   t interval over people                                interval over people
same error types   G-test of the error-type distributions (p, V)         people's distribution
same fragility     isomorph cost (isomorph minus parent accuracy) minus  people's isomorph cost
                   people's cost, Wald interval                          (difference 0)
=================  ====================================================  =========================

Every answer comes from :func:`verdict_answer` (intervals) or :func:`error_type_answer`
(a test), whose docstrings hold the rules; the sentence beside it quotes the number, its
interval and the reference, so a reader can check the wording against the figures.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

__all__ = [
    "ANSWERS",
    "FRAGILITY_MARGIN",
    "QUESTIONS",
    "VERDICT_COLUMNS",
    "build_verdict",
    "error_type_answer",
    "verdict_answer",
]

#: columns of :func:`build_verdict`
VERDICT_COLUMNS = (
    "group",
    "family",
    "question",
    "answer",
    "statistic",
    "estimate",
    "ci_low",
    "ci_high",
    "reference",
    "ref_low",
    "ref_high",
    "conf_level",
    "sentence",
)
#: the questions, in the order the report shows them
QUESTIONS = ("same hard items", "same errors", "same error types", "same fragility")
#: every answer :func:`verdict_answer` and :func:`error_type_answer` can give
ANSWERS = ("yes", "partly", "no", "cannot tell", "undefined")
#: the isomorph costs of a machine and of people count as the same when their difference lies
#: within this many proportion points (an equivalence margin; 0.10 = 10 percentage points)
FRAGILITY_MARGIN = 0.10
#: fewer wrong answers than this in a group and family: too few to compare error types
MIN_ERRORS = 10


def _finite(*values: float) -> bool:
    return all(v is not None and np.isfinite(v) for v in values)


def verdict_answer(
    ci_low: float,
    ci_high: float,
    *,
    like_low: float,
    like_high: float = math.inf,
    null: float | None = None,
) -> str:
    """The answer an interval gives to "is the machine like people here?".

    Parameters
    ----------
    ci_low, ci_high : float
        The interval of the machine's statistic.
    like_low, like_high : float
        The region of values that read "like people" (for agreement and consistency: from the
        lower edge of the human reference upwards; for fragility: the equivalence band
        ``[-margin, margin]`` around people's cost).
    null : float, optional
        The value meaning "no relation at all" (0 for a correlation or κ), when there is one.

    Returns
    -------
    str
        One of :data:`ANSWERS`, by these rules, in order:

        1. ``"undefined"`` when a bound or ``like_low`` is not a finite number (too few
           items, no variation, no human reference);
        2. ``"yes"`` when the whole interval lies inside ``[like_low, like_high]``;
        3. when the whole interval lies outside that region: ``"partly"`` if ``null`` is given
           and the whole interval lies above it (more than no relation, less than people),
           else ``"no"``;
        4. ``"cannot tell"`` otherwise: the interval spans both readings.
    """
    if not _finite(ci_low, ci_high, like_low) or math.isnan(like_high):
        return "undefined"
    lo, hi = min(ci_low, ci_high), max(ci_low, ci_high)
    if lo >= like_low and hi <= like_high:
        return "yes"
    if hi < like_low or lo > like_high:
        if null is not None and lo > null and hi < like_low:
            return "partly"
        return "no"
    return "cannot tell"


def error_type_answer(p_val: float, n_errors: float, *, alpha: float = 0.05) -> str:
    """The answer of an error-type test to "does the machine make the same kinds of errors?".

    Rules, in order: ``"undefined"`` when ``p_val`` is not a number (no test could be made);
    ``"no"`` when ``p_val < alpha`` (the distributions differ); ``"cannot tell"`` otherwise,
    since a test that finds no difference does not show the distributions are the same (and with
    fewer than :data:`MIN_ERRORS` machine errors it could hardly find one).
    """
    if not _finite(p_val):
        return "undefined"
    if p_val < alpha:
        return "no"
    return "cannot tell"


def _f(v: float, nd: int = 2) -> str:
    return "n/a" if not _finite(v) else f"{v:.{nd}f}"


def _row(group: str, family: str, question: str, answer: str, **kw: Any) -> dict[str, Any]:
    row: dict[str, Any] = {c: math.nan for c in VERDICT_COLUMNS}
    row.update(group=group, family=family, question=question, answer=answer, **kw)
    return row


def _hard_items(agr: pd.DataFrame | None, rel: pd.DataFrame | None) -> list[dict[str, Any]]:
    if agr is None or agr.empty:
        return []
    sp = agr[(agr["statistic"] == "spearman") & (agr["interval"] == "bca")]
    ceiling = rel.set_index("family") if rel is not None and len(rel) else pd.DataFrame()
    rows = []
    for r in sp.itertuples(index=False):
        has = r.family in ceiling.index
        c_est = float(ceiling.loc[r.family, "split_half"]) if has else math.nan
        c_lo = float(ceiling.loc[r.family, "q_low"]) if has else math.nan
        c_hi = float(ceiling.loc[r.family, "q_high"]) if has else math.nan
        ans = verdict_answer(r.ci_low, r.ci_high, like_low=c_lo, null=0.0)
        if not _finite(r.estimate, r.ci_low, r.ci_high):
            why = f"ρ is undefined ({int(r.n_items)} items, or no variation in the error rates)"
        else:
            num = f"ρ = {_f(r.estimate)} [{_f(r.ci_low)}, {_f(r.ci_high)}]"
            ref = (
                f"people's split-half ρ {_f(c_est)} (band {_f(c_lo)} to {_f(c_hi)})"
                if has
                else "no human split-half ceiling"
            )
            why = {
                "yes": f"{num}, at people's level: {ref}",
                "partly": f"{num}: above 0 but below {ref}",
                "no": f"{num}, below {ref} and not above 0",
                "cannot tell": f"{num} spans both readings; {ref}",
                "undefined": f"{num}; {ref}",
            }[ans]
        rows.append(
            _row(
                r.group,
                r.family,
                "same hard items",
                ans,
                statistic="spearman_rho",
                estimate=r.estimate,
                ci_low=r.ci_low,
                ci_high=r.ci_high,
                reference=c_est,
                ref_low=c_lo,
                ref_high=c_hi,
                conf_level=r.conf_level,
                sentence=why,
            )
        )
    return rows


def _mean_interval(mean: float, sd: float, n: float, level: float) -> tuple[float, float]:
    if not _finite(mean, sd, n) or n < 2:
        return math.nan, math.nan
    half = stats.t.ppf(0.5 + level / 2, n - 1) * sd / math.sqrt(n)
    return mean - half, mean + half


def _same_errors(cs: pd.DataFrame | None, level: float) -> list[dict[str, Any]]:
    if cs is None or cs.empty:
        return []
    hh = cs[cs["pair_type"] == "human-human"]
    r_est = r_lo = r_hi = math.nan
    if len(hh):
        h = hh.iloc[0]
        # n people from n(n-1)/2 pairs: people, not their overlapping pairs, are the units
        n_people = (1 + math.sqrt(1 + 8 * float(h["n_defined"]))) / 2
        r_est = float(h["mean"])
        r_lo, r_hi = _mean_interval(r_est, float(h["sd"]), n_people, level)
    rows = []
    for r in cs[cs["pair_type"] == "human-machine"].itertuples(index=False):
        group = r.group_b if r.group_a == "human" else r.group_a
        lo, hi = _mean_interval(float(r.mean), float(r.sd), float(r.n_defined), level)
        ans = verdict_answer(lo, hi, like_low=r_lo, null=0.0)
        num = f"κ = {_f(r.mean)} [{_f(lo)}, {_f(hi)}] with people"
        ref = f"people with each other κ = {_f(r_est)} [{_f(r_lo)}, {_f(r_hi)}]"
        why = {
            "yes": f"{num}, at people's level ({ref})",
            "partly": f"{num}: errs with people beyond chance, less than {ref}",
            "no": f"{num}: no shared errors beyond chance ({ref})",
            "cannot tell": f"{num} spans both readings ({ref})",
            "undefined": f"{num}; too few shared trials or no human reference ({ref})",
        }[ans]
        rows.append(
            _row(
                group,
                "all",
                "same errors",
                ans,
                statistic="kappa_mean",
                estimate=r.mean,
                ci_low=lo,
                ci_high=hi,
                reference=r_est,
                ref_low=r_lo,
                ref_high=r_hi,
                conf_level=level,
                sentence=why,
            )
        )
    return rows


def _error_types(ett: pd.DataFrame | None, alpha: float) -> list[dict[str, Any]]:
    if ett is None or ett.empty:
        return []
    rows = []
    for r in ett.itertuples(index=False):
        ans = error_type_answer(r.p_val, r.n_group, alpha=alpha)
        num = f"p = {_f(r.p_val, 3)}, Cramér's V = {_f(r.cramers_v)} ({int(r.n_group)} errors)"
        few = f"; only {int(r.n_group)} machine errors" if r.n_group < MIN_ERRORS else ""
        why = {
            "no": f"error-type distribution differs from people's: {num}",
            "cannot tell": f"no difference detected, which does not show sameness: {num}{few}",
            "undefined": "no test possible (no errors to compare)",
        }[ans]
        rows.append(
            _row(
                r.group,
                r.family,
                "same error types",
                ans,
                statistic="cramers_v",
                estimate=r.cramers_v,
                conf_level=1 - alpha,
                sentence=why,
            )
        )
    return rows


def _fragility(rb: pd.DataFrame | None, margin: float) -> list[dict[str, Any]]:
    if rb is None or rb.empty:
        return []
    hum = rb[rb["group"] == "human"].set_index("family")
    rows = []
    for r in rb[rb["kind"] == "machine"].itertuples(index=False):
        level = float(r.conf_level)
        z = stats.norm.ppf(0.5 + level / 2)
        if r.family in hum.index:
            h = hum.loc[r.family]
            d = float(r.difference) - float(h["difference"])
            se = math.sqrt(float(r.se) ** 2 + float(h["se"]) ** 2)
            h_cost = float(h["difference"])
        else:
            d = se = h_cost = math.nan
        lo, hi = d - z * se, d + z * se
        ans = verdict_answer(lo, hi, like_low=-margin, like_high=margin)
        num = (
            f"isomorph cost {_f(r.difference)} vs people's {_f(h_cost)}: "
            f"difference {_f(d)} [{_f(lo)}, {_f(hi)}]"
        )
        band = f"±{margin:.2f} counts as the same"
        why = {
            "yes": f"{num}, within {band}",
            "no": f"{num}: {'more' if d < 0 else 'less'} fragile than people ({band})",
            "cannot tell": f"{num} spans both readings ({band})",
            "undefined": f"{num}; no human isomorph cost to compare",
        }[ans]
        rows.append(
            _row(
                r.group,
                r.family,
                "same fragility",
                ans,
                statistic="cost_difference",
                estimate=d,
                ci_low=lo,
                ci_high=hi,
                reference=0.0,
                ref_low=-margin,
                ref_high=margin,
                conf_level=level,
                sentence=why,
            )
        )
    return rows


def build_verdict(
    tables: Mapping[str, pd.DataFrame | None],
    *,
    conf_level: float = 0.95,
    margin: float = FRAGILITY_MARGIN,
) -> pd.DataFrame:
    """Answer the four questions for every machine group and family the tables cover.

    Parameters
    ----------
    tables : mapping of str -> DataFrame
        The analysis tables by name; reads ``difficulty_agreement`` and
        ``difficulty_reliability`` (same hard items), ``consistency_summary`` (same errors),
        ``error_type_tests`` (same error types), ``robustness`` (same fragility). Missing
        tables leave their question out.
    conf_level : float, default 0.95
        Level of the consistency intervals (the other intervals carry their own level); the
        error-type test uses ``alpha = 1 - conf_level``.
    margin : float, default :data:`FRAGILITY_MARGIN`
        Equivalence margin for the fragility question.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`VERDICT_COLUMNS`, one row per group × family × question, ordered by
        group, question (:data:`QUESTIONS`) and family (``all`` first).
    """
    rows = (
        _hard_items(tables.get("difficulty_agreement"), tables.get("difficulty_reliability"))
        + _same_errors(tables.get("consistency_summary"), conf_level)
        + _error_types(tables.get("error_type_tests"), 1 - conf_level)
        + _fragility(tables.get("robustness"), margin)
    )
    if not rows:
        return pd.DataFrame(columns=list(VERDICT_COLUMNS))
    df = pd.DataFrame(rows)[list(VERDICT_COLUMNS)]
    df["_q"] = df["question"].map(QUESTIONS.index)
    df["_f"] = df["family"] != "all"
    df = df.sort_values(["group", "_q", "_f", "family"], kind="stable")
    return df.drop(columns=["_q", "_f"]).reset_index(drop=True)
