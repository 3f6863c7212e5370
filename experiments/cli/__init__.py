"""The ``twofold`` command: the one place that reaches study, experiments and analysis.

Each command group is one small module registered here; the real work lives in library functions.
Heavy imports (PsychoPy, statsmodels, matplotlib) happen inside commands, never at start-up.
"""

from __future__ import annotations

import sys
from collections.abc import Callable

import typer
from twofold.study.exceptions import TwofoldError
from twofold.study.registry import Registry

from ._console import error

__all__ = ["COMMANDS", "app", "main"]

app = typer.Typer(
    name="twofold",
    help="Define analogy and concept-formation items once; run them for people and machines; "
    "compare both on one scale.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)

# command modules, in the order of the help page: each defines `register(app)`
_COMMANDS = ("items", "forms", "run", "simulate", "analyze", "report", "example", "new")

#: The command groups of ``twofold``: each entry is a ``register(app)`` function adding its
#: commands to the typer app; plugins come through the ``twofold.commands`` entry-point group.
COMMANDS: Registry[Callable[[typer.Typer], None]] = Registry(
    "command",
    builtins={name: f"{__name__}.{name}:register" for name in _COMMANDS},
    group="twofold.commands",
)

for _name in (*_COMMANDS, *(n for n in COMMANDS.names() if n not in _COMMANDS)):
    COMMANDS.get(_name)(app)


def main(argv: list[str] | None = None) -> int:
    """Entry point: run the command; expected errors print one line and exit 2.

    ``--debug`` anywhere on the command line shows the full traceback instead.
    """
    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args
    if debug:
        args.remove("--debug")
    try:
        # without standalone mode, click returns (not raises) the code of typer.Exit(n)
        code = app(args=args, prog_name="twofold", standalone_mode=False)
    except TwofoldError as err:
        if debug:
            raise
        error(str(err))
        return 2
    except KeyboardInterrupt:
        error("interrupted; finished work is kept (run the same command again to resume).")
        return 130
    except Exception as err:  # click usage errors and the like
        import click

        if isinstance(err, click.exceptions.Exit):
            return int(err.exit_code)
        if isinstance(err, click.ClickException):
            if debug:
                raise
            err.show()
            return int(err.exit_code)
        if isinstance(err, click.exceptions.Abort):
            error("aborted.")
            return 1
        raise
    return code if isinstance(code, int) else 0


def _entry() -> None:  # pragma: no cover - console script
    sys.exit(main())
