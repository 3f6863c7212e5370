"""The study report: one self-contained HTML file, the verdict first, every figure inlined.

:func:`build_report` reads the tables that :func:`twofold.analysis.run.analyze_study` wrote to the
results folder (running the analysis first when they are missing) and renders
``templates/report.html.j2``: the verdict panel (:mod:`twofold.analysis.verdict`), the bank
audit, then one section per analysis part that declares one (:mod:`twofold.analysis._parts`),
each table with the notes stored with it (``notes.csv``), then methods generated from what was
run, the references of the methods used, and package versions. Every figure is also written as
PDF, SVG and 300-dpi PNG under ``report/figures/``. Nothing in the page loads from the network.
"""

from __future__ import annotations

import base64
import datetime as _dt
import json
import os
from collections.abc import Callable
from importlib import resources
from pathlib import Path
from typing import Any

import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from twofold.study import __version__
from twofold.study._version import package_version
from twofold.study.audit import audit_bank
from twofold.study.logs import write_json_atomic
from twofold.study.studyfile import Study, load_study

from . import _parts
from . import figures as F
from .verdict import FRAGILITY_MARGIN, QUESTIONS

__all__ = ["SECTIONS", "build_report"]

#: the report's sections, in order (each calls ``progress`` once when done): the verdict, the
#: bank audit, then one per analysis part that declares a section
SECTIONS = ("verdict", "audit", *(p.name for p in _parts.PARTS if p.section is not None))

_SOFTWARE = (
    "twofold",
    "numpy",
    "scipy",
    "pandas",
    "statsmodels",
    "pingouin",
    "matplotlib",
    "jsonschema",
)


def _read_notes(results: Path) -> pd.DataFrame:
    path = results / "notes.csv"
    cols = list(_parts.NOTE_COLUMNS)
    if not path.exists():
        return pd.DataFrame(columns=cols)
    try:
        return pd.read_csv(path, keep_default_na=False)[cols]
    except (pd.errors.EmptyDataError, KeyError):
        return pd.DataFrame(columns=cols)


def _img(fig: Figure | Axes, stem: Path, out: Path) -> dict[str, Any]:
    if not isinstance(fig, Figure):  # the figure functions return a Figure when given no axes
        raise TypeError("expected a Figure")
    svg, pdf, png = F.save_figure(fig, stem)
    data = base64.b64encode(svg.read_bytes()).decode("ascii")
    label = getattr(fig, "_supxlabel", None)
    caption = label.get_text() if label is not None else ""
    return {
        "src": f"data:image/svg+xml;base64,{data}",
        "alt": stem.name.replace("_", " "),
        "caption": caption,
        "width": round(fig.get_figwidth() * 96),
        "files": [
            (p.suffix[1:].upper(), Path(os.path.relpath(p, out)).as_posix())
            for p in (pdf, svg, png)
        ],
    }


def _verdict_section(rc: _parts.ReportContext, figdir: Path, out: Path) -> dict[str, Any]:
    title = "Verdict: does the machine fail where people fail?"
    v = rc.read("verdict")
    if v is None:
        return {
            "id": "verdict",
            "title": title,
            "reading": "No verdict: the analysis has no machine respondents compared with people "
            "(or the parts it needs did not run).",
            "groups": [],
            "tables": [],
        }
    groups = []
    for g, sub in v.groupby("group", sort=True):
        rows = []
        for q in QUESTIONS:
            qs = sub[sub["question"] == q]
            if qs.empty:
                continue
            main = qs[qs["family"] == "all"]
            head = main.iloc[0] if len(main) else None
            fams = qs[qs["family"] != "all"]
            rows.append(
                {
                    "question": q,
                    "answer": str(head["answer"]) if head is not None else "per family",
                    "sentence": str(head["sentence"]) if head is not None else "",
                    "families": [
                        {"family": r.family, "answer": r.answer, "sentence": r.sentence}
                        for r in fams.itertuples()
                    ],
                }
            )
        groups.append({"group": g, "rows": rows})
    return {
        "id": "verdict",
        "title": title,
        "reading": "Each answer follows fixed rules: 'yes' when the whole interval lies in the "
        "region that reads like people, 'no' (or 'partly': above chance, below people) when it "
        "lies wholly outside, 'cannot tell' when it spans both readings, 'undefined' when the "
        "number does not exist for these data. A test that finds no difference in error types "
        "reads 'cannot tell', never 'yes'.",
        "groups": groups,
        "figures": [_img(F.verdict_summary(v), figdir / "verdict", out)],
        "tables": [
            rc.table(
                "verdict",
                v,
                ["group", "family", "question", "answer", "estimate", "ci_low", "ci_high"],
                caption="Every verdict row; the sentences are in verdict.csv and summary.json.",
                max_rows=12,
            )
        ],
    }


