"""``python -m twofold.experiments.cli``: the same as the ``twofold`` command."""

from . import _entry

_entry()
