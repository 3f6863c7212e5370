"""One helper and one message template for checking input at public boundaries."""

from __future__ import annotations

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
