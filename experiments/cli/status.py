"""``twofold status``: where a study stands, on one screen, and the next command to run."""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path
from typing import Annotated, Any

import typer

from ._console import stdout

__all__ = ["print_status", "study_status"]


def register(app: typer.Typer) -> None:
    app.command("status")(status)


def _sessions(folder: Path) -> list[dict[str, Any]]:
    """The session records (sidecars) of the logs in ``folder``; unreadable ones as 'unreadable'."""
    from twofold.study.exceptions import TwofoldError
    from twofold.study.logs import is_session_log, read_sidecar

    out: list[dict[str, Any]] = []
    if not folder.is_dir():
        return out
    for csv in sorted(folder.glob("*.csv")):
        if not is_session_log(csv):
            continue
        try:
            rec = read_sidecar(csv.with_suffix(".json"), partial=True)
        except TwofoldError:
            rec = {"session": csv.stem, "status": "unreadable"}
        rec["_csv"] = csv
        out.append(rec)
    return out


def _trial_statuses(csv: Path) -> Counter[str]:
    import pandas as pd

    try:
        col = pd.read_csv(csv, usecols=["status"], dtype=str, keep_default_na=False)["status"]
    except (ValueError, OSError, pd.errors.ParserError):
        return Counter()
    return Counter(col)


def study_status(study: Any) -> dict[str, Any]:
    """Collect a study's state: bank, audit flags, forms, sessions, sweeps, results, report.

    Returns
    -------
    dict
        ``bank`` (``None`` or hash, items per family, audit flags by kind and whether the audit
        is saved for this bank), ``forms`` (built, assigned), ``human`` (session counts by
        status), ``simulated`` (sessions, trials), ``machine`` (per solver: sessions, trials by
        status), ``results`` and ``report`` (whether written) and ``next`` (the command to run).
    """
    from twofold.study.bank import load_bank
    from twofold.study.exceptions import TwofoldError
    from twofold.study.forms import assignment, load_forms

    info: dict[str, Any] = {"study": study.name, "file": str(study.file), "bank": None}
    if study.bank_dir.exists():
        try:
            bank = load_bank(study.bank_dir)
        except TwofoldError as err:
            info["bank"] = {"error": str(err)}
        else:
            fams = Counter(it.family for it in bank.items)
            info["bank"] = {"hash": bank.hash, "n_items": len(bank), "families": dict(fams)}
            audit_path = study.results_dir / "audit.json"
            report = None
            if audit_path.exists():
                try:
                    report = json.loads(audit_path.read_text("utf-8"))
                except (OSError, ValueError):
                    report = None
            if report is None or report.get("bank_hash") != bank.hash:
                from twofold.study.audit import audit_bank

                report = audit_bank(bank, picture_sample=0)
                info["bank"]["audit"] = "run now (no pictures)"
            else:
                info["bank"]["audit"] = str(audit_path)
            info["bank"]["flags"] = dict(Counter(f["kind"] for f in report.get("flags", [])))
    try:
        forms = load_forms(study)
        info["forms"] = {"built": len(forms), "assigned": len(assignment(study))}
    except TwofoldError:
        info["forms"] = {"built": 0, "assigned": 0}
    human = _sessions(study.logs_dir / "human")
    info["human"] = dict(Counter(str(r.get("status")) for r in human if not r.get("synthetic")))
    sim = _sessions(study.logs_dir / "simulated") + [r for r in human if r.get("synthetic")]
    info["simulated"] = {
        "sessions": len(sim),
        "trials": sum(int(r.get("n_trials") or 0) for r in sim),
    }
    machine: dict[str, dict[str, Any]] = {}
    for r in _sessions(study.logs_dir / "machine"):
        name = str(r.get("solver") or r.get("respondent") or r["_csv"].stem)
        m = machine.setdefault(name, {"sessions": 0, "trials": Counter(), "planned": 0})
        m["sessions"] += 1
        m["trials"].update(_trial_statuses(r["_csv"]))
        m["planned"] += int(r.get("n_planned") or 0)
    info["machine"] = {k: {**v, "trials": dict(v["trials"])} for k, v in machine.items()}
    info["results"] = (study.results_dir / "summary.json").exists()
    info["report"] = (study.path("report", "report") / "report.html").exists()
    info["next"] = _next(study, info)
    return info


