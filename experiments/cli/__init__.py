"""The ``twofold`` command: the one place that reaches study, experiments and analysis.

Each command group is one small module registered here; the real work lives in library functions.
Heavy imports (PsychoPy, statsmodels, matplotlib) happen inside commands, never at start-up.
"""

from __future__ import annotations

import importlib
import sys
from collections.abc import Callable
from typing import Any

import typer
from twofold.study.exceptions import TwofoldError
from twofold.study.registry import Registry

from ._console import error

__all__ = ["COMMANDS", "app", "main", "usage_message"]

app = typer.Typer(
    name="twofold",
    help="Define analogy and concept-formation items once; run them for people and machines; "
    "compare both on one scale.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)

# command modules, in the order of the help page: each defines `register(app)`
_COMMANDS = (
    "items",
    "forms",
    "run",
    "simulate",
    "analyze",
    "report",
    "status",
    "example",
    "new",
)

#: The command groups of ``twofold``: each entry is a ``register(app)`` function adding its
#: commands to the typer app; plugins come through the ``twofold.commands`` entry-point group.
COMMANDS: Registry[Callable[[typer.Typer], None]] = Registry(
    "command",
    builtins={name: f"{__name__}.{name}:register" for name in _COMMANDS},
    group="twofold.commands",
)

for _name in (*_COMMANDS, *(n for n in COMMANDS.names() if n not in _COMMANDS)):
    COMMANDS.get(_name)(app)


def _click_modules() -> list[Any]:
    """The click exception modules in use: click's own and the copy newer typers bundle."""
    mods = []
    for name in ("click.exceptions", "typer._click.exceptions", "typer.exceptions"):
        try:
            mods.append(importlib.import_module(name))
        except ImportError:
            continue
    return mods


def _classes(name: str) -> tuple[type[BaseException], ...]:
    found = (getattr(m, name, None) for m in _click_modules())
    return tuple(c for c in found if isinstance(c, type) and issubclass(c, BaseException))


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def usage_message(err: BaseException) -> str:
    """One line for a command-line usage error (unknown option or command, bad value...)."""
    ctx = getattr(err, "ctx", None)
    path = getattr(ctx, "command_path", None) or "twofold"
    if _classes("NoArgsIsHelpError") and isinstance(err, _classes("NoArgsIsHelpError")):
        lister = getattr(getattr(ctx, "command", None), "list_commands", None)
        names = list(lister(ctx)) if callable(lister) else list(_COMMANDS)
        return f"no command given; accepted: one of {', '.join(names)} ({path} --help)."
    fmt = getattr(err, "format_message", None)
    text = _one_line(fmt() if callable(fmt) else str(err))
    return f"{text.rstrip('.')} ({path} --help shows the usage)."


def _bare_group(args: list[str]) -> str | None:
    """The usage error of a command group named without a command (before click prints help)."""
    cmd: Any = typer.main.get_command(app)
    path = ["twofold"]
    for token in args:
        subs = getattr(cmd, "commands", None)
        if token.startswith("-") or not isinstance(subs, dict) or token not in subs:
            return None
        cmd = subs[token]
        path.append(token)
    subs = getattr(cmd, "commands", None)
    if not isinstance(subs, dict):
        return None
    return (
        f"no command given; accepted: one of {', '.join(sorted(subs))} ({' '.join(path)} --help)."
    )


def main(argv: list[str] | None = None) -> int:
    """Entry point: run the command; expected errors print one line and exit 2.

    Usage errors (unknown option or command, a bad value, a missing argument, no command) also
    print one line and exit 2, whichever click the installed typer raises (its own bundled copy
    in newer versions, click itself in older ones). ``--debug`` anywhere on the command line
    shows the full traceback instead.
    """
    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args
    if debug:
        args.remove("--debug")
    bare = _bare_group(args)
    if bare is not None:
        error(bare)
        return 2
    try:
        # without standalone mode, click returns (not raises) the code of typer.Exit(n)
        code = app(args=args, prog_name="twofold", standalone_mode=False)
    except TwofoldError as err:
        if debug:
            raise
        error(_one_line(str(err)))
        return 2
    except KeyboardInterrupt:
        error("interrupted; finished work is kept (run the same command again to resume).")
        return 130
    except Exception as err:
        if isinstance(err, _classes("Exit")):
            return int(getattr(err, "exit_code", 0) or 0)
        if isinstance(err, _classes("UsageError")):
            if debug:
                raise
            error(usage_message(err))
            return 2
        if isinstance(err, _classes("ClickException")):
            if debug:
                raise
            error(_one_line(err.format_message()))  # type: ignore[attr-defined]
            return int(getattr(err, "exit_code", 1) or 1)
        if isinstance(err, _classes("Abort")):
            error("aborted.")
            return 1
        raise
    return code if isinstance(code, int) else 0


def _entry() -> None:  # pragma: no cover - console script
    sys.exit(main())
