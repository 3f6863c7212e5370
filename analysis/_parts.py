"""The analysis parts, each declared once: what it computes, its tables, notes, figure, section.

A :class:`Part` names the tables it writes, the ``[analysis]`` options it reads, the function
that computes its tables, the function that turns those tables into notes (doubts a reader must
see beside the table), the figure drawn from its tables unchanged, the report section, and the
methods sentence and references for what was actually run.
:func:`twofold.analysis.run.analyze_study` and :func:`twofold.analysis.report.build_report` loop
over :data:`PARTS`; adding a part means adding one declaration here (see CONTRIBUTING.md,
"A new analysis part").
"""

from __future__ import annotations

import dataclasses
import math
import os
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from twofold.study.exceptions import InputError
from twofold.study.registry import Registry

from . import compare, mixed, participants
from . import figures as F
from .data import StudyData

__all__ = ["NOTE_COLUMNS", "PARTS", "REFERENCES", "Part", "PartContext", "ReportContext", "Skip"]

#: columns of ``notes.csv``: one doubt per row, with the table it concerns; ``severity`` is
#: ``skipped`` (the part did not run), ``caution`` (a check on the table found a problem),
#: ``note`` (worth knowing) or ``warning`` (a warning raised while computing)
NOTE_COLUMNS = ("part", "table", "severity", "subject", "message")


class Skip(Exception):  # noqa: N818 - control flow: the part cannot run on this data
    """Raised by a part's ``run`` when the data cannot support it; the message says why."""


@dataclasses.dataclass
class PartContext:
    """What a part's ``run`` sees: the data, the options and the tables made so far."""

    data: StudyData
    opts: dict[str, Any]
    study: Any
    out: Path
    made: dict[str, pd.DataFrame]


Tables = Mapping[str, pd.DataFrame]


@dataclasses.dataclass(frozen=True)
class Part:
    """One analysis part (see the module docstring).

    Attributes
    ----------
    name : str
        The part's name (``--only``, ``[analysis] parts``).
    title : str
        Its report section's title.
    tables : tuple of str
        The tables it writes (``<name>.csv`` in the results folder).
    run : callable
        ``run(ctx: PartContext) -> dict[str, DataFrame]``; raises :class:`Skip` with a reason.
    options : tuple of str
        The ``[analysis]`` options it reads.
    notes : callable, optional
        ``notes(tables) -> list of dict`` with keys ``table``, ``severity``, ``subject``,
        ``message``: doubts found in the tables (undefined values, separation, ...).
    figure : callable, optional
        ``figure(tables) -> Figure or None``: the part's figure from its tables unchanged.
    section : callable, optional
        ``section(rc: ReportContext) -> dict or None``: the report section (reading text,
        tables to show); the figure and notes are added by the report.
    methods : callable, optional
        ``methods(summary_entry, options) -> str``: what was run, for the methods list.
    references : tuple of str
        Keys of :data:`REFERENCES` for the methods this part uses.
    """

    name: str
    title: str
    tables: tuple[str, ...]
    run: Callable[[PartContext], dict[str, Any]]
    options: tuple[str, ...] = ()
    notes: Callable[[Tables], list[dict[str, Any]]] | None = None
    figure: Callable[[Tables], Figure | None] | None = None
    section: Callable[[ReportContext], dict[str, Any] | None] | None = None
    methods: Callable[[Mapping[str, Any], Mapping[str, Any]], str] | None = None
    references: tuple[str, ...] = ()


#: Published methods, cited by key from the parts; the report lists those of the parts it ran.
REFERENCES: dict[str, str] = {
    "rasch1960": "Rasch, G. (1960). Probabilistic models for some intelligence and attainment "
    "tests. Copenhagen: Danish Institute for Educational Research.",
    "birnbaum1968": "Birnbaum, A. (1968). Some latent trait models and their use in inferring an "
    "examinee's ability. In F. M. Lord & M. R. Novick, Statistical theories of mental test "
    "scores. Reading, MA: Addison-Wesley.",
    "bock1981": "Bock, R. D., & Aitkin, M. (1981). Marginal maximum likelihood estimation of item "
    "parameters: application of an EM algorithm. Psychometrika, 46, 443–459.",
    "bock1982": "Bock, R. D., & Mislevy, R. J. (1982). Adaptive EAP estimation of ability in a "
    "microcomputer environment. Applied Psychological Measurement, 6, 431–444.",
    "wright1982": "Wright, B. D., & Masters, G. N. (1982). Rating scale analysis. Chicago: "
    "MESA Press.",
    "drasgow1985": "Drasgow, F., Levine, M. V., & Williams, E. A. (1985). Appropriateness "
    "measurement with polychotomous item response models and standardized indices. British "
    "Journal of Mathematical and Statistical Psychology, 38, 67–86.",
    "baayen2008": "Baayen, R. H., Davidson, D. J., & Bates, D. M. (2008). Mixed-effects modeling "
    "with crossed random effects for subjects and items. Journal of Memory and Language, 59, "
    "390–412.",
    "bates2015": "Bates, D., Mächler, M., Bolker, B., & Walker, S. (2015). Fitting linear "
    "mixed-effects models using lme4. Journal of Statistical Software, 67(1), 1–48.",
    "konis2007": "Konis, K. (2007). Linear programming algorithms for detecting separated data "
    "in binary logistic regression models. DPhil thesis, University of Oxford.",
    "efron1987": "Efron, B. (1987). Better bootstrap confidence intervals. Journal of the "
    "American Statistical Association, 82, 171–185.",
    "spearman1910": "Spearman, C. (1910). Correlation calculated from faulty data. British "
    "Journal of Psychology, 3, 271–295.",
    "geirhos2020": "Geirhos, R., Meding, K., & Wichmann, F. A. (2020). Beyond accuracy: "
    "quantifying trial-by-trial behaviour of CNNs and humans by measuring error consistency. "
    "Advances in Neural Information Processing Systems, 33.",
    "cohen1960": "Cohen, J. (1960). A coefficient of agreement for nominal scales. Educational "
    "and Psychological Measurement, 20, 37–46.",
    "sokal1995": "Sokal, R. R., & Rohlf, F. J. (1995). Biometry (3rd ed.). New York: Freeman.",
    "woolf1955": "Woolf, B. (1955). On estimating the relation between blood group and disease. "
    "Annals of Human Genetics, 19, 251–253.",
    "cronbach1951": "Cronbach, L. J. (1951). Coefficient alpha and the internal structure of "
    "tests. Psychometrika, 16, 297–334.",
    "feldt1987": "Feldt, L. S., Woodruff, D. J., & Salih, F. A. (1987). Statistical inference "
    "for coefficient alpha. Applied Psychological Measurement, 11, 93–103.",
    "ly2016": "Ly, A., Verhagen, J., & Wagenmakers, E.-J. (2016). Harold Jeffreys's default "
    "Bayes factor hypothesis tests. Journal of Mathematical Psychology, 72, 19–32.",
    "bakeman2005": "Bakeman, R. (2005). Recommended effect size statistics for repeated "
    "measures designs. Behavior Research Methods, 37, 379–384.",
    "holm1979": "Holm, S. (1979). A simple sequentially rejective multiple test procedure. "
    "Scandinavian Journal of Statistics, 6, 65–70.",
    "vallat2018": "Vallat, R. (2018). Pingouin: statistics in Python. Journal of Open Source "
    "Software, 3(31), 1026.",
}


