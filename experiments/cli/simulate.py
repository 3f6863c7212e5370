"""``twofold simulate``: synthetic human sessions for piloting and planning."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from ._console import console, progress, stdout

__all__ = ["bank_notice"]


def bank_notice(study: Any) -> None:
    """Say (one line, stderr) that the bank is about to be generated because it is missing."""
    if not study.bank_dir.exists():
        spec = (study.table("bank") or {}).get("spec", "the [bank] spec")
        console.print(f"no bank yet: generating it from {spec} into {study.bank_dir}", markup=False)


def register(app: typer.Typer) -> None:
    app.command("simulate")(simulate)


def simulate(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    humans: Annotated[int | None, typer.Option(help="Number of simulated respondents.")] = None,
    seed: Annotated[int | None, typer.Option(help="Seed (default: the study seed).")] = None,
    replace: Annotated[bool, typer.Option(help="Replace existing simulated sessions.")] = False,
) -> None:
    """Write synthetic human sessions (marked synthetic in every row) from a 2PL model."""
    from twofold.experiments.simulate import SimulationSettings, simulate_humans
    from twofold.study import load_study

    study = load_study(study_file)
    bank_notice(study)
    n = humans or SimulationSettings.from_table(study.table("simulate")).humans
    with progress("simulating respondents", n) as bar:
        out = simulate_humans(study, n=n, seed=seed, replace=replace, progress=bar.advance)
    console.print("[bold]synthetic data[/bold]: never mix it with real sessions.")
    stdout.print(
        f"wrote {len(out['sessions'])} synthetic sessions ({out['n_trials']} trials) "
        f"to {study.logs_dir / 'simulated'}"
    )
