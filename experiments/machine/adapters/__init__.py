"""Adapters: how a solver spec string reaches a solver outside twofold.

An adapter is one module declaring an :class:`Adapter`: the spec prefixes it answers to
(``python:``, ``command:``, ``http:``), the usage shown in errors, the default name of a solver
it reaches (from the spec string) and the builder of a ready solver. The built-in adapters are
listed in :data:`ADAPTERS`; an installed package adds one through the ``twofold.adapters``
entry-point group (its object is an :class:`Adapter`). A spec string no adapter claims names a
built-in solver.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from typing import TYPE_CHECKING

from twofold.study.registry import Registry

if TYPE_CHECKING:  # pragma: no cover
    from twofold.experiments.solvers import Solver

    from ..spec import SolverSpec

__all__ = ["ADAPTERS", "Adapter", "adapter_for", "spec_forms"]


@dataclasses.dataclass(frozen=True)
class Adapter:
    """One way of reaching an outside solver.

    Attributes
    ----------
    name : str
        The adapter's name, also :attr:`SolverSpec.kind` of the specs it claims.
    prefixes : tuple of str
        A spec string starting with one of these belongs to this adapter.
    usage : str
        The spec form in one token, for messages (``"python:MODULE:ATTRIBUTE"``).
    default_name : callable
        ``default_name(spec) -> str``: the solver's name when the study gives none (the caller
        keeps only letters, digits, ``.``, ``-`` and ``_``).
    build : callable
        ``build(spec, seed, where) -> Solver``: a started solver for one seed; raises
        :class:`~twofold.study.exceptions.SolverError` naming ``where`` and what to fix.
    own_timeout : bool, default False
        The solver enforces the entry's ``timeout`` itself (a child process, a network call),
        so the runner does not wrap each trial in its own timer.
    worker_processes : bool, default True
        Sessions may run in worker processes (``--workers``); False for solvers whose work
        happens elsewhere and that overlap trials themselves (``max_in_flight``).
    """

    name: str
    prefixes: tuple[str, ...]
    usage: str
    default_name: Callable[[str], str]
    build: Callable[[SolverSpec, int, str], Solver]
    own_timeout: bool = False
    worker_processes: bool = True

    def claims(self, spec: str) -> bool:
        """Whether the spec string belongs to this adapter."""
        return spec.startswith(self.prefixes)


_BUILTIN_ORDER = ("python", "command", "http")

#: The adapters: the built-in ones (loaded on first use) and plugins of ``twofold.adapters``.
ADAPTERS: Registry[Adapter] = Registry(
    "adapter",
    builtins={name: f"{__name__}.{name}:ADAPTER" for name in _BUILTIN_ORDER},
    group="twofold.adapters",
)


def _ordered() -> list[Adapter]:
    names = [*_BUILTIN_ORDER, *(n for n in ADAPTERS.names() if n not in _BUILTIN_ORDER)]
    return [ADAPTERS.get(n) for n in names]


def adapter_for(spec: str) -> Adapter | None:
    """The adapter claiming the spec string, or None (a built-in solver name)."""
    for adapter in _ordered():
        if adapter.claims(spec):
            return adapter
    return None


def spec_forms(builtin: str = "a built-in name") -> str:
    """Every accepted spec form, for messages: ``a built-in name, python:..., ... or http:URL``."""
    forms = [builtin, *(a.usage for a in _ordered())]
    return ", ".join(forms[:-1]) + " or " + forms[-1]