# -- shared helpers ---------------------------------------------------------------------------


def _note(table: str, message: str, *, subject: str = "", severity: str = "caution") -> dict:
    return {"table": table, "severity": severity, "subject": subject, "message": message}


def _has(t: pd.DataFrame, kind: str) -> bool:
    return bool((t["kind"] == kind).any())


def _note_column(tables: Tables, name: str, subject_cols: tuple[str, ...]) -> list[dict]:
    """Rows of ``name`` whose ``note`` column is set, one note per distinct message."""
    df = tables.get(name)
    if df is None or "note" not in df or df.empty:
        return []
    out = []
    rows = df[df["note"].fillna("").astype(str) != ""]
    for msg, sub in rows.groupby(rows["note"].astype(str), sort=False):
        subj = ", ".join(
            dict.fromkeys(
                " ".join(str(getattr(r, c)) for c in subject_cols if c in sub)
                for r in sub.itertuples(index=False)
            )
        )
        out.append(_note(name, f"{msg} ({len(sub)} row(s))", subject=subj[:200], severity="note"))
    return out


# -- data ---------------------------------------------------------------------------------------


def _run_data(ctx: PartContext) -> dict[str, Any]:
    d = ctx.data
    return {"trials": d.trials, "sessions": d.sessions, "issues": d.issues}


def _notes_data(tables: Tables) -> list[dict]:
    issues = tables.get("issues")
    if issues is None or issues.empty:
        return []
    notes = [_note("issues", f"{len(issues)} problem(s) found while reading the logs")]
    failed = issues[issues["issue"] == "failed_trials"]
    if len(failed):
        notes.append(
            _note(
                "sessions",
                f"{len(failed)} session(s) hold trials the solver or adapter did not answer "
                f"({int(failed['n'].sum())} failed or timed out); they count as unanswered, "
                "not as errors. Run the same machine command again to retry them.",
                subject=", ".join(map(str, failed["session"])),
                severity="warning",
            )
        )
    return notes


def _section_data(rc: ReportContext) -> dict[str, Any] | None:
    """Shown only when reading the logs found problems (failed trials, duplicates, gaps)."""
    issues = rc.read("issues")
    if issues is None or issues.empty:
        return None
    counts = issues.groupby("issue")["n"].sum()
    words = ", ".join(f"{int(v)} {k.replace('_', ' ')}" for k, v in counts.items())
    return {
        "reading": f"Reading the session logs found: {words}. Each session is listed below.",
        "tables": [
            rc.table(
                "issues",
                issues,
                ["session", "issue", "n", "detail", "source"],
                caption="Problems per session log; failed trials are retried by a rerun.",
            )
        ],
    }


# -- irt ----------------------------------------------------------------------------------------


def _run_irt(ctx: PartContext) -> dict[str, Any]:
    from .run import _irt  # the IRT fit itself lives with the orchestration

    tables, res = _irt(ctx.data, ctx.opts)
    cal = res.calibration
    tables["irt_fit"] = pd.DataFrame(
        [
            {
                "model": cal.model,
                "converged": bool(cal.converged),
                "n_iter": int(cal.n_iter),
                "loglik": float(cal.loglik),
                "n_persons": int(cal.n_persons),
                "n_items": int(cal.n_items),
                "quadrature": cal.quadrature,
                "quadrature_points": int(cal.quadrature_points),
                "max_gradient": float(cal.max_gradient),
            }
        ]
    )
    return tables


