"""Pieces shared by the adapters and the runner: free-text answers, trial failures, reply checks
and secret scrubbing."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

from twofold.experiments.solvers import Answer
from twofold.study.item import canonical_json

__all__ = [
    "MAX_ANSWER_CHARS",
    "MAX_EXPLANATION_CHARS",
    "REDACTED",
    "FreeText",
    "TrialFailure",
    "check_answer",
    "coerce_answer",
    "redact_mapping",
    "scrub",
]

#: longest answer accepted (characters of its canonical JSON); longer replies are ``invalid``
MAX_ANSWER_CHARS = 1_000_000
#: longest explanation accepted (characters)
MAX_EXPLANATION_CHARS = 20_000
#: what a secret is replaced by in every record
REDACTED = "***"
#: secrets shorter than this are not searched for in text (they would match ordinary words)
_MIN_SECRET = 4


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
        if isinstance(effort, int) and not isinstance(effort, bool):
            effort = float(effort)  # anything else but a float is left for check_answer to refuse
        return Answer(
            ans,
            effort=effort,
            effort_unit=value.get("effort_unit") if effort is not None else None,
            explanation=value.get("explanation"),
            raw=value.get("raw"),
        )
    return Answer(value)


def _what(value: Any) -> str:
    try:
        text = repr(value)
    except (RecursionError, ValueError, TypeError):  # too deep, or a broken __repr__
        text = "(unprintable)"
    return f"{type(value).__name__} {text[:60] + '...' if len(text) > 60 else text}"


def check_answer(ans: Answer) -> Answer:
    """Check the fields of a solver's :class:`Answer`; raise ``TrialFailure("invalid")`` if bad.

    Accepted: ``explanation`` text (or none) up to :data:`MAX_EXPLANATION_CHARS`; ``effort`` a
    finite number >= 0 (or none); ``effort_unit`` short text (or none); an ``answer`` that
    serialises to JSON without NaN or infinities, at most :data:`MAX_ANSWER_CHARS` long.
    """

    def bad(field: str, value: Any, accepted: str) -> TrialFailure:
        return TrialFailure(
            "invalid", f"reply field '{field}': got {_what(value)}; accepted: {accepted}"
        )

    if ans.explanation is not None:
        if not isinstance(ans.explanation, str):
            raise bad("explanation", ans.explanation, "text")
        if len(ans.explanation) > MAX_EXPLANATION_CHARS:
            raise bad(
                "explanation",
                f"{len(ans.explanation)} characters",
                f"at most {MAX_EXPLANATION_CHARS} characters",
            )
    if ans.effort is not None and (
        isinstance(ans.effort, bool)
        or not isinstance(ans.effort, int | float)
        or not math.isfinite(ans.effort)
        or ans.effort < 0
    ):
        raise bad("effort", ans.effort, "a finite number >= 0")
    if ans.effort_unit is not None and (
        not isinstance(ans.effort_unit, str) or not 0 < len(ans.effort_unit) <= 40
    ):
        raise bad("effort_unit", ans.effort_unit, "a short unit name (1-40 characters)")
    if ans.answer is not None and not isinstance(ans.answer, FreeText):
        try:
            size = len(canonical_json(ans.answer))
        except (TypeError, ValueError, RecursionError) as err:
            raise bad(
                "answer", ans.answer, f"a JSON value without NaN or infinity ({err})"
            ) from None
        if size > MAX_ANSWER_CHARS:
            raise bad("answer", f"{size} characters", f"at most {MAX_ANSWER_CHARS} characters")
    elif isinstance(ans.answer, FreeText) and len(ans.answer) > MAX_ANSWER_CHARS:
        raise bad("text", f"{len(ans.answer)} characters", f"at most {MAX_ANSWER_CHARS} characters")
    return ans


def scrub(text: Any, secrets: Iterable[str]) -> Any:
    """Replace every secret (of 4 characters or more) in ``text`` by :data:`REDACTED`.

    Non-text values pass through unchanged. Longer secrets are replaced first, so a key that
    contains another is removed whole.
    """
    if not isinstance(text, str):
        return text
    for secret in sorted(
        {s for s in secrets if s and len(s) >= _MIN_SECRET}, key=len, reverse=True
    ):
        if secret in text:
            text = text.replace(secret, REDACTED)
    return text


def redact_mapping(value: Any) -> Any:
    """A copy of a table of secrets (headers, environment) with every value shown as ``***``."""
    if isinstance(value, Mapping):
        return {str(k): REDACTED for k in value}
    return REDACTED if value is not None else None
