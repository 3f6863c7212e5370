"""Pieces shared by the adapters and the runner: free-text answers and trial failures."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from twofold.experiments.solvers import Answer

__all__ = ["FreeText", "TrialFailure", "coerce_answer"]


class FreeText(str):
    """An answer given as free text; the runner extracts the response with the item's family.

    Adapters for language models return ``Answer(FreeText(reply))``; the runner then calls
    ``family.parse_text(item, reply, mode)``, so extraction is family-aware.
    """

    __slots__ = ()


class TrialFailure(Exception):  # noqa: N818 - a per-trial outcome, caught by the runner
    """Raised by an adapter when one trial cannot produce an answer; the sweep goes on.

    Parameters
    ----------
    status : {"failed", "timeout", "invalid"}
        The trial status to log.
    reason : str
        One line saying what happened (goes to the ``detail`` column). Never holds secrets.
    raw : str, optional
        Raw output to keep with the reason (e.g. an unparseable reply body).
    """

    def __init__(self, status: str, reason: str, *, raw: str | None = None):
        super().__init__(reason)
        self.status = status
        self.reason = reason
        self.raw = raw


def coerce_answer(value: Any) -> Answer:
    """Turn what a user's solver returned into an :class:`Answer`.

    An ``Answer`` passes through; a mapping with ``answer`` or ``text`` keys (plus optional
    ``effort``, ``effort_unit``, ``explanation``) becomes one (``text`` as :class:`FreeText`);
    anything else is the answer itself.
    """
    if isinstance(value, Answer):
        return value
    if isinstance(value, Mapping) and ("answer" in value or "text" in value):
        ans = value.get("answer")
        if ans is None and value.get("text") is not None:
            ans = FreeText(str(value["text"]))
        effort = value.get("effort")
        if isinstance(effort, bool) or not isinstance(effort, int | float):
            effort = None
        return Answer(
            ans,
            effort=None if effort is None else float(effort),
            effort_unit=value.get("effort_unit") if effort is not None else None,
            explanation=value.get("explanation"),
            raw=value.get("raw"),
        )
    return Answer(value)
