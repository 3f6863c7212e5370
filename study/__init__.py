"""twofold.study: what is presented. Items, families, banks, renderers, audits, the trial log."""

from . import families
from ._version import __version__ as __version__
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
