"""``twofold analyze``: run a study's analysis and write every table to its results folder."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._console import console, progress, stdout


def register(app: typer.Typer) -> None:
    app.command("analyze")(analyze)


def analyze(
    study: Annotated[Path, typer.Argument(help="The study file (study.toml) or its folder.")],
    out: Annotated[
        Path | None, typer.Option("-o", "--out", help="Output folder (default: results/).")
    ] = None,
    only: Annotated[
        str | None,
        typer.Option(help="Comma-separated parts, e.g. irt,agreement (default: all)."),
    ] = None,
) -> None:
    """Analyse a study's logs: IRT, mixed models, agreement, errors, robustness; CSV + JSON."""
    from twofold.analysis.run import analyze_study, parse_parts
    from twofold.study import load_study

    parts = parse_parts(only)
    st = load_study(study)
    if not st.bank_dir.exists():
        from twofold.study.exceptions import SpecError

        raise SpecError(
            f"{st.bank_dir}: no bank yet, so nothing to analyze; collect sessions first "
            f"(`twofold simulate {st.file}` or `twofold run ...` generate the bank from the "
            f"spec); `twofold status {st.file}` shows the next step."
        )
    with progress("analysing", len(parts)) as bar:
        run = analyze_study(
            st,
            out_dir=out,
            parts=parts,
            progress=lambda part: bar.advance(1),
            timing=lambda name, secs: bar.note(f"{name}: {secs:.1f} s"),
        )
    for part, entry in run.summary["parts"].items():
        if entry["status"] != "ok":
            console.print(f"{part}: skipped ({entry['reason']})", markup=False)
        for w in entry["warnings"]:
            console.print(f"{part}: warning: {w}", markup=False)
    stdout.print(f"wrote {len(run.tables)} tables and summary.json to {run.out_dir}", markup=False)
