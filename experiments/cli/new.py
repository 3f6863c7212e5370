"""``twofold new``: scaffold a study folder a lab can edit, and say every step to a report."""

from __future__ import annotations

from importlib import resources
from pathlib import Path
from typing import Annotated, Any

import typer

from ._console import console, stdout

__all__ = ["next_steps", "scaffold"]


def register(app: typer.Typer) -> None:
    app.command("new")(new)


def _instructions_template(block: Any) -> str:
    """The template name for a block: its (first) family and mode, or the generic text."""
    fams = block.get("families") or []
    name = f"instructions-{fams[0]}-{block.get('mode')}.txt" if fams else ""
    src = resources.files("twofold.experiments").joinpath("templates")
    return name if name and src.joinpath(name).is_file() else "instructions.txt"


def scaffold(folder: Path) -> list[Path]:
    """Write study.toml, generate.toml, the consent template and one instructions file per block.

    Each block's instructions come from the template for its family and response mode (all four
    families are in the scaffold); the consent text is a template the lab must replace.
    """
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
    study = load_study(folder)
    for block in study.table("blocks") or []:
        path = folder / block["instructions"]
        if path.exists():
            continue
        path.parent.mkdir(parents=True, exist_ok=True)
        text = src.joinpath(_instructions_template(block)).read_text("utf-8")
        path.write_text(text, encoding="utf-8")
        written.append(path)
    written += write_templates(study)
    return written


def next_steps(folder: Path) -> list[str]:
    """The commands from a scaffolded folder to a report, in order, one line each."""
    st = folder / "study.toml"
    return [
        f"1. edit {folder / 'consent.txt'} (your ethics board's approved text) and "
        f"{folder / 'instructions'}/*.txt; choose families and sizes in {folder / 'generate.toml'}",
        f"2. twofold items generate {folder / 'generate.toml'} -o {folder / 'bank'}"
        "   (the bank: every item once)",
        f"3. twofold items audit {folder / 'bank'}   (duplicates, shortcuts, answer positions)",
        f"4. twofold forms build {st}   (counterbalanced forms; `twofold forms show {st} F001`)",
        f"5. twofold simulate {st}   (synthetic pilot respondents, in logs/simulated)",
        f"6. twofold run machine {st}   (the [[solvers]] of study.toml)",
        f"7. twofold run human {st} --respondent P001   (real sessions: only with ethics approval)",
        f"8. twofold analyze {st}, then twofold report {st}",
        f"   twofold status {st} shows where the study stands and the next command",
    ]


def new(folder: Annotated[Path, typer.Argument(help="A new folder for the study.")]) -> None:
    """Scaffold a study with all four families; print the steps from here to a report."""
    for path in scaffold(folder):
        console.print(f"wrote {path}")
    stdout.print(f"new study in {folder}. Next steps:", markup=False, highlight=False)
    for line in next_steps(folder):
        stdout.print(line, markup=False, highlight=False, soft_wrap=True)
