"""Exceptions and warnings raised by twofold.

Every error subclasses the builtin it means, so ``except ValueError`` keeps working, and
:class:`TwofoldError` lets callers catch all of ours at once::

    TwofoldError
    ├── InputError(TwofoldError, ValueError)        bad user input at a public boundary
    │   ├── ItemError                               an item record is invalid
    │   ├── BankError                               a bank folder is invalid or tampered
    │   ├── SpecError                               a generation spec or study.toml is invalid
    │   ├── ResponseError                           a response cannot be parsed or scored
    │   └── LogError                                a trial log or session sidecar is invalid
    ├── GenerationError(TwofoldError, RuntimeError) a generator could not make a valid item
    ├── SolverError(TwofoldError, RuntimeError)     a solver or adapter failed
    └── RunnerError(TwofoldError, RuntimeError)     a participant or machine session failed

    TwofoldWarning(UserWarning)                     base of every twofold warning
    ├── DegenerateWarning                           a statistic is undefined for this input
    ├── LogWarning                                  trial logs hold duplicate or missing trials
    └── ConvergenceWarning                          an iterative fit stopped before converging
"""

from __future__ import annotations

__all__ = [
    "BankError",
    "ConvergenceWarning",
    "DegenerateWarning",
    "GenerationError",
    "InputError",
    "ItemError",
    "LogError",
    "LogWarning",
    "ResponseError",
    "RunnerError",
    "SolverError",
    "SpecError",
    "TwofoldError",
    "TwofoldWarning",
]


class TwofoldError(Exception):
    """Base class of every twofold error."""


class InputError(TwofoldError, ValueError):
    """Bad input at a public boundary.

    Parameters
    ----------
    message : str
        The full message, already naming the field, what was found and what is accepted.
    where : str, optional
        The place of the bad input, e.g. ``"items.jsonl line 17"``.
    field : str, optional
        The offending field or parameter name.
    """

    def __init__(self, message: str, *, where: str | None = None, field: str | None = None):
        super().__init__(message)
        self.where = where
        self.field = field


class ItemError(InputError):
    """An item record is invalid."""


class BankError(InputError):
    """A bank folder is missing, malformed or its hash does not match."""


class SpecError(InputError):
    """A generation spec or study file is invalid."""


class ResponseError(InputError):
    """A response cannot be parsed or scored for its item and mode."""


class LogError(InputError):
    """A trial log or session sidecar is invalid or inconsistent."""


class GenerationError(TwofoldError, RuntimeError):
    """A generator could not produce a valid item within its attempt budget."""


class SolverError(TwofoldError, RuntimeError):
    """A solver or adapter failed in a way that stops the run."""


class RunnerError(TwofoldError, RuntimeError):
    """A participant or machine session cannot go on."""


class TwofoldWarning(UserWarning):
    """Base class of every twofold warning; filter this to silence them all."""


class DegenerateWarning(TwofoldWarning):
    """A statistic is undefined for the given input (reported as NaN)."""


class LogWarning(TwofoldWarning):
    """Trial logs hold duplicate, missing or unexpected trials (counted in the data report)."""


class ConvergenceWarning(TwofoldWarning):
    """An iterative fit stopped at its iteration limit before meeting its tolerance."""
