"""Checks of user input at public boundaries, and the one message they all use.

Every error about bad input in twofold reads the same way, whoever raises it::

    <where>: field '<field>': got <value>; accepted: <what is accepted>.

for example ``items.jsonl line 17: field 'family': got 'matrix'; accepted: one of contrast,
grids, matrices, strings.`` ``where`` names the file, line, table or object (left out when the
caller has no place to name); ``field`` the parameter, key or column; the received value is
shown shortened (:func:`describe`); ``accepted`` says in words what would have been fine.

:func:`message` builds that text and :func:`fail` wraps it in an error class from
:mod:`twofold.study.exceptions` (an :class:`~twofold.study.exceptions.InputError` or one of its
subclasses) carrying ``where`` and ``field`` as attributes. The ``check_*`` helpers check one
kind of value and raise such an error; :func:`parse_json` reads strict JSON with errors in the
same words. Plugins (a lab's own family, solver or adapter) use them to speak like the rest of
twofold.

Examples
--------
>>> from twofold.study.checks import check_int, message
>>> message("seeds", 0, "an integer from 1 to 1000", where="study.toml: solvers[0]")
"study.toml: solvers[0]: field 'seeds': got 0; accepted: an integer from 1 to 1000."
>>> check_int("n", 3, low=1)
3
>>> check_int("n", 0, low=1)
Traceback (most recent call last):
...
twofold.study.exceptions.InputError: field 'n': got 0; accepted: an integer from 1 to inf.
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from typing import Any

from .exceptions import InputError

__all__ = [
    "MAX_DEPTH",
    "check_choice",
    "check_int",
    "check_keys",
    "check_number",
    "describe",
    "fail",
    "message",
    "parse_json",
]


def describe(value: Any) -> str:
    """Short printable form of a received value: its ``repr``, cut to 60 characters."""
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def message(field: str, got: Any, accepted: str, *, where: str | None = None) -> str:
    """Build the one error message used across twofold.

    Parameters
    ----------
    field : str
        The parameter, key or column at fault.
    got : Any
        The value received (shown through :func:`describe`).
    accepted : str
        What would have been accepted, in words (no final full stop).
    where : str, optional
        The place: a file, ``"<file> line <n>"``, a table or an object name.

    Returns
    -------
    str
        ``<where>: field '<field>': got <value>; accepted: <accepted>.``
    """
    prefix = f"{where}: " if where else ""
    return f"{prefix}field '{field}': got {describe(got)}; accepted: {accepted}."


def fail(
    field: str,
    got: Any,
    accepted: str,
    *,
    where: str | None = None,
    error: type[InputError] = InputError,
) -> InputError:
    """The error to raise for a bad value: ``raise fail("n", n, "a positive integer")``.

    Parameters
    ----------
    field, got, accepted, where
        As for :func:`message`.
    error : type, default InputError
        The class to build: :class:`~twofold.study.exceptions.InputError` or a subclass
        (``SpecError``, ``ItemError``...). It receives the message, ``where`` and ``field``.

    Returns
    -------
    InputError
        Not raised here, so the caller's ``raise`` shows where the check failed.
    """
    return error(message(field, got, accepted, where=where), where=where, field=field)


def check_choice(
    field: str,
    value: Any,
    options: Iterable[Any],
    *,
    where: str | None = None,
    error: type[InputError] = InputError,
) -> Any:
    """Check that ``value`` is one of ``options`` and return it.

    The message lists the options sorted by their text (``accepted: one of a, b, c``).
    """
    opts = list(options)
    if value not in opts:
        accepted = "one of " + ", ".join(str(o) for o in sorted(opts, key=str))
        raise fail(field, value, accepted, where=where, error=error)
    return value


def check_int(
    field: str,
    value: Any,
    *,
    low: int | None = None,
    high: int | None = None,
    where: str | None = None,
    error: type[InputError] = InputError,
) -> int:
    """Check that ``value`` is an int (not bool) within ``[low, high]`` and return it."""
    lo = "-inf" if low is None else str(low)
    hi = "inf" if high is None else str(high)
    accepted = f"an integer from {lo} to {hi}"
    if isinstance(value, bool) or not isinstance(value, int):
        raise fail(field, value, accepted, where=where, error=error)
    if (low is not None and value < low) or (high is not None and value > high):
        raise fail(field, value, accepted, where=where, error=error)
    return value


def check_number(
    field: str,
    value: Any,
    *,
    low: float | None = None,
    high: float | None = None,
    where: str | None = None,
    error: type[InputError] = InputError,
) -> float:
    """Check that ``value`` is a real number within ``[low, high]`` and return it as float."""
    lo = "-inf" if low is None else str(low)
    hi = "inf" if high is None else str(high)
    accepted = f"a number from {lo} to {hi}"
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise fail(field, value, accepted, where=where, error=error)
    if (low is not None and value < low) or (high is not None and value > high):
        raise fail(field, value, accepted, where=where, error=error)
    return float(value)


def check_keys(
    table: Any,
    accepted: Iterable[str],
    *,
    prefix: str = "",
    where: str | None = None,
    error: type[InputError] = InputError,
) -> None:
    """Check that every key of a table (dict) is one of ``accepted``.

    The message names the first unknown key (as ``<prefix><key>``) and lists the accepted keys.
    """
    names = list(accepted)
    for key in table:
        if key not in names:
            raise fail(
                f"{prefix}{key}",
                table[key],
                "the keys " + ", ".join(names),
                where=where,
                error=error,
            )


#: deepest nesting of arrays and objects accepted in a record (far above any family's needs)
MAX_DEPTH = 32


def _depth_ok(text: str) -> bool:
    depth = 0
    in_str = esc = False
    for ch in text:
        if in_str:
            if esc:
                esc = False
            elif ch == "\\":
                esc = True
            elif ch == '"':
                in_str = False
        elif ch == '"':
            in_str = True
        elif ch in "[{":
            depth += 1
            if depth > MAX_DEPTH:
                return False
        elif ch in "]}":
            depth -= 1
    return True


def _no_constant(name: str) -> Any:
    raise ValueError(name)


def parse_json(data: bytes, *, where: str, error: type[InputError] = InputError) -> Any:
    """Parse strict JSON: UTF-8, no NaN/Infinity, nesting at most :data:`MAX_DEPTH` deep."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        raise error(
            f"{where}: byte {err.start}: not UTF-8 text; accepted: JSON saved as UTF-8.",
            where=where,
        ) from None
    if not _depth_ok(text):
        raise error(
            f"{where}: JSON nested more than {MAX_DEPTH} levels deep; accepted: a record at most "
            f"{MAX_DEPTH} levels deep.",
            where=where,
        )
    try:
        return json.loads(text, parse_constant=_no_constant)
    except json.JSONDecodeError as err:
        raise error(
            f"{where}: not valid JSON ({err.msg} at column {err.colno}).", where=where
        ) from None
    except ValueError as err:
        raise error(
            f"{where}: {err} is not a JSON number; accepted: finite numbers only.", where=where
        ) from None
