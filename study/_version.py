"""The installed version of twofold (and of the packages whose versions results record)."""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version

__all__ = ["__version__", "package_version"]


def package_version(name: str) -> str | None:
    """The installed version of distribution ``name``, or None when it is not installed."""
    try:
        return version(name)
    except PackageNotFoundError:
        return None


#: twofold's version, recorded in banks, logs, exports and reports ("0+unknown" when twofold
#: runs from a source tree that was never installed)
__version__: str = package_version("twofold") or "0+unknown"
