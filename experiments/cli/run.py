"""``twofold run``: participant sessions (``run human``) and machine sessions (``run machine``)."""

from __future__ import annotations

import importlib

import typer

run_app = typer.Typer(
    help="Run sessions for participants or machine solvers.", no_args_is_help=True
)


def register(app: typer.Typer) -> None:
    for name in ("run_human", "run_machine"):
        try:
            mod = importlib.import_module(f"{__package__}.{name}")
        except ModuleNotFoundError as err:
            if err.name != f"{__package__}.{name}":
                raise
            continue
        mod.register_run(run_app)
    app.add_typer(run_app, name="run")
