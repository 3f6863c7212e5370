"""Each package's public names: listed, sorted, present, complete and home-grown.

``__all__`` is the promise a package makes to its users. The checks here fail when a listed
name is missing, when a public name bound in a package is left out of the list, when the list is
empty or unsorted, and when ``twofold.experiments`` re-exports something its sub-packages do not
themselves publish.
"""

from __future__ import annotations

import importlib
import json
import subprocess
import sys
import types

import pytest

PACKAGES = ["twofold.study", "twofold.analysis", "twofold.experiments"]


def isort_key(name: str) -> tuple[int, str]:
    """Constants, then classes, then functions; alphabetical within each."""
    return (0 if name.isupper() else 1 if name[0].isupper() else 2, name)


@pytest.mark.parametrize("pkg", PACKAGES)
def test_public_names_are_listed_sorted_and_present(pkg):
    mod = importlib.import_module(pkg)
    names = list(mod.__all__)
    assert len(names) >= 10, f"{pkg}.__all__ lists only {names}"
    assert names == sorted(names, key=isort_key)
    assert len(set(names)) == len(names)
    missing = [n for n in names if not hasattr(mod, n)]
    assert missing == [], f"{pkg}.__all__ lists names it does not have: {missing}"


@pytest.mark.parametrize("pkg", PACKAGES)
def test_every_public_name_bound_in_a_package_is_listed(pkg):
    mod = importlib.import_module(pkg)
    bound = {
        name
        for name, value in vars(mod).items()
        if not name.startswith("_")
        and not isinstance(value, types.ModuleType)
        and name != "annotations"  # from __future__ import annotations
    }
    assert sorted(bound - set(mod.__all__)) == []


def test_experiments_names_come_from_the_sub_packages_that_publish_them():
    import twofold.experiments as ex

    for name in ex.__all__:
        home = importlib.import_module(f"twofold.experiments.{ex._HOME[name]}")
        assert name in home.__all__, f"{home.__name__} does not publish {name}"
        assert getattr(ex, name) is getattr(home, name)
        assert getattr(ex, name).__module__.startswith("twofold.experiments.")
    assert set(ex._HOME) == set(ex.__all__)
    assert set(ex.__all__) <= set(dir(ex))
    with pytest.raises(AttributeError, match="has no attribute 'no_such_name'"):
        _ = ex.no_such_name


def test_importing_experiments_loads_no_runner_and_no_psychopy():
    code = (
        "import json, sys, twofold.experiments; "
        "print(json.dumps(sorted(m for m in sys.modules "
        "if m.startswith(('twofold.experiments.', 'psychopy')))))"
    )
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(res.stdout) == []
