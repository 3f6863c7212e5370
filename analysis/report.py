"""The study report: one self-contained HTML file with every figure inlined.

:func:`build_report` reads the tables that :func:`twofold.analysis.run.analyze_study` wrote to the
results folder (running the analysis first when they are missing), draws every comparison figure
(also written as SVG and 300-dpi PNG under ``report/figures/``), and renders
``templates/report.html.j2``. Nothing in the page loads from the network.
"""

from __future__ import annotations

import base64
import datetime as _dt
import json
from collections.abc import Callable
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from twofold.study import __version__
from twofold.study._version import package_version
from twofold.study.audit import audit_bank
from twofold.study.logs import write_json_atomic
from twofold.study.studyfile import Study, load_study

from . import figures as F

__all__ = ["METHODS", "SECTIONS", "build_report"]

#: the report's analysis sections, in order (each calls ``progress`` once when done)
SECTIONS = (
    "audit",
    "difficulty",
    "irt",
    "errors",
    "consistency",
    "robustness",
    "factors",
    "effort",
)

#: Published methods the analysis uses, cited in the report's methods section.
METHODS = (
    "Item-response models: Rasch (Rasch, 1960) and two-parameter logistic (Birnbaum, 1968) "
    "models fitted by marginal maximum likelihood with the EM algorithm of Bock & Aitkin "
    "(1981, Psychometrika 46, 443–459), integrating over abilities on 41 equally spaced "
    "nodes on [-6, 6] weighted by the normal density; abilities by EAP (Bock & "
    "Mislevy, 1982) and maximum likelihood.",
    "Item fit by infit and outfit mean squares (Wright & Masters, 1982); person fit by the "
    "standardised log-likelihood statistic lz (Drasgow, Levine & Williams, 1985).",
    "Machines are scored on the scale calibrated on human respondents only.",
    "Mixed-effects models with crossed random intercepts for respondents and items (Baayen, "
    "Davidson & Bates, 2008): logistic models of accuracy by Laplace maximum likelihood "
    "(penalised iteratively reweighted least squares for the conditional modes; Bates, "
    "Mächler, Bolker & Walker, 2015, J. Stat. Softw. 67(1)) with standard errors from the "
    "observed information and Wald intervals, separation detected by a linear programme "
    "(Konis, 2007) and reported beside the affected rows; linear models of log response time / "
    "log effort by REML (penalised least squares).",
    "Difficulty-profile agreement: Spearman and Kendall rank correlations between human item "
    "difficulty and machine item error rates, with percentile and BCa bootstrap intervals over "
    "items (Efron, 1987, JASA 82, 171–185).",
    "Error consistency: Cohen's kappa on trial-level correct/incorrect agreement with expected "
    "agreement from the two accuracies (Geirhos, Meding & Wichmann, 2020, NeurIPS), with the "
    "human–human distribution as the ceiling.",
    "Error types: G-test of independence (Sokal & Rohlf, 1995) with a permutation version for "
    "small counts, Cramér's V, and per-type log odds ratios with Woolf intervals.",
    "Robustness: accuracy on isomorphs against their parent items, with a mixed-model "
    "interaction test.",
    "Forms: block orders from Latin squares and Williams designs (Williams, 1949).",
)

_SOFTWARE = ("twofold", "numpy", "scipy", "pandas", "statsmodels", "matplotlib", "jsonschema")


def _read(results: Path, name: str) -> pd.DataFrame | None:
    path = results / f"{name}.csv"
    if not path.exists():
        return None
    df = pd.read_csv(path)
    return df if len(df) else None


def _img(fig: Figure | Axes, stem: Path) -> dict[str, str]:
    if not isinstance(fig, Figure):  # the figure functions return a Figure when given no axes
        raise TypeError("expected a Figure")
    svg, _ = F.save_figure(fig, stem)
    data = base64.b64encode(svg.read_bytes()).decode("ascii")
    label = getattr(fig, "_supxlabel", None)
    caption = label.get_text() if label is not None else ""
    return {
        "src": f"data:image/svg+xml;base64,{data}",
        "alt": stem.name.replace("_", " "),
        "caption": caption,
    }