def _notes_irt(tables: Tables) -> list[dict]:
    out = []
    fit = tables.get("irt_fit")
    if fit is not None and len(fit) and not bool(fit["converged"].iloc[0]):
        out.append(
            _note(
                "irt_items",
                f"the {fit['model'].iloc[0]} fit did not converge in {int(fit['n_iter'].iloc[0])} "
                "cycles: item parameters and abilities are not reliable; curves are not drawn",
            )
        )
    items = tables.get("irt_items")
    if items is not None and len(items):
        bad = items[~F.usable_items(items)]
        if len(bad):
            out.append(
                _note(
                    "irt_items",
                    f"{len(bad)} item(s) with slope above {F.UNIDENTIFIED:g}, difficulty SE above "
                    f"{F.UNIDENTIFIED:g} or |b| above {F.DIFFICULTY_CLIP:g}: not identified by "
                    "these data (nearly everyone right or wrong); not drawn",
                    subject=", ".join(bad["item"].astype(str).head(8)),
                )
            )
    return out


def _figure_irt(t: Tables) -> Figure | None:
    if "irt_items" not in t:
        return None
    fig = F.item_curves(
        t["irt_items"], t.get("irt_abilities"), t.get("irt_departures"), t.get("irt_fit")
    )
    return fig if isinstance(fig, Figure) else None


def _section_irt(rc: ReportContext) -> dict[str, Any] | None:
    items, ab = rc.read("irt_items"), rc.read("irt_abilities")
    if items is None or ab is None:
        return None
    mach = ab[(ab["kind"] == "machine") & (ab["pooled"].astype(bool))]
    fit = rc.read("irt_fit")
    model = str(fit["model"].iloc[0]).upper() if fit is not None else "IRT"
    lines = [
        f"{r.respondent}: θ = {rc.fmt(r.theta)} (SE {rc.fmt(r.se)}), lz = {rc.fmt(r.lz)}"
        for r in mach.itertuples()
    ]
    return {
        "reading": f"Each machine is placed on the {model} ability scale calibrated on people. A "
        "strongly negative person-fit lz means its pattern is unlike a person of that ability: it "
        "fails items people find easy and solves items people find hard. " + "; ".join(lines) + ".",
        "tables": [
            rc.table(
                "irt_abilities",
                mach,
                ["respondent", "theta", "se", "n_items", "n_correct", "lz"],
                caption="Machines on the human scale (EAP ability, person fit lz).",
            ),
            rc.table(
                "irt_items",
                items,
                ["item", "a", "b", "a_se", "b_se", "p_correct", "infit", "outfit"],
                caption=f"{model} item parameters from the human calibration.",
                max_rows=12,
            ),
        ],
    }


