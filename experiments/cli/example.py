"""``twofold example``: the bundled example study, end to end, in a fresh folder."""

from __future__ import annotations

import shutil
import time
from importlib import resources
from pathlib import Path
from typing import Annotated

import typer

from ._console import console, progress, stdout


def register(app: typer.Typer) -> None:
    app.command("example")(example)


def copy_example(dest: Path) -> Path:
    """Copy the bundled example study into ``dest`` (which must not exist or be empty)."""
    from twofold.study.exceptions import InputError

    if dest.exists() and any(dest.iterdir()):
        raise InputError(
            f"{dest}: folder exists and is not empty; choose another --out folder.", field="--out"
        )
    src = resources.files("twofold.example_study")
    with resources.as_file(src) as folder:
        shutil.copytree(
            folder,
            dest,
            dirs_exist_ok=True,
            ignore=shutil.ignore_patterns("__init__.py", "__pycache__"),
        )
    return dest


def example(
    out: Annotated[Path, typer.Option("--out", help="Fresh folder for the study copy.")] = Path(
        "twofold-example"
    ),
    quick: Annotated[
        bool,
        typer.Option(
            help="A small version (fewer items, people and seeds) "
            "that finishes in well under a minute."
        ),
    ] = False,
    workers: Annotated[int, typer.Option(help="Processes for the machine sessions.")] = 2,
) -> None:
    """Run the bundled example study end to end in a fresh folder, report included."""
    from ._pipeline import run_example

    t0 = time.monotonic()
    study_dir = copy_example(out)
    report = run_example(
        study_dir, quick=quick, workers=workers, progress=progress, note=console.print
    )
    console.print(
        f"done in {time.monotonic() - t0:.0f} s. Simulated participants are marked "
        "synthetic throughout."
    )
    stdout.print(f"report: {report}")
