"""``twofold forms``: build counterbalanced forms, show one, and write the screen templates."""

from __future__ import annotations

import contextlib
from pathlib import Path
from typing import Annotated, Any

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

    from .simulate import bank_notice

    study = load_study(study_file)
    bank_notice(study)
    forms = build_forms(study, respondents)
    out = write_forms(study, forms)
    n_items = len(forms[0].item_ids())
    console.print(f"{len(forms)} forms, {len(forms[0].blocks)} blocks, {n_items} items each")
    stdout.print(f"wrote {len(forms)} forms to {out}")


@forms_app.command("show")
def show(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    respondent: Annotated[
        str, typer.Argument(help="Respondent id with a form (e.g. P001) or a form id (F001).")
    ],
) -> None:
    """Show a form in presentation order: its blocks, practice items and item ids by trial."""
    from twofold.study import load_study
    from twofold.study.forms import form_for, load_forms

    study = load_study(study_file)
    by_id = {f.form_id: f for f in load_forms(study)}
    if respondent in by_id:
        form, who = by_id[respondent], None
    else:
        form, who = form_for(study, respondent, assign=False), respondent
    for line in form_lines(form, who):
        stdout.print(line, markup=False, highlight=False)


def form_lines(form: Any, who: str | None) -> list[str]:
    """The lines of ``forms show``: header, then per block its practice ids and trials."""
    n = len(form.item_ids())
    lines = [
        (f"{who}: " if who else "")
        + f"form {form.form_id} (list {form.list}, block order {form.order}; "
        f"{len(form.blocks)} blocks, {n} trials)"
    ]
    trial = 0
    for k, b in enumerate(form.blocks, start=1):
        lines.append(
            f"block {k} {b.name} [{b.mode}]: {len(b.practice)} practice, {len(b.items)} items"
        )
        if b.practice:
            lines.append("  practice: " + " ".join(b.practice))
        for j, item_id in enumerate(b.items):
            if j and form.break_every and j % form.break_every == 0:
                lines.append("  -- break --")
            lines.append(f"  trial {trial:>3}  {item_id}")
            trial += 1
        if form.break_between_blocks and k < len(form.blocks):
            lines.append("  -- break --")
    return lines


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


def parse_size(text: str) -> tuple[int, int]:
    """``WIDTHxHEIGHT`` (e.g. ``1024x768``) as a checked window size in pixels."""
    import re

    from twofold.study.checks import check_int, fail
    from twofold.study.exceptions import SpecError

    accepted = "WIDTHxHEIGHT in pixels, e.g. 1024x768 (width 640-8192, height 480-8192)"
    m = re.fullmatch(r"\s*(\d+)\s*[xX]\s*(\d+)\s*", text or "")
    if not m:
        raise fail("--size", text, accepted, error=SpecError)
    w = check_int("--size", int(m.group(1)), low=640, high=8192, error=SpecError)
    h = check_int("--size", int(m.group(2)), low=480, high=8192, error=SpecError)
    return w, h


@forms_app.command("preview")
def preview(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the PNGs and index.json.")],
    form: Annotated[
        str | None, typer.Option("--form", help="Form id (default: the first form).")
    ] = None,
    list_no: Annotated[
        int | None, typer.Option("--list", help="Preview the first form of this list.")
    ] = None,
    size: Annotated[
        str | None,
        typer.Option(
            "--size",
            help="Window size WIDTHxHEIGHT (default: the size in the study's runner table).",
        ),
    ] = None,
    respondent: Annotated[
        str | None,
        typer.Option(
            "--respondent",
            help="Whose choice orders to show (default: the form's respondent, or EXAMPLE).",
        ),
    ] = None,
) -> None:
    """Paint every screen a participant of a form sees to numbered PNGs, without a participant.

    Consent pages, instructions, practice items and their feedback, every trial, breaks and the
    end screen, drawn by the session's own screens in a window (a desktop or a virtual display
    such as Xvfb); writes index.json beside the PNGs and never writes logs.
    """
    from twofold.experiments.human.runner import preview_form

    from ._console import progress

    win = parse_size(size) if size is not None else None
    state: dict[str, Any] = {}

    def on_start(f: Any, who: str, n: int) -> None:
        console.print(
            f"form {f.form_id} (list {f.list}): choice orders as shown to respondent {who}"
        )
        state["bar"] = stack.enter_context(progress("preview", n))

    def on_step(step: Any) -> None:
        state["bar"].advance()

    with contextlib.ExitStack() as stack:
        index = preview_form(
            study_file,
            out,
            form_id=form,
            list_no=list_no,
            size=win,
            respondent=respondent,
            on_start=on_start,
            on_step=on_step,
        )
    stdout.print(
        f"wrote {len(index['screens'])} screens ({index['size'][0]}x{index['size'][1]}) and "
        f"index.json to {out}",
        markup=False,
        highlight=False,
    )
