"""``twofold report``: the study's self-contained HTML report."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._console import progress, stdout


def register(app: typer.Typer) -> None:
    app.command("report")(report)


def report(
    study_file: Annotated[Path, typer.Argument(help="The study.toml (or its folder).")],
    out: Annotated[
        Path | None,
        typer.Option("-o", "--out", help="Report folder (default: the study's report/)."),
    ] = None,
) -> None:
    """Write report.html (figures inlined) and every figure as SVG and PNG."""
    from twofold.analysis.report import SECTIONS, build_report

    with progress("report", len(SECTIONS)) as bar:
        path = build_report(study_file, out_dir=out, progress=lambda name: bar.advance(1))
    stdout.print(f"report: {path}")
