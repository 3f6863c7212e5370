"""The dependency rules between the three packages, checked on the source and at run time.

The rules (DESIGN.md, "Layout"):

1. ``twofold.study`` imports neither ``twofold.experiments`` nor ``twofold.analysis``;
2. ``twofold.analysis`` never imports ``twofold.experiments``;
3. PsychoPy is imported only inside ``experiments/human/``.

The static check walks the syntax tree of every module, so an import inside a function, a
relative import (``from .. import experiments``) and ``importlib.import_module("...")`` with a
literal name are all seen, whether or not that code ever runs.
"""

from __future__ import annotations

import ast
import json
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGES = {"study": "twofold.study", "experiments": "twofold.experiments",
            "analysis": "twofold.analysis"}  # fmt: skip
HUMAN = "twofold.experiments.human"


@dataclass(frozen=True)
class Import:
    module: str  # the importing module
    target: str  # the absolute name imported
    line: int


def module_name(path: Path) -> str:
    """``study/families/grids.py`` -> ``twofold.study.families.grids``."""
    rel = path.relative_to(ROOT).with_suffix("")
    parts = [PACKAGES[rel.parts[0]], *rel.parts[1:]]
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _resolve(module: str, is_package: bool, level: int, name: str | None) -> str:
    base = module.split(".") if is_package else module.split(".")[:-1]
    if level > 1:
        base = base[: len(base) - (level - 1)]
    return ".".join([*base, name] if name else base)


def imports_of(source: str, module: str, *, is_package: bool = False) -> list[Import]:
    """Every import in ``source`` (at any depth), as absolute module names."""
    found: list[Import] = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            found += [Import(module, alias.name, node.lineno) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                target = _resolve(module, is_package, node.level, node.module)
            else:
                target = node.module or ""
            found.append(Import(module, target, node.lineno))
            # "from twofold import experiments" and "from .. import analysis" name modules
            found += [Import(module, f"{target}.{a.name}", node.lineno) for a in node.names]
        elif (
            isinstance(node, ast.Call)
            and node.args
            and isinstance(node.args[0], ast.Constant)
            and isinstance(node.args[0].value, str)
            and (
                (isinstance(node.func, ast.Attribute) and node.func.attr == "import_module")
                or (isinstance(node.func, ast.Name) and node.func.id in {"import_module",
                                                                         "__import__"})
            )
        ):  # fmt: skip
            found.append(Import(module, node.args[0].value, node.lineno))
    return found


def _within(name: str, package: str) -> bool:
    return name == package or name.startswith(package + ".")


def violations(found: list[Import]) -> list[str]:
    bad = []
    for imp in found:
        if _within(imp.module, "twofold.study") and (
            _within(imp.target, "twofold.experiments") or _within(imp.target, "twofold.analysis")
        ):
            bad.append(f"{imp.module}:{imp.line} imports {imp.target} (study imports neither)")
        if _within(imp.module, "twofold.analysis") and _within(imp.target, "twofold.experiments"):
            bad.append(f"{imp.module}:{imp.line} imports {imp.target} (analysis never does)")
        if _within(imp.target, "psychopy") and not _within(imp.module, HUMAN):
            bad.append(f"{imp.module}:{imp.line} imports {imp.target} (only {HUMAN} may)")
    return bad


def _library_files() -> list[Path]:
    return sorted(p for folder in PACKAGES for p in (ROOT / folder).rglob("*.py"))


def test_every_library_module_keeps_the_import_rules():
    files = _library_files()
    assert len(files) > 40  # the walk really covers the library
    found: list[Import] = []
    for path in files:
        found += imports_of(
            path.read_text(encoding="utf-8"),
            module_name(path),
            is_package=path.name == "__init__.py",
        )
    assert any(_within(i.target, "psychopy") for i in found)  # the runner's own imports are seen
    assert violations(found) == []


# -- the checker itself must be able to fail -----------------------------------------------------
@pytest.mark.parametrize(
    ("module", "is_package", "source"),
    [
        ("twofold.study.bank", False, "def f():\n    import twofold.analysis.irt\n"),
        ("twofold.study.bank", False, "from twofold import experiments\n"),
        ("twofold.study.families.grids", False, "from ...experiments import cli\n"),
        ("twofold.study", True, "from .. import analysis\n"),
        (
            "twofold.analysis.report",
            False,
            "class A:\n    def m(self):\n        from ..experiments.machine import run\n",
        ),
        (
            "twofold.analysis.run",
            False,
            "import importlib\nimportlib.import_module('twofold.experiments.cli')\n",
        ),
        ("twofold.experiments.machine.runner", False, "from psychopy import visual\n"),
        ("twofold.experiments.cli.run_human", False, "def go():\n    import psychopy.core\n"),
    ],
)
def test_the_checker_catches_a_broken_rule(module, is_package, source):
    bad = violations(imports_of(source, module, is_package=is_package))
    assert bad and all(b.startswith(f"{module}:") for b in bad)


@pytest.mark.parametrize(
    ("module", "source"),
    [
        ("twofold.experiments.human.runner", "def run():\n    from psychopy import visual\n"),
        ("twofold.analysis.irt", "from ..study.exceptions import InputError\n"),
        ("twofold.experiments.cli.analyze", "from twofold.analysis import run\n"),
    ],
)
def test_the_checker_allows_what_the_rules_allow(module, source):
    assert violations(imports_of(source, module)) == []


def test_relative_imports_resolve_to_absolute_names():
    found = imports_of("from ..exceptions import InputError\n", "twofold.study.families.grids")
    assert found[0].target == "twofold.study.exceptions"
    found = imports_of("from . import bank\n", "twofold.study", is_package=True)
    assert [i.target for i in found] == ["twofold.study", "twofold.study.bank"]


# -- and at run time: what a process actually loads ----------------------------------------------
def _loaded_after(code: str, prefixes: tuple[str, ...]) -> list[str]:
    listing = f"sorted(m for m in sys.modules if m.startswith({prefixes!r}))"
    probe = f"import json, sys; {code}; print(json.dumps({listing}))"
    res = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return json.loads(res.stdout)


def test_analysis_never_loads_experiments_or_psychopy():
    code = "import twofold.analysis, twofold.analysis.report, twofold.analysis.run"
    assert _loaded_after(code, ("twofold.experiments", "psychopy")) == []


def test_study_never_loads_the_other_packages():
    code = "import twofold.study, twofold.study.conformance, twofold.study.audit"
    assert _loaded_after(code, ("twofold.experiments", "twofold.analysis", "psychopy")) == []


def test_the_command_starts_without_psychopy():
    assert _loaded_after("import twofold.experiments.cli", ("psychopy",)) == []
