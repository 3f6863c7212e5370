"""``twofold run human``: one participant session in a PsychoPy window."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._console import console, stdout


def register_run(run_app: typer.Typer) -> None:
    run_app.command("human")(human)


def human(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    respondent: Annotated[str, typer.Option(help="Respondent id (a code, e.g. P001).")],
    resume: Annotated[
        bool, typer.Option(help="Continue this respondent's interrupted session.")
    ] = False,
) -> None:
    """Run a participant session: consent, instructions, practice, items, breaks, end screen."""
    from twofold.experiments.human import BANNER, prepare_session, run_session

    plan = prepare_session(study_file, respondent, resume=resume)  # every check, no window yet
    console.print(BANNER, style="bold yellow", markup=False)
    result = run_session(plan)
    stdout.print(f"session {result.status}: {result.n_written} trials written to {result.csv_path}")
    if result.status != "complete":
        raise typer.Exit(3 if result.status == "aborted" else 4)
