"""The API reference builds from the docstrings without a single warning.

Sphinx (with numpydoc) reads ``tests/apidoc``; every public module of the three packages gets an
entry (``conf.public_modules``), so a docstring with broken markup anywhere in the public API
fails this test. Build it by hand with
``python -m sphinx -W -b html tests/apidoc /tmp/twofold-api``.
"""

from __future__ import annotations

import importlib.util
import os
import subprocess
import sys
from pathlib import Path

import pytest

SOURCE = Path(__file__).resolve().parent / "apidoc"


def _conf():
    spec = importlib.util.spec_from_file_location("twofold_apidoc_conf", SOURCE / "conf.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    for tool in ("sphinx", "numpydoc"):
        if importlib.util.find_spec(tool) is None:
            message = f"{tool} is not installed (it is in the 'test' extra)"
            pytest.fail(message) if os.environ.get("CI") else pytest.skip(message)
    out = tmp_path_factory.mktemp("api")
    res = subprocess.run(
        [sys.executable, "-m", "sphinx", "-W", "--keep-going", "-q", "-b", "html",
         "-d", str(out / ".doctrees"), str(SOURCE), str(out / "html")],
        capture_output=True, text=True, check=False,
    )  # fmt: skip
    return res, out / "html"


@pytest.mark.slow  # about 15 s: imports every public module
def test_the_api_reference_builds_without_warnings(built):
    res, _ = built
    assert res.returncode == 0, res.stderr[-4000:]


@pytest.mark.slow
def test_every_public_module_and_the_main_entry_points_are_in_it(built):
    _, html = built
    conf = _conf()
    pages = {name: (html / f"{name}.html").read_text(encoding="utf-8") for name in
             ("study", "experiments", "analysis")}  # fmt: skip
    for package, page in pages.items():
        modules = conf.public_modules(f"twofold.{package}")
        assert len(modules) >= 4, modules
        for module in modules:
            assert f'id="module-{module}"' in page, module
    # a few documented names, by their anchors
    for anchor in ("twofold.analysis.irt.fit_irt", "twofold.study.bank.load_bank",
                   "twofold.experiments.machine.run_solvers"):  # fmt: skip
        package = anchor.split(".")[1]
        assert f'id="{anchor}"' in pages[package], anchor


def test_public_modules_skip_private_and_command_modules():
    names = _conf().public_modules("twofold.experiments")
    assert "twofold.experiments.machine.runner" in names
    assert not any("._" in n or n.startswith("twofold.experiments.cli") for n in names)
    assert "twofold.experiments.human.runner" not in names  # imports PsychoPy at the top
