"""CONTRIBUTING.md stays true: its code runs and every name and path it mentions exists."""

from __future__ import annotations

import importlib
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
TEXT = (ROOT / "CONTRIBUTING.md").read_text(encoding="utf-8")
BLOCKS = re.findall(r"```python\n(.*?)```", TEXT, flags=re.S)
TICKED = re.findall(r"`([^`\n]+)`", re.sub(r"```.*?```", "", TEXT, flags=re.S))
NAMES = sorted({t for t in TICKED if re.fullmatch(r"twofold(\.[A-Za-z_]\w*)+", t)})
PATHS = sorted({t for t in TICKED if re.fullmatch(r"[\w.-]+(/[\w.<>-]*)+|[\w.-]+\.(md|yaml)", t)})


def resolve(dotted: str) -> object:
    """Import the longest importable prefix of ``dotted``, then follow attributes."""
    parts = dotted.split(".")
    for cut in range(len(parts), 0, -1):
        try:
            obj = importlib.import_module(".".join(parts[:cut]))
        except ModuleNotFoundError:
            continue
        for attr in parts[cut:]:
            obj = getattr(obj, attr)
        return obj
    raise ModuleNotFoundError(dotted)


def test_the_recipes_have_code_names_and_paths():
    assert len(BLOCKS) >= 2 and len(NAMES) >= 10 and len(PATHS) >= 8


@pytest.mark.parametrize("block", BLOCKS, ids=lambda b: b.split("\n")[0][:40])
def test_every_code_block_runs(block, tmp_path):
    res = subprocess.run(
        [sys.executable, "-c", block], cwd=tmp_path, capture_output=True, text=True, check=False
    )
    assert res.returncode == 0, res.stderr[-3000:]


def entry_point_groups() -> set[str]:
    """The entry-point groups of twofold's registries (plugins register through these)."""
    from twofold.analysis._parts import REGISTRY as PARTS
    from twofold.experiments.machine.adapters import ADAPTERS
    from twofold.experiments.solvers._base import SOLVERS
    from twofold.study.families import FAMILIES

    return {FAMILIES.group, SOLVERS.group, ADAPTERS.group, PARTS.group}


@pytest.mark.parametrize("name", NAMES)
def test_every_named_object_exists(name):
    if name in entry_point_groups():
        return
    resolve(name)  # raises when a recipe names something that is gone


@pytest.mark.parametrize("path", PATHS)
def test_every_named_path_exists(path):
    if "<" in path:  # a pattern such as tests/test_family_<name>.py: its folder must exist
        path = path.rsplit("/", 1)[0]
    assert (ROOT / path).exists(), path


def test_resolve_fails_on_a_missing_name():
    with pytest.raises(AttributeError):
        resolve("twofold.study.families.no_such_registry")
