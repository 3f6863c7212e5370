"""One helper and one message template for checking input at public boundaries."""

from __future__ import annotations

import json
from collections.abc import Iterable
from typing import Any

from .exceptions import InputError


def describe(value: Any) -> str:
    """Short printable form of a received value for error messages."""
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def message(field: str, got: Any, accepted: str, *, where: str | None = None) -> str:
    """Build the one error message template used across twofold.

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
    """Return (for ``raise``) an error built from the common template."""
    return error(message(field, got, accepted, where=where), where=where, field=field)


def check_choice(
    field: str,
    value: Any,
    options: Iterable[Any],
    *,
    where: str | None = None,
    error: type[InputError] = InputError,
) -> Any:
    """Check that ``value`` is one of ``options`` and return it."""
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