def _table(df: pd.DataFrame, columns: list[str] | None = None, *, max_rows: int = 30) -> str:
    d = df[columns] if columns else df
    d = d.head(max_rows)
    out = d.copy()
    for c in out.columns:
        if pd.api.types.is_float_dtype(out[c]):
            out[c] = out[c].map(lambda v: "" if pd.isna(v) else f"{v:.3g}")
    return out.to_html(index=False, border=0, escape=True, na_rep="")


def _fmt(v: Any, nd: int = 2) -> str:
    return "n/a" if v is None or (isinstance(v, float) and np.isnan(v)) else f"{v:.{nd}f}"


def build_report(
    study: Study | str | Path,
    *,
    results_dir: str | Path | None = None,
    out_dir: str | Path | None = None,
    progress: Callable[[str], None] | None = None,
) -> Path:
    """Write the study report and return the path of its HTML file.

    Parameters
    ----------
    study : Study or path
        The study (or its ``study.toml``).
    results_dir : path, optional
        The analysis tables (default: the study's ``results/``); analysed first when missing.
    out_dir : path, optional
        Where to write ``report.html`` and ``figures/`` (default: the study's ``report/``).
    progress : callable, optional
        Called with the name of each section when it is done.
    """
    st = study if isinstance(study, Study) else load_study(study)
    results = Path(results_dir) if results_dir else st.results_dir
    out = Path(out_dir) if out_dir else st.path("report", "report")
    if not (results / "summary.json").exists():
        from .run import analyze_study

        analyze_study(st, out_dir=results)
    summary = json.loads((results / "summary.json").read_text("utf-8"))
    figdir = out / "figures"
    trials = _read(results, "trials")
    bank = st.bank(create=False)
    done = progress or (lambda name: None)

    sections: list[dict[str, Any]] = []
    fig: Figure | Axes
    synthetic = bool(summary.get("synthetic_respondents"))
    humans = trials[trials["kind"] == "human"] if trials is not None else pd.DataFrame()
    machines = trials[trials["kind"] == "machine"] if trials is not None else pd.DataFrame()
    n_humans = humans["respondent"].nunique() if len(humans) else 0
    groups = sorted(machines["group"].unique()) if len(machines) else []

    # -- bank audit ------
    audit_path = results / "audit.json"
    if (
        audit_path.exists()
        and json.loads(audit_path.read_text("utf-8")).get("bank_hash") == bank.hash
    ):
        audit = json.loads(audit_path.read_text("utf-8"))
    else:
        audit = audit_bank(bank, picture_sample=3)
        write_json_atomic(audit_path, json.loads(json.dumps(audit, default=str)))
    fam_rows = [
        {
            "family": f,
            "items": v["n_items"],
            "parents": v["n_parents"],
            "isomorphs": v["n_variants"],
            "factors": ", ".join(sorted(v["factors"])),
        }
        for f, v in audit["families"].items()
    ]
    short = pd.DataFrame(audit["shortcuts"]) if audit["shortcuts"] else None
    flags = audit.get("flags", [])
    reading = f"The bank holds {audit['n_items']} items. " + (
        "No audit finding needs attention."
        if not flags
        else f"{len(flags)} finding(s) need attention: "
        + "; ".join(str(f.get("message", f)) for f in flags[:4])
    )
    if short is not None:
        worst = short.sort_values("majority_accuracy").iloc[-1]
        reading += (
            f" A solver that sees only the choices reaches at most "
            f"{worst['majority_accuracy']:.0%} by attribute-wise majority vote "
            f"({worst['family']}, scheme {worst['distractor_scheme']}; chance "
            f"{worst['chance']:.0%})."
        )
    tables = [_table(pd.DataFrame(fam_rows))]
    if short is not None:
        tables.append(
            _table(
                short,
                [
                    "family",
                    "distractor_scheme",
                    "n_choices",
                    "n_items",
                    "chance",
                    "majority_accuracy",
                    "majority_p",
                    "centroid_accuracy",
                    "centroid_p",
                    "flagged",
                ],
            )
        )
    sections.append(
        {"id": "audit", "title": "Bank audit", "reading": reading, "figures": [], "tables": tables}
    )
    done("audit")

    # -- difficulty profiles ------
    hd, mer, agr, rel = (
        _read(results, n)
        for n in (
            "item_difficulty",
            "machine_error_rates",
            "difficulty_agreement",
            "difficulty_reliability",
        )
    )
    if hd is not None and mer is not None:
        pts = mer.merge(hd[["item", "difficulty"]], on="item").rename(
            columns={"difficulty": "human_difficulty", "error_rate": "machine_error"}
        )
        stats = None
        reading = ""
        if agr is not None:
            sp = agr[(agr["statistic"] == "spearman") & (agr["interval"] == "bca")]
            stats = sp[sp["family"] != "all"]
            lines = [
                f"{r.group}: ρ = {_fmt(r.estimate)} [{_fmt(r.ci_low)}, {_fmt(r.ci_high)}] "
                f"over {r.n_items} items"
                for r in sp[sp["family"] == "all"].itertuples()
            ]
            reading = (
                "Do machines find the same items hard as people? A rank correlation near "
                "1 means the machine's hardest items are people's hardest; near 0, its "
                "difficulties are unrelated to people's. " + "; ".join(lines) + "."
            )
        if rel is not None:
            r_all = rel[rel["family"] == "all"]
            if len(r_all) and pd.notna(r_all["spearman_brown"].iloc[0]):
                reading += (
                    " The ceiling: people's own difficulty profile is reproduced between random "
                    f"halves of the sample with ρ = {r_all['split_half'].iloc[0]:.2f} "
                    f"(Spearman–Brown {r_all['spearman_brown'].iloc[0]:.2f} for the full "
                    "sample); a machine near that value agrees with people as well as people "
                    "agree with each other."
                )
        gap = _read(results, "item_gap_variation")
        if gap is not None and len(gap):
            words = [
                f"{r.term.split('[T.')[-1].rstrip(']')} − people: SD {_fmt(r.sd)} "
                f"[{_fmt(r.sd_ci_low)}, {_fmt(r.sd_ci_high)}] log-odds over {r.n_items} items "
                f"(average gap {_fmt(r.gap)}; test of no spread p = {_fmt(r.p_val, 3)})"
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
        fig = F.difficulty_profiles(pts, stats)
        tbl = (
            [
                _table(
                    agr[agr["interval"] == "bca"],
                    [
                        "group",
                        "family",
                        "statistic",
                        "estimate",
                        "ci_low",
                        "ci_high",
                        "p_val",
                        "n_items",
                    ],
                )
            ]
            if agr is not None
            else []
        )
        if rel is not None:
            tbl.append(
                _table(
                    rel,
                    [
                        "family",
                        "n_items",
                        "n_respondents",
                        "split_half",
                        "spearman_brown",
                        "q_low",
                        "q_high",
                    ],
                )
            )
        if gap is not None and len(gap):
            tbl.append(
                _table(
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
                )
            )
        sections.append(
            {
                "id": "difficulty",
                "title": "Difficulty profiles",
                "reading": reading,
                "figures": [_img(fig, figdir / "difficulty_profiles")],
                "tables": tbl,
                "synthetic": synthetic,
            }
        )
    done("difficulty")

    # -- item-response scale ------
    items, ab, dep = (_read(results, n) for n in ("irt_items", "irt_abilities", "irt_departures"))
    if items is not None and ab is not None:
        mach = ab[(ab["kind"] == "machine") & (ab["pooled"].astype(bool))]
        chosen = items.dropna(subset=["a", "b"])
        if dep is not None and len(dep):
            top = dep.reindex(dep["z"].abs().sort_values(ascending=False).index)["item"]
            chosen = chosen[chosen["item"].isin(list(dict.fromkeys(top))[:5])]
        else:
            chosen = chosen.iloc[np.linspace(0, len(chosen) - 1, min(5, len(chosen))).astype(int)]
        fig = F.item_curves(
            chosen[["item", "a", "b"]],
            mach.rename(columns={"respondent": "group"})[["group", "theta"]],
        )
        lines = [
            f"{r.respondent}: θ = {_fmt(r.theta)} (SE {_fmt(r.se)}), lz = {_fmt(r.lz)}"
            for r in mach.itertuples()
        ]
        reading = (
            "Each machine is placed on the ability scale calibrated on people. A strongly "
            "negative person-fit lz means its pattern is unlike a person of that ability: "
            "it fails items people find easy and solves items people find hard. "
            + "; ".join(lines)
            + "."
        )
        sections.append(
            {
                "id": "irt",
                "title": "Machines on the human scale",
                "reading": reading,
                "figures": [_img(fig, figdir / "item_curves")],
                "tables": [
                    _table(mach, ["respondent", "theta", "se", "n_items", "n_correct", "lz"]),
                    _table(
                        items,
                        ["item", "a", "b", "a_se", "b_se", "p_correct", "infit", "outfit"],
                        max_rows=12,
                    ),
                ],
                "synthetic": synthetic,
                "note": f"Item table shows 12 of {len(items)} items; all are in "
                "results/irt_items.csv.",
            }
        )
    done("irt")

    # -- error types ------
    et, ett = _read(results, "error_types"), _read(results, "error_type_tests")
    if et is not None:
        fig = F.error_type_composition(et)
        reading = "Which kinds of wrong answers does each respondent group give?"
        if ett is not None:
            sig = ett[ett["p_val"] < 0.05]
            reading += (
                f" In {len(sig)} of {len(ett)} family × machine comparisons the error-type "
                "distribution differs from people's (p < .05)."
            )
        sections.append(
            {
                "id": "errors",
                "title": "Error types",
                "reading": reading,
                "figures": [_img(fig, figdir / "error_types")],
                "tables": [_table(ett)] if ett is not None else [],
                "synthetic": synthetic,
            }
        )
    done("errors")

    # -- error consistency ------
    cp, cs = _read(results, "consistency_pairs"), _read(results, "consistency_summary")
    if cp is not None:
        fig = F.error_consistency(cp.rename(columns={"pair_type": "kind_pair"}), summary=cs)
        hh = cp.loc[cp["pair_type"] == "human-human", "kappa"].dropna()
        reading = (
            "Error consistency asks whether two respondents err on the same trials beyond "
            "what their accuracies predict (0 = independent, 1 = identical errors)."
        )
        hh_row = cs[cs["pair_type"] == "human-human"] if cs is not None else cs
        if hh_row is not None and len(hh_row) and pd.notna(hh_row["median"].iloc[0]):
            reading += (
                f" Between people the median is {hh_row['median'].iloc[0]:.2f} (the ceiling), "
                f"over {int(hh_row['n_pairs'].iloc[0])} pairs."
            )
        elif len(hh):
            reading += f" Between people the median is {hh.median():.2f} (the ceiling)."
        hm = cp[cp["pair_type"] == "human-machine"]
        for g in groups:
            k = hm.loc[(hm["group_a"] == g) | (hm["group_b"] == g), "kappa"].dropna()
            if len(k):
                reading += f" {g} with people: {k.mean():.2f}."
        sections.append(
            {
                "id": "consistency",
                "title": "Error consistency",
                "reading": reading,
                "figures": [_img(fig, figdir / "error_consistency")],
                "tables": [_table(cs)] if cs is not None else [],
                "synthetic": synthetic,
            }
        )
    done("consistency")

    # -- robustness ------
    rb = _read(results, "robustness")
    if rb is not None:
        allf = rb[rb["family"] == "all"].rename(
            columns={
                "acc_parent": "parent_accuracy",
                "acc_isomorph": "variant_accuracy",
                "n_parent": "n_pairs",
            }
        )
        fig = F.robustness(allf)
        lines = [
            f"{r.group}: {r.parent_accuracy:.0%} → {r.variant_accuracy:.0%}"
            for r in allf.itertuples()
        ]
        sections.append(
            {
                "id": "robustness",
                "title": "Robustness to isomorphs",
                "reading": "Accuracy on parent items and on their structure-preserving "
                "variants: " + "; ".join(lines) + ".",
                "figures": [_img(fig, figdir / "robustness")],
                "tables": [
                    _table(
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
                    )
                ],
                "synthetic": synthetic,
            }
        )
    done("robustness")

    # -- factor effects ------
    fe = _read(results, "factor_effects")
    if fe is not None:
        eff = fe[fe["quantity"] == "effect"].copy()
        eff["factor"] = eff["term"].astype(str).str.replace("factor_", "")
        fig = F.factor_effects(eff[["family", "factor", "group", "estimate", "ci_low", "ci_high"]])
        diff = fe[(fe["quantity"] == "difference") & (fe["p_val"] < 0.05)]
        sections.append(
            {
                "id": "factors",
                "title": "Difficulty factors",
                "reading": "How much each generator factor raises the odds of an error, "
                "for people and for each machine. "
                f"{len(diff)} factor effects differ between a machine and "
                "people (p < .05).",
                "figures": [_img(fig, figdir / "factor_effects")],
                "tables": [
                    _table(
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
                    )
                ],
                "synthetic": synthetic,
            }
        )
    done("factors")

    # -- effort vs time ------
    if len(machines) and len(humans) and humans["rt_ms"].notna().any():
        rt = humans.groupby("item")["rt_ms"].median().rename("human_rt_ms")
        ef = machines.groupby(["group", "item"]).agg(
            effort=("effort", "mean"), effort_unit=("effort_unit", "first")
        )
        pts = ef.reset_index().merge(rt.reset_index(), on="item")
        if pts["effort"].notna().any():
            fig = F.effort_vs_time(pts)
            rho = [
                f"{g}: ρ = {pts[pts['group'] == g][['effort', 'human_rt_ms']].corr('spearman').iloc[0, 1]:.2f}"  # noqa: E501
                for g in groups
                if (pts["group"] == g).sum() > 2
            ]
            sections.append(
                {
                    "id": "effort",
                    "title": "Machine effort and human time",
                    "reading": "Do items that take people longer also take machines "
                    "more work? Spearman correlations per machine: " + "; ".join(rho) + ".",
                    "figures": [_img(fig, figdir / "effort_vs_time")],
                    "tables": [],
                    "synthetic": synthetic,
                }
            )
    done("effort")

    # -- mixed model table ------
    acc = _read(results, "accuracy_fixed")
    if acc is not None:
        sections.append(
            {
                "id": "mixed",
                "title": "Accuracy model",
                "reading": "Logistic mixed model of accuracy with crossed random "
                "intercepts for respondents and items (fixed effects below, "
                "on the log-odds scale).",
                "figures": [],
                "tables": [_table(acc)],
                "synthetic": synthetic,
            }
        )

    for sec in sections:
        sec.setdefault("synthetic", False)
        sec.setdefault("note", "")
    facts = [
        ("bank hash", bank.hash),
        ("families", ", ".join(f"{r['family']} ({r['items']} items)" for r in fam_rows)),
        ("factors", "; ".join(f"{r['family']}: {r['factors']}" for r in fam_rows)),
        ("human respondents", f"{n_humans} ({summary.get('synthetic_respondents', 0)} synthetic)"),
        (
            "machine groups",
            ", ".join(
                f"{g} ({machines[machines['group'] == g]['respondent'].nunique()} seeds)"  # noqa: E501
                for g in groups
            )
            or "none",
        ),
        ("trials", str(summary.get("n_trials", 0))),
    ]
    skipped = {
        p: v.get("reason")
        for p, v in summary.get("parts", {}).items()
        if v.get("status") == "skipped"
    }
    if skipped:
        facts.append(("analyses skipped", "; ".join(f"{p}: {r}" for p, r in skipped.items())))
    context = {
        "study": {
            "name": st.name,
            "bank_hash": bank.hash,
            "description": st.table("study").get("description", ""),
            "n_humans": n_humans,
            "n_machines": len(groups),
            "synthetic": synthetic,
            "synthetic_note": f"{summary.get('synthetic_respondents', 0)} simulated people; "
            "their results describe the simulation, not real participants.",
            "facts": facts,
        },
        "sections": sections,
        "methods": METHODS,
        "software": [(n, package_version(n) or "not installed") for n in _SOFTWARE],
        "version": __version__,
        "generated": _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
    }
    import jinja2

    text = (
        resources.files("twofold.analysis").joinpath("templates/report.html.j2").read_text("utf-8")
    )
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)
    page = env.from_string(text).render(**context)
    out.mkdir(parents=True, exist_ok=True)
    target = out / "report.html"
    target.write_text(page, encoding="utf-8")
    return target
