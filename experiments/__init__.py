"""twofold.experiments: who takes the items. Participant and machine sessions, simulated people.

The main entry points are importable from here; they load on first use, so ``import
twofold.experiments`` (which every ``twofold`` command pays) stays cheap and never loads
PsychoPy. The sub-packages hold the rest: :mod:`.machine` (solver specs, adapters, the machine
runner), :mod:`.solvers` (the solver protocol and built-in solvers), :mod:`.human` (the
participant runner), :mod:`.simulate` (simulated respondents) and :mod:`.cli` (the command).
"""

from __future__ import annotations

import importlib as _importlib
import typing as _typing

if _typing.TYPE_CHECKING:
    from .human import RunnerOptions, SessionPlan, prepare_session, run_session
    from .machine import (
        SolverSpec,
        build_solver,
        check_solver,
        export_items,
        import_answers,
        run_solvers,
    )
    from .simulate import SimulationSettings, simulate_humans
    from .solvers import Answer, Solver

#: public name -> the sub-package that defines it
_HOME = {
    "Answer": "solvers",
    "RunnerOptions": "human",
    "SessionPlan": "human",
    "SimulationSettings": "simulate",
    "Solver": "solvers",
    "SolverSpec": "machine",
    "build_solver": "machine",
    "check_solver": "machine",
    "export_items": "machine",
    "import_answers": "machine",
    "prepare_session": "human",
    "run_session": "human",
    "run_solvers": "machine",
    "simulate_humans": "simulate",
}

__all__ = [
    "Answer",
    "RunnerOptions",
    "SessionPlan",
    "SimulationSettings",
    "Solver",
    "SolverSpec",
    "build_solver",
    "check_solver",
    "export_items",
    "import_answers",
    "prepare_session",
    "run_session",
    "run_solvers",
    "simulate_humans",
]


def __getattr__(name: str) -> _typing.Any:
    if name == "__version__":  # one version for the three packages, kept in twofold.study
        from twofold.study import __version__

        return __version__
    home = _HOME.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(_importlib.import_module(f"{__name__}.{home}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
