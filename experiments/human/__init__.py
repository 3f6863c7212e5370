"""The participant runner: a PsychoPy session per respondent, logged trial by trial.

Only :mod:`twofold.experiments.human.runner` and :mod:`.screens` import PsychoPy, and only when a
session starts; preparing and checking a session (:func:`prepare_session`) needs no display.
"""

from .prepare import (
    BANNER,
    RunnerOptions,
    SessionPlan,
    check_respondent,
    parse_runner,
    prepare_session,
    write_templates,
)


def run_session(plan: SessionPlan):  # noqa: ANN201 - lazy wrapper, see runner.run_session
    """Open the window and run a prepared session (imports PsychoPy)."""
    from .runner import run_session as _run

    return _run(plan)


__all__ = [
    "BANNER",
    "RunnerOptions",
    "SessionPlan",
    "check_respondent",
    "parse_runner",
    "prepare_session",
    "run_session",
    "write_templates",
]