def _methods_irt(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    fit = entry.get("fit") or {}
    model = str(fit.get("model", opts.get("irt_model", "?"))).upper()
    return (
        f"Item-response model: {model} (irt_model = {opts.get('irt_model')}) fitted by marginal "
        f"maximum likelihood with the EM algorithm of Bock & Aitkin on "
        f"{fit.get('quadrature_points', '?')}-point {fit.get('quadrature', '?')} quadrature "
        f"({'converged' if fit.get('converged') else 'did not converge'} after "
        f"{fit.get('n_iter', '?')} cycles; {fit.get('n_persons', '?')} people × "
        f"{fit.get('n_items', '?')} items); abilities by EAP; item fit by infit/outfit, person fit "
        "by lz; machines scored on the scale calibrated on people only."
    )


# -- mixed --------------------------------------------------------------------------------------


def _run_mixed(ctx: PartContext) -> dict[str, Any]:
    from .run import _mixed  # the model choices live with the orchestration (run.py)

    return _mixed(ctx.data, ctx.opts)


def _notes_mixed(tables: Tables) -> list[dict]:
    out: list[dict] = []
    for name in tables:
        out += _note_column(tables, name, ("term", "group"))
    return out


def _section_mixed(rc: ReportContext) -> dict[str, Any] | None:
    acc = rc.read("accuracy_fixed")
    if acc is None:
        return None
    refs = rc.reference_levels(acc["term"])
    ref_text = "; ".join(f"{k}: {v}" for k, v in refs.items()) or "none (no factor terms)"
    blocks = [
        rc.table(
            "accuracy_fixed",
            acc,
            caption="Fixed effects on the log-odds of a correct answer; "
            f"reference levels: {ref_text}.",
        )
    ]
    for name, what in (("accuracy_random", "Random effects of the accuracy model."),):
        df = rc.read(name)
        if df is not None:
            blocks.append(rc.table(name, df, caption=what))
    return {
        "reading": "Logistic mixed model of accuracy with crossed random effects for respondents "
        "and items (fixed effects on the log-odds scale; each term compares with the reference "
        f"level named in the caption: {ref_text}).",
        "tables": blocks,
    }


def _methods_mixed(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    return (
        "Mixed-effects models with crossed random intercepts for respondents and items: logistic "
        "models of accuracy by Laplace maximum likelihood (penalised iteratively reweighted least "
        "squares), Wald intervals at the "
        f"{opts.get('conf_level', 0.95):.0%} level, separation detected by a linear programme and "
        "noted beside the affected rows; linear models of log response time and log effort by "
        "REML."
    )


# -- factors ------------------------------------------------------------------------------------


def _run_factors(ctx: PartContext) -> dict[str, Any]:
    if not _has(ctx.data.trials, "human"):
        raise Skip("no human respondents (effects are relative to people)")
    return {
        "factor_effects": mixed.factor_effects(ctx.data.trials, conf_level=ctx.opts["conf_level"])
    }


def _notes_factors(tables: Tables) -> list[dict]:
    return _note_column(tables, "factor_effects", ("family", "group", "factor"))


def _figure_factors(t: Tables) -> Figure | None:
    return F.factor_effects(t["factor_effects"]) if "factor_effects" in t else None


def _section_factors(rc: ReportContext) -> dict[str, Any] | None:
    fe = rc.read("factor_effects")
    if fe is None:
        return None
    diff = fe[
        (fe["quantity"] == "difference") & (fe["p_val"] < 0.05) & (fe["note"].fillna("") == "")
    ]
    return {
        "reading": "How much each generator factor raises the log-odds of an error, for people "
        f"and for each machine. {len(diff)} factor effects differ between a machine and people "
        "(p < .05, rows without a separation note).",
        "tables": [
            rc.table(
                "factor_effects",
                fe,
                [
                    "family",
                    "term",
                    "group",
                    "quantity",
                    "estimate",
                    "ci_low",
                    "ci_high",
                    "p_val",
                    "note",
                ],
                caption="Factor effects and "
                "machine-minus-people differences (log-odds of an error).",
            )
        ],
    }


# -- agreement ----------------------------------------------------------------------------------


def _run_agreement(ctx: PartContext) -> dict[str, Any]:
    t, o = ctx.data.trials, ctx.opts
    if not (_has(t, "human") and _has(t, "machine")):
        raise Skip("needs both human and machine respondents")
    irt_items = ctx.made.get("irt_items")
    irt_b = irt_items[["item", "b"]] if irt_items is not None else None
    return {
        "item_difficulty": compare.item_difficulty(t, irt=irt_b),
        "machine_error_rates": compare.machine_error_rates(t),
        "difficulty_agreement": compare.difficulty_agreement(
            t, irt=irt_b, n_boot=o["n_boot"], conf_level=o["conf_level"], seed=o["seed"]
        ),
        "difficulty_reliability": compare.difficulty_reliability(
            t, conf_level=o["conf_level"], seed=o["seed"]
        ),
    }


def _notes_agreement(tables: Tables) -> list[dict]:
    agr = tables.get("difficulty_agreement")
    out = []
    if agr is not None and len(agr):
        sp = agr[(agr["statistic"] == "spearman") & (agr["interval"] == "bca")]
        bad = sp[sp["estimate"].isna() | sp["ci_low"].isna()]
        if len(bad):
            out.append(
                _note(
                    "difficulty_agreement",
                    f"{len(bad)} correlation(s) undefined: the machine's error rate (or people's "
                    "difficulty) does not vary over the family's items, so no rank correlation "
                    "exists; shown as 'undefined', not as a number",
                    subject=", ".join(f"{r.group}/{r.family}" for r in bad.itertuples()),
                )
            )
    er = tables.get("machine_error_rates")
    if er is not None and len(er):
        tot = er.groupby(["group", "family"])["n_errors"].sum()
        none = tot[tot == 0]
        if len(none):
            out.append(
                _note(
                    "machine_error_rates",
                    f"{len(none)} machine group(s) made no errors in a family: nothing to compare "
                    "there (error types, consistency and profiles are undefined for them)",
                    subject=", ".join(f"{g}/{f}" for g, f in none.index),
                )
            )
    return out


def _figure_agreement(t: Tables) -> Figure | None:
    if "item_difficulty" not in t or "machine_error_rates" not in t:
        return None
    return F.difficulty_profiles(
        t["item_difficulty"], t["machine_error_rates"], t.get("difficulty_agreement")
    )


def _section_agreement(rc: ReportContext) -> dict[str, Any] | None:
    agr, rel = rc.read("difficulty_agreement"), rc.read("difficulty_reliability")
    if agr is None:
        return None
    sp = agr[(agr["statistic"] == "spearman") & (agr["interval"] == "bca")]
    bf = rc.read("profile_bayes_factors")
    shown = sp.copy()
    if bf is not None:
        shown = shown.merge(
            bf[bf["statistic"] == "spearman"][["group", "family", "bf10", "evidence"]],
            on=["group", "family"],
            how="left",
        )
    lines = [
        f"{r.group}: ρ = {rc.fmt(r.estimate)} [{rc.fmt(r.ci_low)}, {rc.fmt(r.ci_high)}] over "
        f"{r.n_items} items"
        for r in sp[sp["family"] == "all"].itertuples()
    ]
    reading = (
        "Do machines find the same items hard as people? A rank correlation near 1 means the "
        "machine's hardest items are people's hardest; near 0, unrelated. " + "; ".join(lines) + "."
    )
    blocks = [
        rc.table(
            "difficulty_agreement",
            shown,
            [
                c
                for c in (
                    "group",
                    "family",
                    "estimate",
                    "ci_low",
                    "ci_high",
                    "p_val",
                    "n_items",
                    "bf10",
                    "evidence",
                )
                if c in shown
            ],
            caption="Spearman ρ of human difficulty with machine error rate, BCa bootstrap "
            "interval over items"
            + (
                ", Bayes factor BF10 (Jeffreys's test, uniform prior on the correlation) in words"
                if bf is not None
                else ""
            )
            + ".",
        )
    ]
    if rel is not None:
        r_all = rel[rel["family"] == "all"]
        if len(r_all) and pd.notna(r_all["spearman_brown"].iloc[0]):
            reading += (
                f" The ceiling: people's own profile is reproduced between random halves with ρ = "
                f"{r_all['split_half'].iloc[0]:.2f} (Spearman–Brown "
                f"{r_all['spearman_brown'].iloc[0]:.2f} for the full sample)."
            )
        shown_rel = rel.copy()
        alpha = rc.read("internal_consistency")
        if alpha is not None:
            shown_rel = shown_rel.merge(
                alpha[["family", "alpha", "ci_low", "ci_high"]].rename(
                    columns={"ci_low": "alpha_low", "ci_high": "alpha_high"}
                ),
                on="family",
                how="left",
            )
        blocks.append(
            rc.table(
                "difficulty_reliability",
                shown_rel,
                [
                    c
                    for c in (
                        "family",
                        "n_items",
                        "n_respondents",
                        "split_half",
                        "q_low",
                        "q_high",
                        "spearman_brown",
                        "alpha",
                        "alpha_low",
                        "alpha_high",
                    )
                    if c in shown_rel
                ],
                caption="The human ceiling: split-half ρ of people's difficulty profile "
                "(central band over random splits), Spearman–Brown for the full sample"
                + (
                    "; beside it Cronbach's α of the item set with Feldt's interval (a "
                    "different quantity: consistency of people's scores over items)"
                    if alpha is not None
                    else ""
                )
                + ".",
            )
        )
    # the by-item spread of the machine-minus-people gap (mixed part), beside the rank correlations
    gap = rc.read("item_gap_variation")
    if gap is not None and len(gap):
        words = [
            f"{r.term.split('[T.')[-1].rstrip(']')} − people: SD {rc.fmt(r.sd)} "
            f"[{rc.fmt(r.sd_ci_low)}, {rc.fmt(r.sd_ci_high)}] log-odds over {r.n_items} items "
            f"(average gap {rc.fmt(r.gap)}; test of no spread p = {rc.fmt(r.p_val, 3)})"
            + (f", {r.note}" if isinstance(r.note, str) and r.note else "")
            for r in gap.itertuples()
        ]
        reading += (
            " The same question in the mixed model: each item gets its own machine-minus-"
            "people difference in the log-odds of a correct answer (a by-item random slope "
            "of respondent kind), and its SD says how much that difference varies from "
            "item to item. Near 0, machines are behind or ahead by the same amount on "
            "every item, so they find the same items hard as people; a large SD means the "
            "gap depends on the item. " + "; ".join(words) + "."
        )
        blocks.append(
            rc.table(
                "item_gap_variation",
                gap,
                [
                    "term",
                    "gap",
                    "sd",
                    "sd_ci_low",
                    "sd_ci_high",
                    "corr_item",
                    "p_val",
                    "n_items",
                    "note",
                ],
                caption="By-item SD of the machine-minus-people gap (log-odds), profile "
                "interval, and the boundary test of no spread.",
            )
        )
    return {"reading": reading, "tables": blocks}


def _methods_agreement(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    return (
        "Difficulty-profile agreement: Spearman and Kendall rank correlations between human item "
        "difficulty (IRT b when the fit succeeded, else the logit error rate) and machine error "
        f"rates, percentile and BCa bootstrap intervals over items (n_boot = {opts.get('n_boot')}, "
        f"seed = {opts.get('seed')}); the human ceiling from random split halves of the people, "
        "stepped up with the Spearman–Brown formula."
    )


# -- participants -------------------------------------------------------------------------------


def _run_participants(ctx: PartContext) -> dict[str, Any]:
    t, lvl = ctx.data.trials, ctx.opts["conf_level"]
    if not _has(t, "human"):
        raise Skip("no human respondents")
    acc = participants.family_accuracy(t, conf_level=lvl)
    out = {
        "internal_consistency": participants.internal_consistency(t, conf_level=lvl),
        "family_accuracy": acc["means"],
        "family_accuracy_tests": acc["tests"],
    }
    agr = ctx.made.get("difficulty_agreement")
    if agr is not None and len(agr):
        out["profile_bayes_factors"] = participants.profile_bayes_factors(agr)
    return out


def _notes_participants(tables: Tables) -> list[dict]:
    out = []
    ic = tables.get("internal_consistency")
    if ic is not None and len(ic) and ic["alpha"].isna().any():
        bad = ic[ic["alpha"].isna()]
        out.append(
            _note(
                "internal_consistency",
                "Cronbach's α undefined (too few items or people, or constant totals)",
                subject=", ".join(bad["family"].astype(str)),
            )
        )
    tests = tables.get("family_accuracy_tests")
    if tests is not None and tests.empty:
        out.append(
            _note(
                "family_accuracy_tests",
                "no tests: fewer than two families or three people who took every family",
            )
        )
    return out


def _section_participants(rc: ReportContext) -> dict[str, Any] | None:
    means, tests = rc.read("family_accuracy"), rc.read("family_accuracy_tests")
    ic = rc.read("internal_consistency")
    if means is None and ic is None:
        return None
    blocks = []
    if means is not None:
        blocks.append(
            rc.table(
                "family_accuracy",
                means,
                caption="People's proportion correct "
                "by family: mean over participants with a t interval.",
            )
        )
    if tests is not None:
        blocks.append(
            rc.table(
                "family_accuracy_tests",
                tests,
                caption="Repeated-measures ANOVA "
                "over families (generalised η², Greenhouse–Geisser ε) and paired "
                "t-tests with Holm-adjusted p and Hedges' g.",
            )
        )
    if ic is not None:
        blocks.append(
            rc.table(
                "internal_consistency",
                ic,
                caption="Cronbach's α of the human item set with Feldt's interval.",
            )
        )
    reading = "The participant-level view beside the models: how people did in each family."
    if ic is not None and (ic["family"] == "all").any():
        a = ic[ic["family"] == "all"].iloc[0]
        reading += (
            f" Cronbach's α over all items is {rc.fmt(a['alpha'])} "
            f"[{rc.fmt(a['ci_low'])}, {rc.fmt(a['ci_high'])}]."
        )
    return {"reading": reading, "tables": blocks}


def _methods_participants(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    return (
        "Participant level (pingouin): Cronbach's α with Feldt's interval; a Bayes factor for "
        "each difficulty-profile correlation (Jeffreys's test, Ly et al.); people's accuracy by "
        "family with a repeated-measures ANOVA (generalised η²) and Holm-adjusted paired t-tests "
        "with Hedges' g."
    )


# -- consistency --------------------------------------------------------------------------------


def _run_consistency(ctx: PartContext) -> dict[str, Any]:
    o = ctx.opts
    pairs, summ = compare.consistency_tables(
        ctx.data.trials,
        min_items=o["min_items"],
        human_pairs=o["human_pairs"],
        conf_level=o["conf_level"],
    )
    return {"consistency_pairs": pairs, "consistency_summary": summ}


def _notes_consistency(tables: Tables) -> list[dict]:
    cs = tables.get("consistency_summary")
    if cs is None or cs.empty:
        return []
    bad = cs[cs["mean"].isna()]
    if bad.empty:
        return []
    return [
        _note(
            "consistency_summary",
            f"{len(bad)} group pair(s) with no defined κ (a "
            "respondent with all answers right or all wrong gives no agreement beyond "
            "chance to measure)",
            subject=", ".join(f"{r.group_a}~{r.group_b}" for r in bad.itertuples()),
        )
    ]


def _figure_consistency(t: Tables) -> Figure | None:
    if "consistency_pairs" not in t:
        return None
    return F.error_consistency(t["consistency_pairs"], summary=t.get("consistency_summary"))


def _section_consistency(rc: ReportContext) -> dict[str, Any] | None:
    cs = rc.read("consistency_summary")
    if cs is None:
        return None
    reading = (
        "Error consistency asks whether two respondents err on the same trials beyond what "
        "their accuracies predict (0 = independent, 1 = identical errors)."
    )
    hh = cs[cs["pair_type"] == "human-human"]
    if len(hh) and pd.notna(hh["median"].iloc[0]):
        reading += (
            f" Between people the median is {hh['median'].iloc[0]:.2f} over "
            f"{int(hh['n_pairs'].iloc[0])} pairs (the ceiling)."
        )
    return {
        "reading": reading,
        "tables": [
            rc.table(
                "consistency_summary",
                cs,
                caption="κ by group pair: mean, SD, median and central band over pairs.",
            )
        ],
    }


def _methods_consistency(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    return (
        "Error consistency: Cohen's κ on trial-level correct/incorrect agreement with the expected "
        f"agreement from the two accuracies (Geirhos et al.), pairs sharing at least "
        f"{opts.get('min_items')} items; human–human pairs {opts.get('human_pairs')}; the "
        "human–human distribution is the ceiling."
    )


# -- errors -------------------------------------------------------------------------------------


def _run_errors(ctx: PartContext) -> dict[str, Any]:
    t, o = ctx.data.trials, ctx.opts
    return {
        "error_types": compare.error_types(t),
        "error_type_tests": compare.error_type_tests(t, seed=o["seed"]),
        "error_type_odds": compare.error_type_odds(t, conf_level=o["conf_level"]),
    }


def _notes_errors(tables: Tables) -> list[dict]:
    et = tables.get("error_types")
    out = []
    if et is not None and len(et):
        per = et.drop_duplicates(["family", "group"])
        none = per[per["n_errors"] == 0]
        if len(none):
            out.append(
                _note(
                    "error_types",
                    f"{len(none)} group(s) made no errors in a family: no error-type profile there",
                    subject=", ".join(f"{r.group}/{r.family}" for r in none.itertuples()),
                )
            )
    ett = tables.get("error_type_tests")
    if ett is not None and len(ett):
        few = ett[ett["n_group"] < 10]
        if len(few):
            out.append(
                _note(
                    "error_type_tests",
                    f"{len(few)} test(s) rest on fewer than 10 machine "
                    "errors: a difference would hardly be detected",
                    subject=", ".join(f"{r.group}/{r.family}" for r in few.itertuples()),
                    severity="note",
                )
            )
    return out


def _figure_errors(t: Tables) -> Figure | None:
    return (
        F.error_type_composition(t["error_types"])
        if "error_types" in t and len(t["error_types"])
        else None
    )


def _section_errors(rc: ReportContext) -> dict[str, Any] | None:
    et, ett = rc.read("error_types"), rc.read("error_type_tests")
    if et is None:
        return None
    reading = "Which kinds of wrong answers does each respondent group give?"
    blocks = []
    if ett is not None:
        sig = ett[ett["p_val"] < 0.05]
        reading += (
            f" In {len(sig)} of {len(ett)} family × machine comparisons the error-type "
            "distribution differs from people's (p < .05)."
        )
        blocks.append(
            rc.table(
                "error_type_tests",
                ett,
                caption="G-tests (permutation version "
                "for small counts) of each machine's error types against people's.",
            )
        )
    return {"reading": reading, "tables": blocks}


def _methods_errors(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    return (
        "Error types: G-test of independence with a permutation version for small counts "
        f"(seed = {opts.get('seed')}), Cramér's V, and per-type log odds ratios with Woolf "
        "intervals."
    )


# -- robustness ---------------------------------------------------------------------------------


def _run_robustness(ctx: PartContext) -> dict[str, Any]:
    t, lvl = ctx.data.trials, ctx.opts["conf_level"]
    if not t["isomorph"].astype(bool).any():
        raise Skip("no isomorphs answered")
    res = compare.robustness_test(t, conf_level=lvl)
    return {
        "robustness": compare.robustness(t, conf_level=lvl),
        "robustness_test_fixed": res.fixed,
        "robustness_test_random": res.random_effects,
    }


def _notes_robustness(tables: Tables) -> list[dict]:
    return _note_column(tables, "robustness_test_fixed", ("term",))


def _figure_robustness(t: Tables) -> Figure | None:
    if "robustness" not in t:
        return None
    fig = F.robustness(t["robustness"])
    return fig if isinstance(fig, Figure) else None


def _section_robustness(rc: ReportContext) -> dict[str, Any] | None:
    rb = rc.read("robustness")
    if rb is None:
        return None
    allf = rb[rb["family"] == "all"]
    lines = [f"{r.group}: {r.acc_parent:.0%} → {r.acc_isomorph:.0%}" for r in allf.itertuples()]
    return {
        "reading": "Accuracy on parent items and on their structure-preserving variants: "
        + "; ".join(lines)
        + ".",
        "tables": [
            rc.table(
                "robustness",
                rb,
                [
                    "group",
                    "family",
                    "acc_parent",
                    "acc_isomorph",
                    "difference",
                    "ci_low",
                    "ci_high",
                ],
                caption="Isomorph minus parent accuracy with Wald intervals.",
            )
        ],
    }


def _methods_robustness(entry: Mapping[str, Any], opts: Mapping[str, Any]) -> str:
    return (
        "Robustness: accuracy on isomorphs against their parent items per group (Wald "
        "intervals), with a logistic mixed-model interaction test of group × isomorph."
    )


# -- effort -------------------------------------------------------------------------------------

EFFORT_ITEM_COLUMNS = ("group", "item", "family", "effort_unit", "effort", "human_rt_ms")


def _run_effort(ctx: PartContext) -> dict[str, Any]:
    t = ctx.data.trials
    hum = t[(t["kind"] == "human") & t["rt_ms"].notna()]
    mac = t[(t["kind"] == "machine") & t["effort"].notna()]
    if hum.empty or mac.empty:
        raise Skip("needs human response times and machine effort")
    rt = hum.groupby("item")["rt_ms"].median().rename("human_rt_ms").reset_index()
    ef = (
        mac.groupby(["group", "item", "family", "effort_unit"], dropna=False)["effort"]
        .mean()
        .reset_index()
    )
    return {"effort_items": ef.merge(rt, on="item")[list(EFFORT_ITEM_COLUMNS)]}


def _figure_effort(t: Tables) -> Figure | None:
    return (
        F.effort_vs_time(t["effort_items"])
        if "effort_items" in t and len(t["effort_items"])
        else None
    )


def _section_effort(rc: ReportContext) -> dict[str, Any] | None:
    pts = rc.read("effort_items")
    if pts is None:
        return None
    rho = []
    for (g, unit), d in pts.groupby(["group", pts["effort_unit"].fillna("effort")]):
        if len(d) > 2:
            r = d[["effort", "human_rt_ms"]].corr("spearman").iloc[0, 1]
            rho.append(f"{g} ({unit}): ρ = {rc.fmt(r)}")
    return {
        "reading": "Do items that take people longer also take machines more work? Spearman "
        "correlations per machine and effort unit: " + ("; ".join(rho) or "none defined") + ".",
        "tables": [],
    }


# -- export -------------------------------------------------------------------------------------


def _run_export(ctx: PartContext) -> dict[str, Any]:
    from .export import export_dataset

    export_dataset(ctx.data, ctx.out / "dataset", logs_dir=ctx.study.logs_dir, overwrite=True)
    return {"dataset": None}


_BUILTIN_PARTS: tuple[Part, ...] = (
    Part(
        "data",
        "Data",
        ("trials", "sessions", "issues"),
        _run_data,
        ("synthetic",),
        notes=_notes_data,
        section=_section_data,
    ),
    Part(
        "irt",
        "Machines on the human scale",
        ("irt_items", "irt_abilities", "irt_departures", "irt_fit"),
        _run_irt,
        ("irt_model",),
        notes=_notes_irt,
        figure=_figure_irt,
        section=_section_irt,
        methods=_methods_irt,
        references=(
            "rasch1960",
            "birnbaum1968",
            "bock1981",
            "bock1982",
            "wright1982",
            "drasgow1985",
        ),
    ),
    Part(
        "mixed",
        "Accuracy model",
        (
            "accuracy_fixed",
            "accuracy_random",
            "item_gap_variation",
            "log_rt_fixed",
            "log_rt_random",
            "log_effort_fixed",
            "log_effort_random",
        ),
        _run_mixed,
        ("conf_level", "gap_intervals"),
        notes=_notes_mixed,
        section=_section_mixed,
        methods=_methods_mixed,
        references=("baayen2008", "bates2015", "konis2007"),
    ),
    Part(
        "factors",
        "Difficulty factors",
        ("factor_effects",),
        _run_factors,
        ("conf_level",),
        notes=_notes_factors,
        figure=_figure_factors,
        section=_section_factors,
        references=("baayen2008", "bates2015"),
    ),
    Part(
        "agreement",
        "Difficulty profiles",
        (
            "item_difficulty",
            "machine_error_rates",
            "difficulty_agreement",
            "difficulty_reliability",
        ),
        _run_agreement,
        ("n_boot", "conf_level", "seed"),
        notes=_notes_agreement,
        figure=_figure_agreement,
        section=_section_agreement,
        methods=_methods_agreement,
        references=("efron1987", "spearman1910"),
    ),
    Part(
        "participants",
        "People by family",
        (
            "internal_consistency",
            "family_accuracy",
            "family_accuracy_tests",
            "profile_bayes_factors",
        ),
        _run_participants,
        ("conf_level",),
        notes=_notes_participants,
        section=_section_participants,
        methods=_methods_participants,
        references=("cronbach1951", "feldt1987", "ly2016", "bakeman2005", "holm1979", "vallat2018"),
    ),
    Part(
        "consistency",
        "Error consistency",
        ("consistency_pairs", "consistency_summary"),
        _run_consistency,
        ("min_items", "human_pairs", "conf_level"),
        notes=_notes_consistency,
        figure=_figure_consistency,
        section=_section_consistency,
        methods=_methods_consistency,
        references=("geirhos2020", "cohen1960"),
    ),
    Part(
        "errors",
        "Error types",
        ("error_types", "error_type_tests", "error_type_odds"),
        _run_errors,
        ("seed", "conf_level"),
        notes=_notes_errors,
        figure=_figure_errors,
        section=_section_errors,
        methods=_methods_errors,
        references=("sokal1995", "woolf1955"),
    ),
    Part(
        "robustness",
        "Robustness to isomorphs",
        ("robustness", "robustness_test_fixed", "robustness_test_random"),
        _run_robustness,
        ("conf_level",),
        notes=_notes_robustness,
        figure=_figure_robustness,
        section=_section_robustness,
        methods=_methods_robustness,
    ),
    Part(
        "effort",
        "Machine effort and human time",
        ("effort_items",),
        _run_effort,
        figure=_figure_effort,
        section=_section_effort,
    ),
    Part("export", "Data package", ("dataset",), _run_export),
)


def _check_part(name: str, obj: Any) -> None:
    if not isinstance(obj, Part):
        raise ValueError(f"analysis part {name!r}: got {type(obj).__name__}; accepted: a Part")
    if obj.name != name:
        raise ValueError(f"analysis part {name!r}: the Part is named {obj.name!r}")


#: Every analysis part, in the same :class:`~twofold.study.registry.Registry` type as families,
#: solvers, adapters and screens: the built-ins above in their running order, then plugins from
#: the ``twofold.analysis_parts`` entry-point group (an installed package's ``Part`` object),
#: which run after them in name order.
REGISTRY: Registry[Part] = Registry(
    "analysis part", group="twofold.analysis_parts", check=_check_part
)
for _part in _BUILTIN_PARTS:
    REGISTRY.register(_part.name, _part)


def _all_parts() -> tuple[Part, ...]:
    loaded = REGISTRY.load_all()
    builtin = {p.name for p in _BUILTIN_PARTS}
    return _BUILTIN_PARTS + tuple(loaded[n] for n in sorted(loaded) if n not in builtin)


#: the parts :func:`~twofold.analysis.analyze_study` and the report loop over
PARTS: tuple[Part, ...] = _all_parts()


# -- the report's view of the results -----------------------------------------------------------


@dataclasses.dataclass
class ReportContext:
    """What a part's ``section`` sees: the results folder, its notes, and table helpers."""

    results: Path
    out: Path
    notes: pd.DataFrame
    trials: pd.DataFrame | None

    def read(self, name: str) -> pd.DataFrame | None:
        """The results table ``name`` (None when missing or empty)."""
        path = self.results / f"{name}.csv"
        if not path.exists():
            return None
        try:
            df = pd.read_csv(path)
        except pd.errors.EmptyDataError:
            return None
        return df if len(df) else None

    @staticmethod
    def fmt(v: Any, nd: int = 2) -> str:
        """A number for prose (``n/a`` when missing)."""
        try:
            f = float(v)
        except (TypeError, ValueError):
            return "n/a"
        return "n/a" if math.isnan(f) else f"{f:.{nd}f}"

    def notes_for(self, table: str) -> list[dict[str, Any]]:
        """The notes stored with ``table``."""
        if self.notes.empty:
            return []
        rows = self.notes[self.notes["table"] == table]
        # the parts' own checks summarise; the raw warnings they summarise come after
        rows = rows.assign(_w=rows["severity"] == "warning").sort_values("_w", kind="stable")
        return rows.drop(columns="_w").to_dict("records")

    def csv_link(self, name: str) -> str:
        """The results table's CSV, relative to the report folder."""
        return Path(os.path.relpath(self.results / f"{name}.csv", self.out)).as_posix()

    def table(
        self,
        name: str,
        df: pd.DataFrame,
        columns: list[str] | None = None,
        *,
        caption: str = "",
        max_rows: int = 30,
    ) -> dict[str, Any]:
        """A table block: rendered rows, how many of how many, the CSV link and its notes."""
        d = df[[c for c in columns if c in df]] if columns else df
        shown = d.head(max_rows).copy()
        for c in shown.columns:
            if pd.api.types.is_float_dtype(shown[c]):
                shown[c] = shown[c].map(lambda v: "" if pd.isna(v) else f"{v:.3g}")
        html = shown.to_html(index=False, border=0, escape=True, na_rep="")
        return {
            "name": name,
            "caption": caption,
            "html": html,
            "shown": len(shown),
            "total": len(d),
            "csv": self.csv_link(name),
            "notes": self.notes_for(name),
        }

    def reference_levels(self, terms: pd.Series) -> dict[str, str]:
        """For each categorical predictor in model terms ``x[T.level]``, its reference level."""
        seen: dict[str, set[str]] = {}
        for term in terms.astype(str):
            for piece in term.split(":"):
                if "[T." in piece:
                    var, lvl = piece.split("[T.", 1)
                    seen.setdefault(var, set()).add(lvl.rstrip("]"))
        out = {}
        for var, lvls in seen.items():
            if self.trials is not None and var in self.trials:
                levels = {str(v) for v in self.trials[var].dropna().unique()}
                rest = sorted(levels - lvls)
                out[var] = ", ".join(rest) if rest else "?"
        return out


def part(name: str) -> Part:
    """The declared part called ``name``."""
    for p in PARTS:
        if p.name == name:
            return p
    raise InputError(f"no analysis part {name!r}")


def table_owner(name: str) -> str:
    """The part that writes table ``name`` (empty when none does)."""
    for p in PARTS:
        if name in p.tables:
            return p.name
    return ""


def json_ready(value: Any) -> Any:
    """numpy scalars as Python numbers, NaN as None (summary.json stays valid JSON)."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value
