"""The installed version of twofold (and of the packages whose versions results record).

``__version__`` is read from the installed package metadata on first use, so importing
twofold does not pay for :mod:`importlib.metadata`.
"""

from __future__ import annotations

import functools
from typing import Any

__all__ = ["package_version", "twofold_version"]


@functools.cache
def package_version(name: str) -> str | None:
    """The installed version of distribution ``name``, or None when it is not installed."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version(name)
    except PackageNotFoundError:
        return None


def twofold_version() -> str:
    """twofold's version, recorded in banks, logs, exports and reports (``"0+unknown"`` when
    twofold runs from a source tree that was never installed)."""
    return package_version("twofold") or "0+unknown"


def __getattr__(name: str) -> Any:
    if name == "__version__":
        return twofold_version()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
