"""``twofold simulate``: synthetic human sessions for piloting and planning."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._console import console, progress, stdout


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
    n = humans or SimulationSettings.from_table(study.table("simulate")).humans
    with progress("simulating respondents", n) as bar:
        out = simulate_humans(study, n=n, seed=seed, replace=replace, progress=bar.advance)
    console.print("[bold]synthetic data[/bold]: never mix it with real sessions.")
    stdout.print(
        f"wrote {len(out['sessions'])} synthetic sessions ({out['n_trials']} trials) "
        f"to {study.logs_dir / 'simulated'}"
    )