def _next(study: Any, info: dict[str, Any]) -> str:
    f = study.file
    bank = info["bank"]
    if bank is None:
        spec = (study.table("bank") or {}).get("spec")
        src = study.root / spec if isinstance(spec, str) else study.file
        return f"twofold items generate {src} -o {study.bank_dir}"
    if "error" in bank:
        return f"fix the bank (or remove {study.bank_dir} to generate it again)"
    if bank.get("flags"):
        return f"twofold items audit {study.bank_dir}   (the bank has audit flags)"
    if not info["forms"]["built"]:
        return f"twofold forms build {f}"
    has_logs = info["human"] or info["simulated"]["sessions"] or info["machine"]
    if not info["simulated"]["sessions"] and not info["human"]:
        return (
            f"twofold simulate {f}   (a synthetic pilot), "
            f"or twofold run human {f} --respondent P001"
        )
    if not info["machine"]:
        return f"twofold run machine {f}"
    failed = sum(
        n for m in info["machine"].values() for s, n in m["trials"].items() if s == "failed"
    )
    if failed:
        return f"twofold run machine {f}   ({failed} failed trials are retried)"
    if has_logs and not info["results"]:
        return f"twofold analyze {f}"
    if not info["report"]:
        return f"twofold report {f}"
    return f"open {study.path('report', 'report') / 'report.html'}"


def print_status(info: dict[str, Any]) -> list[str]:
    """The lines of the status screen (also returned, for tests and notebooks)."""
    lines = [f"study {info['study']} ({info['file']})"]
    bank = info["bank"]
    if bank is None:
        lines.append("bank:      not generated yet")
    elif "error" in bank:
        lines.append(f"bank:      unreadable: {bank['error']}")
    else:
        fams = ", ".join(f"{k} {v}" for k, v in sorted(bank["families"].items()))
        flags = ", ".join(f"{k} {v}" for k, v in sorted(bank["flags"].items())) or "none"
        lines.append(f"bank:      {bank['n_items']} items ({fams}); hash {bank['hash'][:16]}")
        lines.append(f"audit:     flags: {flags}  [{bank['audit']}]")
    fm = info["forms"]
    lines.append(f"forms:     {fm['built']} built, {fm['assigned']} assigned to respondents")
    hs = info["human"]
    order = ("complete", "running", "incomplete", "aborted", "declined", "failed", "unreadable")
    parts = [f"{k} {hs[k]}" for k in order if hs.get(k)] + [
        f"{k} {v}" for k, v in sorted(hs.items()) if k not in order
    ]
    running = (
        " (running = in progress or interrupted; resume with --resume)" if hs.get("running") else ""
    )
    lines.append(f"people:    {', '.join(parts) if parts else 'no sessions yet'}{running}")
    sim = info["simulated"]
    lines.append(
        f"simulated: {sim['sessions']} synthetic sessions, {sim['trials']} trials"
        if sim["sessions"]
        else "simulated: none"
    )
    if info["machine"]:
        for name, m in sorted(info["machine"].items()):
            done = sum(m["trials"].values())
            bad = ", ".join(f"{k} {v}" for k, v in sorted(m["trials"].items()) if k != "ok")
            lines.append(
                f"machine:   {name}: {m['sessions']} sessions, {done} of {m['planned']} trials "
                f"done" + (f" ({bad})" if bad else "")
            )
    else:
        lines.append("machine:   no sweeps yet")
    lines.append(
        f"results:   {'written' if info['results'] else 'not yet'}; "
        f"report: {'written' if info['report'] else 'not yet'}"
    )
    lines.append(f"next:      {info['next']}")
    return lines


def status(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
) -> None:
    """One screen: bank and audit flags, forms, sessions, sweeps, and the next command to run."""
    from twofold.study import load_study

    for line in print_status(study_status(load_study(study_file))):
        stdout.print(line, markup=False, highlight=False, soft_wrap=True)
