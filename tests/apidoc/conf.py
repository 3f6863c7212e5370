"""Sphinx configuration of the twofold API reference (built from the docstrings).

Build: ``python -m sphinx -W -b html tests/apidoc /tmp/twofold-api`` (tests/test_apidoc.py does
this with warnings as errors). The source sits under ``tests/`` because the repository's top
level is fixed by the design.
"""

import importlib
import pkgutil
from importlib.metadata import version as _version

project = "twofold"
author = "twofold developers"
release = _version("twofold")
version = release

extensions = ["sphinx.ext.autodoc", "sphinx.ext.autosummary", "numpydoc"]

autodoc_default_options = {"members": True, "member-order": "bysource"}
autodoc_typehints = "none"  # numpydoc sections carry the types
autosummary_generate = False
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False
numpydoc_xref_param_type = False
nitpicky = False
html_theme = "alabaster"
exclude_patterns = ["_build"]

# Every public module of a package gets an ``automodule`` entry on the package's page, found by
# walking the package, so a new module is documented (and its docstrings checked) without an edit
# here. Left out: private modules, the command modules (``twofold --help`` documents them) and
# the two participant-runner modules that import PsychoPy at the top.
_SKIP = {
    "twofold.experiments.cli",
    "twofold.experiments.human.runner",
    "twofold.experiments.human.screens",
}


def public_modules(package: str) -> list[str]:
    """Public modules under ``package`` (itself excluded), in import-path order."""
    pkg = importlib.import_module(package)
    found = []
    for info in pkgutil.walk_packages(pkg.__path__, prefix=f"{package}."):
        parts = info.name.split(".")
        if any(p.startswith("_") for p in parts) or any(
            info.name == s or info.name.startswith(s + ".") for s in _SKIP
        ):
            continue
        found.append(info.name)
    return sorted(found)


def _add_modules(app, docname, source):  # noqa: ANN001 - Sphinx event signature
    package = f"twofold.{docname}"
    if docname in {"study", "experiments", "analysis"}:
        source[0] += "\n" + "".join(_entry(m) for m in public_modules(package))


def _entry(module: str) -> str:
    """An automodule entry; a package leaves out re-exported names that equal a sub-module's
    name (``grids.search`` the function vs ``grids.search`` the module)."""
    mod = importlib.import_module(module)
    subs = {i.name for i in pkgutil.iter_modules(getattr(mod, "__path__", []))}
    clash = sorted(subs & set(getattr(mod, "__all__", [])))
    option = f"   :exclude-members: {', '.join(clash)}\n" if clash else ""
    return f"\n.. automodule:: {module}\n{option}"


def setup(app):  # noqa: ANN001, ANN201
    app.connect("source-read", _add_modules)
