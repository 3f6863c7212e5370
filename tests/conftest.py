"""Test configuration shared by every test module.

PsychoPy and matplotlib write into the home folder; point them at a temporary one so tests never
touch the developer's settings, and force the Agg backend.
"""

from __future__ import annotations

import os
import tempfile

_HOME = tempfile.mkdtemp(prefix="twofold-test-home-")
os.environ["HOME"] = _HOME
os.environ.setdefault("MPLCONFIGDIR", os.path.join(_HOME, "mpl"))
os.environ["MPLBACKEND"] = "Agg"
os.environ["PSYCHOPYNOPACKAGES"] = "1"
# banks whose items passed the family checks are remembered here (see twofold.study.bank)
os.environ["TWOFOLD_CACHE_DIR"] = os.path.join(_HOME, "cache")

import matplotlib  # noqa: E402

matplotlib.use("Agg")
