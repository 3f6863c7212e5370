"""The code base passes its own linter, formatter and type checker (configured in pyproject.toml).

The tools run as ``python -m ruff`` / ``python -m mypy`` with the interpreter that runs the tests,
so a fresh virtual environment checks with its own copies, whatever is on ``PATH``. Without the
tools the checks skip on a developer's machine but fail when the ``CI`` variable is set: a CI run
that silently checks nothing must not pass.
"""

from __future__ import annotations

import importlib.util
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
LIBRARY = ("study", "experiments", "analysis")


def require_tool(module: str) -> None:
    """Skip without ``module``, or fail when ``CI`` is set (``test`` extra not installed)."""
    if importlib.util.find_spec(module) is not None:
        return
    message = f"{module} is not installed for {sys.executable} (it is in the 'test' extra)"
    if os.environ.get("CI"):
        pytest.fail(message)
    pytest.skip(message)


def run_tool(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", *args], cwd=ROOT, capture_output=True, text=True, check=False
    )


def test_ruff_check_finds_nothing():
    require_tool("ruff")
    res = run_tool("ruff", "check", "--no-cache", ".")
    assert res.returncode == 0, res.stdout[-3000:] + res.stderr[-1000:]


def test_ruff_format_would_change_nothing():
    require_tool("ruff")
    res = run_tool("ruff", "format", "--check", "--no-cache", ".")
    assert res.returncode == 0, res.stdout[-3000:] + res.stderr[-1000:]


def test_mypy_finds_nothing_in_the_library(tmp_path):
    require_tool("mypy")
    res = run_tool("mypy", "--cache-dir", str(tmp_path / "cache"), *LIBRARY)
    assert res.returncode == 0, res.stdout[-3000:] + res.stderr[-1000:]


def test_a_missing_tool_fails_under_ci(monkeypatch):
    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception, match="no_such_checker is not installed"):
        require_tool("no_such_checker")
    monkeypatch.delenv("CI")
    with pytest.raises(pytest.skip.Exception):
        require_tool("no_such_checker")
