"""An example outside solver for ``python:`` specs: a plain function and a class.

Use it as ``python:twofold.experiments.machine.examples.python_solver:solve`` (the function) or
``python:twofold.experiments.machine.examples.python_solver:FirstChoice`` (a class built with the
``[solvers.options]`` table and the session seed). Your own module works the same way once it is
importable (installed, or on ``PYTHONPATH``).

A solver returns the answer itself, a dict ``{"answer": ..., "effort": ..., "effort_unit": ...}``
or ``{"text": "free text"}`` (the item's family then extracts the answer), or a
``twofold.experiments.solvers.Answer``.
"""

from __future__ import annotations

from typing import Any

#: the view this module wants; the runner renders items in it
medium = "structured"


def solve(view: dict[str, Any], mode: str) -> dict[str, Any]:
    """Pick the last choice in select mode; in generate mode, say nothing useful."""
    if mode == "select":
        return {"answer": len(view["choices"]), "effort": 1, "effort_unit": "guesses"}
    return {"text": "no idea", "effort": 1, "effort_unit": "guesses"}


class FirstChoice:
    """Pick choice ``k`` (option ``k``, default 1) in select mode; abstain in generate mode."""

    medium = "structured"

    def __init__(self, *, seed: int = 0, k: int = 1):
        self.seed, self.k = seed, k

    def solve(self, view: dict[str, Any], mode: str) -> dict[str, Any]:
        if mode == "select":
            return {
                "answer": min(self.k, len(view["choices"])),
                "effort": 1,
                "effort_unit": "guesses",
            }
        return {"answer": None, "explanation": "abstains in generate mode"}
