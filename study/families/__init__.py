"""The registry of item families.

The built-in families are listed by name with the module that defines them; a family's module is
imported the first time the family is asked for (so ``import twofold.study`` stays light). A lab's
own family registers with :func:`register` and is then usable everywhere by name; an installed
package can provide one through the ``twofold.families`` entry-point group (see
:mod:`twofold.study.registry`).
"""

from __future__ import annotations

from ..exceptions import InputError
from ..registry import Registry
from ._base import Family, ParamSpec, Rejected, Score

__all__ = [
    "FAMILIES",
    "Family",
    "ParamSpec",
    "Rejected",
    "Score",
    "get_family",
    "known_families",
    "register",
]


def _check_family(name: str, family: Family) -> None:
    if not isinstance(family, Family):
        raise ValueError(f"family {name!r}: needs a Family instance; got {type(family).__name__}")
    if name != family.name:
        raise ValueError(f"family {family.name!r}: registered under another name, {name!r}")
    if not family.name.isidentifier() or len(family.prefix) != 3 or not family.prefix.isalpha():
        raise ValueError(f"family {family.name!r}: needs an identifier name and a 3-letter prefix")
    if "other" not in family.error_types:
        raise ValueError(f"family {family.name!r}: error_types must include 'other'")


#: Every item family: the built-ins (loaded on first use), families registered at run time and
#: plugins of the ``twofold.families`` entry-point group (whose object is a Family instance).
FAMILIES: Registry[Family] = Registry(
    "family",
    builtins={
        "contrast": f"{__name__}.contrast",
        "grids": f"{__name__}.grids",
        "matrices": f"{__name__}.matrices",
        "strings": f"{__name__}.strings",
    },
    group="twofold.families",
    check=_check_family,
)


def register(family: Family) -> Family:
    """Add a family instance to the registry under its name (replacing one of the same name)."""
    return FAMILIES.register(family.name, family)


def known_families() -> list[str]:
    """Names of the known families, sorted (nothing is imported to list them)."""
    return FAMILIES.names()


def get_family(
    name: str, *, where: str | None = None, error: type[InputError] = InputError
) -> Family:
    """The family called ``name``, loading its module on first use.

    Raises
    ------
    InputError (or ``error``)
        ``field 'family': got 'matrix'; accepted: one of contrast, grids, matrices, strings.``
    """
    return FAMILIES.get(name, where=where, error=error)
