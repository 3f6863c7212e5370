"""Machine sessions: solver specs, adapters, the runner with its trial cache, export and import.

A solver is named by a spec (a built-in name, ``python:MODULE:ATTRIBUTE``, ``command:ARGV`` or
``http:URL``), built with :func:`build_solver`, and run over a study's bank by
:func:`run_solvers`, which writes one machine session per solver and seed through the trial log
and caches every finished trial so a rerun resumes. :func:`export_items` and
:func:`import_answers` let solvers run elsewhere take part.
"""

from ._core import FreeText, TrialFailure, coerce_answer
from .cache import TrialCache
from .chat import ChatSolver
from .check import CHECK_COLUMNS, check_solver
from .command import PROTOCOL, PROTOCOL_VERSION, CommandSolver
from .exchange import export_items, import_answers
from .lock import SweepLock
from .runner import SUMMARY_COLUMNS, plan_trials, run_solvers, run_trial
from .spec import SolverSpec, build_solver, parse_solver_entry, solver_from_string, study_solvers

__all__ = [
    "CHECK_COLUMNS",
    "PROTOCOL",
    "PROTOCOL_VERSION",
    "SUMMARY_COLUMNS",
    "ChatSolver",
    "CommandSolver",
    "FreeText",
    "SolverSpec",
    "SweepLock",
    "TrialCache",
    "TrialFailure",
    "build_solver",
    "check_solver",
    "coerce_answer",
    "export_items",
    "import_answers",
    "parse_solver_entry",
    "plan_trials",
    "run_solvers",
    "run_trial",
    "solver_from_string",
    "study_solvers",
]
