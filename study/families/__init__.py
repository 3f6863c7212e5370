"""The registry of item families.

Families register themselves when their module is imported; the built-in ones are imported here.
A lab's own family registers with :func:`register` and is then usable everywhere by name.
"""

from __future__ import annotations

from .._check import fail
from ..exceptions import InputError
from ._base import Family, ParamSpec, Rejected, Score

__all__ = ["Family", "ParamSpec", "Rejected", "Score", "get_family", "known_families", "register"]

_REGISTRY: dict[str, Family] = {}


def register(family: Family) -> Family:
    """Add a family instance to the registry (replacing one of the same name)."""
    if not family.name.isidentifier() or len(family.prefix) != 3 or not family.prefix.isalpha():
        raise ValueError(f"family {family.name!r}: needs an identifier name and a 3-letter prefix")
    if "other" not in family.error_types:
        raise ValueError(f"family {family.name!r}: error_types must include 'other'")
    _REGISTRY[family.name] = family
    return family


def known_families() -> list[str]:
    """Names of the registered families, sorted."""
    return sorted(_REGISTRY)


def get_family(
    name: str, *, where: str | None = None, error: type[InputError] = InputError
) -> Family:
    """The registered family called ``name``.

    Raises
    ------
    InputError (or ``error``)
        ``field 'family': got 'matrix'; accepted: one of contrast, grids, matrices, strings.``
    """
    try:
        return _REGISTRY[name]
    except (KeyError, TypeError):
        raise fail(
            "family", name, "one of " + ", ".join(known_families()), where=where, error=error
        ) from None


# the built-in families register themselves on import
from . import contrast, grids, matrices, strings  # noqa: E402,F401
