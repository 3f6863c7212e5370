"""twofold.study: what is presented. Items, families, banks, renderers, audits, the trial log."""

from typing import Any as _Any

from . import families
from .bank import Bank, bank_hash, load_bank, write_bank
from .exceptions import (
    BankError,
    InputError,
    ItemError,
    SpecError,
    TwofoldError,
    TwofoldWarning,
)
from .families import Family, get_family, known_families, register
from .generate import GenerationSpec, generate_bank, load_spec, parse_spec
from .item import MODES, Item, canonical_json
from .logs import TRIAL_COLUMNS, TrialLogWriter, read_sidecar, read_trials
from .render import MEDIA, render, render_picture
from .studyfile import Study, load_study

__all__ = [
    "MEDIA",
    "MODES",
    "TRIAL_COLUMNS",
    "Bank",
    "BankError",
    "Family",
    "GenerationSpec",
    "InputError",
    "Item",
    "ItemError",
    "SpecError",
    "Study",
    "TrialLogWriter",
    "TwofoldError",
    "TwofoldWarning",
    "bank_hash",
    "canonical_json",
    "families",
    "generate_bank",
    "get_family",
    "known_families",
    "load_bank",
    "load_spec",
    "load_study",
    "parse_spec",
    "read_sidecar",
    "read_trials",
    "register",
    "render",
    "render_picture",
    "write_bank",
]


def __getattr__(name: str) -> _Any:
    # ``__version__`` is read from the package metadata on first use (importlib.metadata is slow
    # to import); it is the one version of twofold.study, twofold.experiments and twofold.analysis
    if name == "__version__":
        from ._version import twofold_version

        return twofold_version()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
