"""``twofold new``: scaffold a study folder a lab can edit."""

from __future__ import annotations

from importlib import resources
from pathlib import Path
from typing import Annotated

import typer

from ._console import console, stdout


def register(app: typer.Typer) -> None:
    app.command("new")(new)


def scaffold(folder: Path) -> list[Path]:
    """Write study.toml, generate.toml, the consent template and instruction templates."""
    from twofold.experiments.human.prepare import write_templates
    from twofold.study import load_study
    from twofold.study.exceptions import InputError

    if folder.exists() and any(folder.iterdir()):
        raise InputError(
            f"{folder}: folder exists and is not empty; choose a new folder.", field="DIR"
        )
    folder.mkdir(parents=True, exist_ok=True)
    src = resources.files("twofold.experiments").joinpath("templates")
    written = []
    for name in ("study.toml", "generate.toml"):
        (folder / name).write_text(src.joinpath(name).read_text("utf-8"), encoding="utf-8")
        written.append(folder / name)
    written += write_templates(load_study(folder))
    return written


def new(folder: Annotated[Path, typer.Argument(help="A new folder for the study.")]) -> None:
    """Scaffold a study folder: study.toml, generation spec, consent and instruction templates."""
    for path in scaffold(folder):
        console.print(f"wrote {path}")
    stdout.print(
        f"new study in {folder}: edit consent.txt (your ethics board's approved text) "
        "and the instructions, then `twofold items generate "
        f"{folder / 'study.toml'} -o {folder / 'bank'}`."
    )
