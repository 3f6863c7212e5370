"""The ``command:`` adapter: a child process speaking JSON lines (see ``PROTOCOL.md``)."""

from __future__ import annotations

import shlex
from typing import TYPE_CHECKING

from . import Adapter

if TYPE_CHECKING:  # pragma: no cover
    from twofold.experiments.solvers import Solver

    from ..spec import SolverSpec

__all__ = ["ADAPTER"]

PREFIX = "command:"
#: programs that run a script: the script, not the interpreter, names the solver
_INTERPRETERS = ("python", "node", "ruby", "perl", "julia", "Rscript", "bash", "sh", "java")


def default_name(spec: str) -> str:
    """The script or program name (``command:python3 my_child.py`` -> ``my-child``)."""
    argv = shlex.split(spec[len(PREFIX) :]) or ["command"]
    prog = argv[0]
    if prog.rsplit("/", 1)[-1].startswith(_INTERPRETERS):
        scripts = [a for a in argv[1:] if not a.startswith("-")]
        prog = scripts[0] if scripts else prog
    return prog.rsplit("/", 1)[-1].rsplit(".", 1)[0].replace("_", "-")


def build(spec: SolverSpec, seed: int, where: str) -> Solver:
    """Start the child and check its hello reply.

    The entry's ``medium`` reaches the child as the option ``medium`` (it overrides the child's).
    """
    from ..command import CommandSolver

    options = {**spec.options, "medium": spec.medium} if spec.medium else spec.options
    return CommandSolver(
        spec.spec[len(PREFIX) :],
        options=options,
        seed=seed,
        timeout=spec.timeout,
        name=spec.name,
    )


ADAPTER = Adapter("command", (PREFIX,), "command:ARGV", default_name, build, own_timeout=True)
