"""The real ``twofold`` console script, for tests that go through the command a user types."""

from __future__ import annotations

import shutil
import sys
from pathlib import Path


def console_script() -> str:
    """Path of the installed ``twofold`` script (a missing one fails the test, never skips it)."""
    exe = shutil.which("twofold") or str(Path(sys.executable).parent / "twofold")
    assert Path(exe).exists(), "the twofold console script is not installed"
    return exe


#: the command line prefix that runs the real command
TWOFOLD = [console_script()]
