"""``twofold run``: participant sessions (``run human``) and machine sessions (``run machine``)."""

from __future__ import annotations

import importlib

import typer

run_app = typer.Typer(
    help="Run sessions for participants or machine solvers.", no_args_is_help=True
)


def register(app: typer.Typer) -> None:
    for name in ("run_human", "run_machine"):
        importlib.import_module(f"{__package__}.{name}").register_run(run_app)
    app.add_typer(run_app, name="run")