def _audit_section(
    rc: _parts.ReportContext, bank: Any, results: Path
) -> tuple[dict[str, Any], list[dict[str, Any]]]:
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
    blocks = [rc.table("audit_families", pd.DataFrame(fam_rows), caption="Items per family.")]
    if short is not None:
        cols = [
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
        ]
        blocks.append(
            rc.table(
                "audit_shortcuts",
                short,
                cols,
                caption="Choices-only shortcut solvers against chance.",
            )
        )
    for b in blocks:
        b["csv"] = ""  # the audit lives in audit.json, not in a CSV
    sec = {"id": "audit", "title": "Bank audit", "reading": reading, "tables": blocks}
    return sec, fam_rows


def _methods(summary: dict[str, Any], ran: list[_parts.Part]) -> tuple[list[str], list[str]]:
    """Methods sentences for the parts that ran, the options as run, and their references."""
    opts = summary.get("options", {})
    lines = []
    keys: list[str] = []
    for p in ran:
        if p.methods is not None:
            lines.append(p.methods(summary["parts"].get(p.name, {}), opts))
        keys += [k for k in p.references if k not in keys]
    lines.append(
        f"Options as run: conf_level = {opts.get('conf_level')}, n_boot = {opts.get('n_boot')}, "
        f"seed = {opts.get('seed')}, irt_model = {opts.get('irt_model')}, min_items = "
        f"{opts.get('min_items')}, synthetic = {opts.get('synthetic')}, human_pairs = "
        f"{opts.get('human_pairs')}. Verdict rules: twofold.analysis.verdict (fragility margin "
        f"±{FRAGILITY_MARGIN:.2f})."
    )
    return lines, sorted(_parts.REFERENCES[k] for k in keys)


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
    trials = _parts.ReportContext(results, out, pd.DataFrame(), None).read("trials")
    bank = st.bank(create=False)
    done = progress or (lambda name: None)

    notes = _read_notes(results)
    rc = _parts.ReportContext(results=results, out=out, notes=notes, trials=trials)
    synthetic = bool(summary.get("synthetic_respondents"))
    humans = trials[trials["kind"] == "human"] if trials is not None else pd.DataFrame()
    machines = trials[trials["kind"] == "machine"] if trials is not None else pd.DataFrame()
    n_humans = humans["respondent"].nunique() if len(humans) else 0
    groups = sorted(machines["group"].unique()) if len(machines) else []

    sections: list[dict[str, Any]] = [_verdict_section(rc, figdir, out)]
    done("verdict")
    audit_sec, fam_rows = _audit_section(rc, bank, results)
    sections.append(audit_sec)
    done("audit")
    ran = []
    for part in _parts.PARTS:
        entry = summary.get("parts", {}).get(part.name)
        ok = entry is not None and entry.get("status") == "ok"
        if ok:
            ran.append(part)
        if part.section is None:
            continue
        sec = part.section(rc) if ok else None
        if sec is not None:
            sec.update(id=part.name, title=part.title, synthetic=synthetic)
            sec.setdefault("figures", [])
            if part.figure is not None:
                tabs = {n: df for n in part.tables if (df := rc.read(n)) is not None}
                fig = part.figure(tabs) if tabs else None
                if fig is not None:
                    sec["figures"].append(_img(fig, figdir / part.name, out))
            shown = {b["name"] for b in sec["tables"]}
            sec["notes"] = [
                n
                for n in notes.to_dict("records")
                if n["part"] == part.name and n["table"] not in shown
            ]
            sections.append(sec)
        elif entry is not None and not ok:
            sections.append(
                {
                    "id": part.name,
                    "title": part.title,
                    "reading": f"Not run on these data: {entry.get('reason', '')}",
                    "tables": [],
                }
            )
        done(part.name)

    for sec in sections:
        sec.setdefault("synthetic", False)
        sec.setdefault("notes", [])
        sec.setdefault("figures", [])
        sec.setdefault("groups", None)
    facts = [
        ("bank hash", bank.hash),
        ("families", ", ".join(f"{r['family']} ({r['items']} items)" for r in fam_rows)),
        ("factors", "; ".join(f"{r['family']}: {r['factors']}" for r in fam_rows)),
        ("human respondents", f"{n_humans} ({summary.get('synthetic_respondents', 0)} synthetic)"),
        (
            "machine groups",
            ", ".join(
                f"{g} ({machines[machines['group'] == g]['respondent'].nunique()} seeds)"
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
    methods, references = _methods(summary, ran)
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
        "methods": methods,
        "references": references,
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
