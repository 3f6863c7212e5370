"""``twofold forms``: build counterbalanced forms, show one, and write the screen templates."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._console import console, stdout

forms_app = typer.Typer(
    help="Counterbalanced forms and participant screen texts.", no_args_is_help=True
)


def register(app: typer.Typer) -> None:
    app.add_typer(forms_app, name="forms")


@forms_app.command("build")
def build(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    respondents: Annotated[
        int | None, typer.Option("--respondents", "-n", help="Number of forms to make.")
    ] = None,
) -> None:
    """Make counterbalanced forms (block order, lists, item order) into the study's forms folder."""
    from twofold.study import load_study
    from twofold.study.forms import build_forms, write_forms

    study = load_study(study_file)
    forms = build_forms(study, respondents)
    out = write_forms(study, forms)
    n_items = len(forms[0].item_ids())
    console.print(f"{len(forms)} forms, {len(forms[0].blocks)} blocks, {n_items} items each")
    stdout.print(f"wrote {len(forms)} forms to {out}")


@forms_app.command("show")
def show(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    respondent: Annotated[str, typer.Argument(help="Respondent id, e.g. P001.")],
) -> None:
    """Show the form assigned to a respondent (block order and item ids)."""
    from twofold.study import load_study
    from twofold.study.forms import form_for

    form = form_for(load_study(study_file), respondent, assign=False)
    stdout.print(f"{respondent}: form {form.form_id} (list {form.list}, order {form.order})")
    for b in form.blocks:
        stdout.print(f"  {b.name} [{b.mode}] practice {len(b.practice)}, items {len(b.items)}")


@forms_app.command("templates")
def templates(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    overwrite: Annotated[bool, typer.Option(help="Replace existing files.")] = False,
) -> None:
    """Write the consent and instructions templates into the study folder, to be edited."""
    from twofold.experiments.human import write_templates
    from twofold.study import load_study

    for path in write_templates(load_study(study_file), overwrite=overwrite):
        stdout.print(f"wrote {path}")
