"""One small registry type for every pluggable part of twofold.

Item families, built-in solvers, solver adapters, participant screens and the commands of the
``twofold`` program are each kept in a :class:`Registry`. A registry knows three sources of
entries, all explicit:

1. **Built-ins**: a fixed mapping from name to where the entry lives: ``"package.module"`` (a
   module that registers the name when it is imported) or ``"package.module:attribute"`` (the
   attribute is registered under the name). The module is imported on the first
   :meth:`Registry.get` of the name, so listing the names costs nothing and an unused family
   never loads its dependencies.
2. **Registered at run time**: :meth:`Registry.register` (or its decorator form
   :meth:`Registry.add`), e.g. a lab's own family defined in a script.
3. **Plugins**: installed packages that declare an entry point in the registry's group, e.g. in a
   plugin's ``pyproject.toml``::

       [project.entry-points."twofold.families"]
       rings = "twofold_rings:FAMILY"

   The entry point's object is registered under the entry point's name the first time the name
   is asked for (a module that registers itself on import works too).

There is no scan of packages for modules: what is built in is written down.

Examples
--------
>>> from twofold.study.registry import Registry
>>> shapes = Registry("shape")
>>> shapes.register("ring", {"sides": 0})
{'sides': 0}
>>> shapes.get("ring")
{'sides': 0}
>>> shapes.names()
['ring']
>>> shapes.get("star")
Traceback (most recent call last):
...
twofold.study.exceptions.InputError: field 'shape': got 'star'; accepted: one of ring.
"""

from __future__ import annotations

import contextlib
import functools
import importlib
import sys
from collections.abc import Callable, Iterator, Mapping
from typing import Any, Generic, TypeVar

from .checks import fail
from .exceptions import InputError

__all__ = ["Registry"]

T = TypeVar("T")


class Registry(Generic[T]):
    """Named entries of one kind: built-ins loaded on demand, run-time additions and plugins.

    Parameters
    ----------
    kind : str
        What an entry is, singular (``"family"``, ``"solver"``); the field name in errors.
    builtins : mapping of str to str, optional
        Name of each built-in entry -> ``"module"`` (which registers the name when imported) or
        ``"module:attribute"`` (whose attribute is the entry).
    group : str, optional
        Entry-point group of plugins (``"twofold.families"``); None for no plugins.
    check : callable, optional
        ``check(name, obj)`` raises ``ValueError`` when ``obj`` cannot be registered as ``name``.
    """

    def __init__(
        self,
        kind: str,
        *,
        builtins: Mapping[str, str] | None = None,
        group: str | None = None,
        check: Callable[[str, T], None] | None = None,
    ) -> None:
        self.kind = kind
        self.group = group
        self._builtins = dict(builtins or {})
        self._check = check
        self._entries: dict[str, T] = {}
        self._plugins: dict[str, object] | None = None  # name -> entry point, found lazily

    def __repr__(self) -> str:
        return f"Registry({self.kind!r}, names={self.names()!r})"

    # -- adding ------------------------------------------------------------------------------
    def register(self, name: str, obj: T) -> T:
        """Add ``obj`` under ``name`` (replacing an entry of that name) and return it."""
        if not isinstance(name, str) or not name:
            raise ValueError(f"{self.kind} registry: a name must be a non-empty string")
        if self._check is not None:
            self._check(name, obj)
        self._entries[name] = obj
        return obj

    def add(self, name: str) -> Callable[[T], T]:
        """Decorator form of :meth:`register`: ``@registry.add("name")``."""

        def deco(obj: T) -> T:
            return self.register(name, obj)

        return deco

    @contextlib.contextmanager
    def registered(self, name: str, obj: T) -> Iterator[T]:
        """Register ``obj`` for the duration of a ``with`` block, then restore what was there."""
        before = self._entries.get(name)
        self.register(name, obj)
        try:
            yield obj
        finally:
            if before is None:
                self._entries.pop(name, None)
            else:
                self._entries[name] = before

    def unregister(self, name: str) -> T | None:
        """Remove a registered entry and return it (None if it was not loaded).

        The name stays known when it is a built-in or a plugin; a ``module:attribute`` built-in
        or a plugin object is registered again on the next :meth:`get` (a module that registers
        itself on import is not imported twice: use :meth:`registered` to swap such an entry).
        """
        return self._entries.pop(name, None)

    # -- looking up --------------------------------------------------------------------------
    @property
    def builtins(self) -> dict[str, str]:
        """The built-in names and where each lives (a copy; see the ``builtins`` parameter)."""
        return dict(self._builtins)

    def names(self) -> list[str]:
        """Every known name, sorted: built-ins, registered entries and installed plugins.

        Nothing is imported to list them.
        """
        return sorted(set(self._builtins) | set(self._entries) | set(self._plugin_points()))

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and name in self.names()

    def __iter__(self) -> Iterator[str]:
        return iter(self.names())

    def __len__(self) -> int:
        return len(self.names())

    def get(
        self, name: str, *, where: str | None = None, error: type[InputError] = InputError
    ) -> T:
        """The entry called ``name``, loading its module or plugin on first use.

        Raises
        ------
        InputError (or ``error``)
            ``field '<kind>': got 'x'; accepted: one of a, b, c.`` for an unknown name.
        """
        try:
            return self._entries[name]
        except (KeyError, TypeError):
            pass
        if isinstance(name, str):
            loaded = self._load(name)
            if loaded:
                return self._entries[name]
        raise fail(self.kind, name, "one of " + ", ".join(self.names()), where=where, error=error)

    def load_all(self) -> dict[str, T]:
        """Load every known entry and return ``{name: entry}`` sorted by name."""
        for name in self.names():
            if name not in self._entries:
                self._load(name)
        return {name: self._entries[name] for name in sorted(self._entries)}

    # -- loading -----------------------------------------------------------------------------
    def _load(self, name: str) -> bool:
        target = self._builtins.get(name)
        if target is not None:
            module, _, attribute = target.partition(":")
            loaded = importlib.import_module(module)
            if attribute and name not in self._entries:
                self.register(name, getattr(loaded, attribute))
            if name not in self._entries:
                raise RuntimeError(
                    f"{self.kind} registry: module {module} did not register {name!r}"
                )
            return True
        point = self._plugin_points().get(name)
        if point is None:
            return False
        obj = point.load()  # type: ignore[attr-defined]
        if name not in self._entries:  # a module that registers itself on import is fine too
            self.register(name, obj)
        return True

    def _plugin_points(self) -> dict[str, object]:
        if self.group is None:
            return {}
        if self._plugins is None:
            points = _entry_points(tuple(sys.path)).select(group=self.group)
            self._plugins = {ep.name: ep for ep in points}
        return self._plugins


@functools.lru_cache(maxsize=4)
def _entry_points(path: tuple[str, ...]) -> Any:
    """Every installed entry point, read once per ``sys.path`` (one scan serves every group)."""
    from importlib.metadata import entry_points

    return entry_points()
