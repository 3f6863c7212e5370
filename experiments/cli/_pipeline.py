"""The example study's stages in order, shared by ``twofold example`` (the command is the one
place that reaches study, experiments and analysis)."""

from __future__ import annotations

import json
import tomllib
from collections.abc import Callable
from pathlib import Path
from typing import Any

__all__ = ["QUICK", "make_quick", "run_example"]

#: what --quick shrinks: parents per family, simulated people, seeds per solver, bootstrap draws
QUICK = {"parents": 5, "humans": 16, "seeds": 1, "n_boot": 200}


def make_quick(study_dir: Path) -> None:
    """Shrink a copied example study in place for a fast run (comments are not kept)."""
    import tomli_w

    st_path = study_dir / "study.toml"
    st = tomllib.loads(st_path.read_text("utf-8"))
    spec_path = study_dir / st["bank"]["spec"]
    spec = tomllib.loads(spec_path.read_text("utf-8"))
    for fam in spec["families"].values():
        fam["n"] = QUICK["parents"]
    spec_path.write_text(tomli_w.dumps(spec), encoding="utf-8")
    st["simulate"]["humans"] = QUICK["humans"]
    for solver in st.get("solvers", []):
        solver["seeds"] = QUICK["seeds"]
    st["analysis"]["n_boot"] = QUICK["n_boot"]
    st["forms"]["respondents"] = 4
    st_path.write_text(tomli_w.dumps(st), encoding="utf-8")


def run_example(
    study_dir: Path,
    *,
    quick: bool = False,
    workers: int = 1,
    progress: Callable[..., Any],
    note: Callable[[str], None],
) -> Path:
    """Run every stage on the study in ``study_dir``; return the report's path.

    ``progress(label, total)`` is a context manager yielding an object with ``advance(k)`` (see
    ``_console.progress``); ``note(text)`` prints a line.
    """
    from twofold.analysis.report import SECTIONS, build_report
    from twofold.analysis.run import PARTS, analyze_study
    from twofold.experiments.machine import run_solvers, study_solvers
    from twofold.experiments.simulate import SimulationSettings, simulate_humans
    from twofold.study import load_study
    from twofold.study.audit import audit_bank
    from twofold.study.forms import build_forms, parse_forms, write_forms
    from twofold.study.logs import write_json_atomic

    if quick:
        make_quick(study_dir)
    study = load_study(study_dir)
    spec = study.generation_spec()
    with progress("1/7 generating the bank", sum(fs.n for fs in spec.families)) as bar:
        bank = study.bank(progress=lambda fam, k: bar.advance(k))
    note(f"bank: {len(bank)} items, hash {bank.hash[:16]}…")
    with progress("2/7 auditing the bank", len(bank)) as bar:
        audit = audit_bank(bank, progress=bar.advance, picture_sample=4)
    study.results_dir.mkdir(parents=True, exist_ok=True)
    write_json_atomic(study.results_dir / "audit.json", json.loads(json.dumps(audit, default=str)))
    note(f"audit: {len(audit.get('flags', []))} finding(s)")
    n_forms = parse_forms(study).respondents
    with progress("3/7 building forms", 1) as bar:
        forms = build_forms(study, n_forms)
        write_forms(study, forms)
        bar.advance(1)
    n_humans = SimulationSettings.from_table(study.table("simulate")).humans
    with progress("4/7 simulating participants (synthetic)", n_humans) as bar:
        simulate_humans(study, n=n_humans, progress=bar.advance)
    solvers = study_solvers(study)
    with progress("5/7 machine sessions", None) as bar:
        run_solvers(study, solvers, workers=workers, progress=bar, bank=bank)
    with progress("6/7 analysing", len(PARTS)) as bar:
        analyze_study(study, progress=lambda part: bar.advance(1))
    with progress("7/7 figures and report", len(SECTIONS)) as bar:
        return build_report(study, progress=lambda name: bar.advance(1))
