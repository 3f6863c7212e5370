"""An example outside solver for ``python:`` specs: a plain function and a class.

Use it as ``python:twofold.experiments.machine.examples.python_solver:solve`` (the function) or
``python:twofold.experiments.machine.examples.python_solver:FirstChoice`` (a class built with the
``[solvers.options]`` table and the session seed). Your own module works the same way: a
``my_model.py`` in the folder the command runs in is found as ``python:my_model:solve``.

The contract, in short (the README's "Plug in your model" has it in full):

* ``solve(view, mode)`` is called once per trial. ``mode`` is ``"generate"`` or ``"select"``;
  ``view`` is the item in the solver's medium: a ``str`` prompt (``text``), a ``dict``
  (``structured``; ``view["choices"]`` in select mode) or PNG ``bytes`` (``picture``).
* The medium is the first of: the ``[[solvers]]`` entry's ``medium``, the option ``medium``, a
  ``medium`` attribute on the class, object or function, a module-level ``medium`` beside a
  function (as here), else ``structured``.
* It returns the answer itself, a dict ``{"answer": ..., "effort": ..., "effort_unit": ...,
  "explanation": ..., "raw": ...}`` (only ``answer`` needed), ``{"text": "free text"}`` (the
  item's family then extracts the answer), or a ``twofold.experiments.solvers.Answer``.
* A class may declare ``version`` (part of the trial-cache key) and ``close()``.
"""

from __future__ import annotations

from typing import Any

#: the view ``solve`` below wants; the runner renders items in it (FirstChoice declares its own)
medium = "structured"


def solve(view: dict[str, Any], mode: str) -> dict[str, Any]:
    """Pick the last choice in select mode; in generate mode, say nothing useful."""
    if mode == "select":
        return {"answer": len(view["choices"]), "effort": 1, "effort_unit": "guesses"}
    return {"text": "no idea", "effort": 1, "effort_unit": "guesses"}


class FirstChoice:
    """Pick choice ``k`` (option ``k``, default 1) in select mode; abstain in generate mode."""

    medium = "structured"
    version = "1"

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
