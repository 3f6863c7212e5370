"""The code base passes its own linter (ruff, configured in pyproject.toml)."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def test_ruff_finds_nothing():
    ruff = shutil.which("ruff")
    if ruff is None:
        pytest.skip("ruff not installed (it is in the test extra)")
    res = subprocess.run(
        [ruff, "check", "--no-cache", "."], cwd=ROOT, capture_output=True, text=True
    )
    assert res.returncode == 0, res.stdout[-3000:]


def test_analysis_never_imports_experiments_or_psychopy():
    code = (
        "import sys, twofold.analysis, twofold.analysis.report; "
        "bad = [m for m in sys.modules if m.startswith(('twofold.experiments', 'psychopy'))]; "
        "print(bad)"
    )
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert res.stdout.strip() == "[]"


def test_the_command_starts_without_psychopy():
    code = (
        "import sys, twofold.experiments.cli; "
        "print([m for m in sys.modules if m.startswith('psychopy')])"
    )
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert res.stdout.strip() == "[]"


def test_mypy_finds_nothing_in_the_library(tmp_path):
    mypy = shutil.which("mypy")
    if mypy is None:
        pytest.skip("mypy not installed (it is in the test extra)")
    res = subprocess.run(
        [mypy, "--cache-dir", str(tmp_path / "cache"), "study", "experiments", "analysis"],
        cwd=ROOT,
        capture_output=True,
        text=True,
    )
    assert res.returncode == 0, res.stdout[-3000:]
