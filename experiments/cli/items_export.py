"""``twofold items export``: a bank in one medium, for solvers run elsewhere (never the answers)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._console import progress, stdout


def register_items(items_app: typer.Typer) -> None:
    items_app.command("export")(export)


def export(
    bank_dir: Annotated[Path, typer.Argument(help="Bank folder.")],
    as_: Annotated[str, typer.Option("--as", help="Medium: text, picture or structured.")] = "text",
    out: Annotated[Path, typer.Option("-o", "--out", help="Folder to write.")] = Path("export"),
    overwrite: Annotated[bool, typer.Option(help="Replace a non-empty output folder.")] = False,
) -> None:
    """Write every item (each mode) as prompts, pictures or views, with a manifest."""
    from twofold.experiments.machine import export_items
    from twofold.study import load_bank
    from twofold.study.checks import check_choice

    check_choice("--as", as_, ("text", "picture", "structured"))
    bank = load_bank(bank_dir)
    with progress("exporting items", len(bank)) as bar:
        manifest = export_items(bank, out, medium=as_, overwrite=overwrite, progress=bar.advance)
    stdout.print(
        f"wrote {manifest['n_entries']} {as_} entries for {manifest['n_items']} items to {out} "
        f"(bank hash {manifest['bank_hash'][:16]}…)"
    )
