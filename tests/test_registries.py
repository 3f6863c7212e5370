"""The shared Registry type, and conformance tests over every registered solver and adapter."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
import tomllib
from pathlib import Path

import pytest
from twofold.experiments.cli import COMMANDS
from twofold.experiments.machine.adapters import ADAPTERS, adapter_for, spec_forms
from twofold.experiments.machine.check import check_solver
from twofold.experiments.machine.spec import build_solver, parse_solver_entry
from twofold.experiments.solvers import SOLVERS, make_builtin
from twofold.study import Bank, generate_bank, parse_spec
from twofold.study.exceptions import InputError, SpecError
from twofold.study.families import FAMILIES, get_family, known_families
from twofold.study.registry import Registry
from twofold.study.render import MEDIA

ROOT = Path(__file__).resolve().parents[1]


# -- the Registry type ---------------------------------------------------------------------------


@pytest.fixture
def plugin_dir(tmp_path, monkeypatch):
    """A folder on sys.path holding modules and an installed distribution with entry points."""
    monkeypatch.syspath_prepend(str(tmp_path))
    yield tmp_path
    for name in [m for m in sys.modules if m.startswith("e2reg_")]:
        del sys.modules[name]


def _module(folder: Path, name: str, body: str) -> None:
    (folder / f"{name}.py").write_text(textwrap.dedent(body))


def test_register_get_names_and_the_shared_error():
    reg: Registry[int] = Registry("widget")
    assert reg.register("b", 2) == 2
    reg.add("a")(1)
    assert (reg.get("a"), reg.get("b"), reg.names()) == (1, 2, ["a", "b"])
    assert "a" in reg and "c" not in reg and len(reg) == 2
    with pytest.raises(InputError) as err:
        reg.get("c", where="spec.toml")
    assert str(err.value) == "spec.toml: field 'widget': got 'c'; accepted: one of a, b."
    with pytest.raises(SpecError):
        reg.get("c", error=SpecError)
    assert reg.unregister("a") == 1 and reg.names() == ["b"]


def test_check_refuses_a_bad_entry():
    def positive(name: str, value: int) -> None:
        if value <= 0:
            raise ValueError(f"{name}: must be positive")

    reg: Registry[int] = Registry("count", check=positive)
    with pytest.raises(ValueError, match="x: must be positive"):
        reg.register("x", 0)
    assert reg.names() == []


def test_registered_restores_what_was_there():
    reg: Registry[str] = Registry("thing")
    reg.register("x", "old")
    with reg.registered("x", "new"), reg.registered("y", "temp"):
        assert (reg.get("x"), reg.get("y")) == ("new", "temp")
    assert reg.get("x") == "old" and "y" not in reg


def test_builtins_load_only_when_asked_for(plugin_dir):
    reg: Registry[str] = Registry(
        "part", builtins={"self": "e2reg_self", "attr": "e2reg_attr:VALUE"}
    )
    _module(
        plugin_dir,
        "e2reg_self",
        """
        from test_registries_target import REG
        REG.register("self", "registered on import")
        """,
    )
    _module(plugin_dir, "e2reg_attr", "VALUE = 'an attribute'\n")
    _module(plugin_dir, "test_registries_target", "REG = None\n")
    import test_registries_target

    test_registries_target.REG = reg
    assert reg.names() == ["attr", "self"]
    assert "e2reg_self" not in sys.modules and "e2reg_attr" not in sys.modules
    assert reg.get("attr") == "an attribute"
    assert "e2reg_self" not in sys.modules
    assert reg.get("self") == "registered on import"
    del sys.modules["test_registries_target"]


def test_a_builtin_module_that_does_not_register_is_reported(plugin_dir):
    _module(plugin_dir, "e2reg_silent", "X = 1\n")
    reg: Registry[int] = Registry("part", builtins={"quiet": "e2reg_silent"})
    with pytest.raises(RuntimeError, match="e2reg_silent did not register 'quiet'"):
        reg.get("quiet")


def test_plugins_come_from_entry_points(plugin_dir):
    _module(plugin_dir, "e2reg_plugin", "THING = {'from': 'a plugin'}\n")
    dist = plugin_dir / "e2reg_plugin-1.0.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: e2reg-plugin\nVersion: 1.0\n")
    (dist / "entry_points.txt").write_text("[twofold.e2reg]\nring = e2reg_plugin:THING\n")
    reg: Registry[dict] = Registry("shape", group="twofold.e2reg")
    assert reg.names() == ["ring"]
    assert "e2reg_plugin" not in sys.modules
    assert reg.get("ring") == {"from": "a plugin"}
    assert Registry("shape", group="twofold.no-such-group").names() == []


# -- families ------------------------------------------------------------------------------------


def test_import_loads_no_family_module():
    code = (
        "import sys, twofold.study as s; "
        "print(sorted(m for m in sys.modules if m.startswith(('twofold.study.families.', "
        "'scipy', 'matplotlib')) and m != 'twofold.study.families._base')); "
        "print(s.known_families())"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.splitlines()
    assert out == ["[]", "['contrast', 'grids', 'matrices', 'strings']"]


@pytest.mark.parametrize("name", known_families())
def test_family_declares_a_reference_solver_and_a_response_time(name):
    fam = get_family(name)
    assert fam.reference_solver in SOLVERS.names()
    assert 1000 <= fam.typical_rt_ms <= 120_000


def test_conformance_checks_the_declarations():
    from twofold.study.conformance import family_problems

    class Slowest(type(get_family("strings"))):
        typical_rt_ms = -5.0
        reference_solver = ""

    problems = family_problems(Slowest(), n=1)
    assert any(p.startswith("typical_rt_ms: got -5.0") for p in problems)
    assert any(p.startswith("reference_solver: got ''") for p in problems)
    assert family_problems(get_family("strings"), n=1) == []


@pytest.mark.parametrize(
    ("registry", "folder"),
    [
        (FAMILIES, "study/families"),
        (SOLVERS, "experiments/solvers"),
        (ADAPTERS, "experiments/machine/adapters"),
    ],
)
def test_every_builtin_module_is_listed(registry, folder):
    """A module added to a built-in folder is loaded only if its registry lists it."""
    listed = {target.partition(":")[0].rsplit(".", 1)[-1] for target in registry.builtins.values()}
    on_disk = {
        p.stem if p.suffix == ".py" else p.name
        for p in (ROOT / folder).iterdir()
        if not p.name.startswith("_") and (p.suffix == ".py" or (p / "__init__.py").exists())
    }
    assert on_disk == listed


def test_a_family_needs_its_own_name_and_an_instance():
    fam = get_family("strings")
    with pytest.raises(ValueError, match="registered under another name"):
        FAMILIES.register("strands", fam)
    with pytest.raises(ValueError, match="needs a Family instance"):
        FAMILIES.register("strings", type(fam))  # type: ignore[arg-type]


def test_every_package_is_listed_for_installation():
    """Each folder with an ``__init__.py`` is a listed package or package data of its parent."""
    setup = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]
    listed, data = set(setup["packages"]), setup["package-data"]
    roots = {"study": "twofold.study", "experiments": "twofold.experiments"}
    roots["analysis"] = "twofold.analysis"
    missing = []
    for folder, dotted in roots.items():
        for init in (ROOT / folder).rglob("__init__.py"):
            rel = init.parent.relative_to(ROOT / folder).parts
            name = ".".join((dotted, *rel))
            parent = ".".join((dotted, *rel[:-1]))
            as_data = f"{rel[-1]}/*.py" in data.get(parent, []) if rel else False
            if name not in listed and not as_data:
                missing.append(name)
    assert missing == []


# -- solvers -------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def small_bank():
    spec = {"seed": 11, "families": {}}
    for name in known_families():
        spec["families"][name] = {"n": 2, "modes": list(get_family(name).modes)}
    return generate_bank(parse_spec(spec))


@pytest.mark.parametrize("name", SOLVERS.names())
def test_every_solver_conforms(name, small_bank):
    solver = make_builtin(name, seed=0)
    assert solver.medium in MEDIA
    table = check_solver(solver, small_bank, n_items=1)
    assert len(table) == sum(len(get_family(f).modes) for f in known_families())
    assert table["status"].isin(["ok", "invalid", "failed"]).all()


@pytest.mark.parametrize("family", known_families())
def test_each_family_reference_solver_answers_its_items(family, small_bank):
    items = [it for it in small_bank if it.family == family]
    solver = make_builtin(get_family(family).reference_solver, seed=0)
    table = check_solver(solver, Bank(items=tuple(items), meta=small_bank.meta), n_items=2)
    assert (table["status"] == "ok").all(), table["detail"].tolist()


# -- adapters ------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", ADAPTERS.names())
def test_every_adapter_conforms(name):
    adapter = ADAPTERS.get(name)
    assert adapter.name == name and adapter.prefixes
    for prefix in adapter.prefixes:
        assert adapter_for(prefix + "x") is adapter
    spec = parse_solver_entry({"spec": adapter.usage})
    assert spec.kind == name
    assert adapter.usage in spec_forms()


def test_builtin_solver_names_belong_to_no_adapter():
    assert all(adapter_for(name) is None for name in SOLVERS.names())
    assert parse_solver_entry({"spec": "strings-ref"}).kind == "builtin"


def test_python_adapter_builds_and_closes_the_users_solver(plugin_dir):
    _module(
        plugin_dir,
        "e2reg_user_solver",
        """
        CLOSED = []

        class Adder:
            medium = "structured"

            def __init__(self, seed=0, bonus=0):
                self.bonus = bonus

            def solve(self, view, mode):
                return view["a"] + view["b"] + self.bonus

            def close(self):
                CLOSED.append(True)
        """,
    )
    spec = parse_solver_entry({"spec": "python:e2reg_user_solver:Adder", "options": {"bonus": 1}})
    assert spec.name == "Adder"
    solver = build_solver(spec, 0)
    assert solver.solve({"a": 2, "b": 3}, "generate").answer == 6
    solver.close()
    import e2reg_user_solver

    assert e2reg_user_solver.CLOSED == [True]


# -- commands and screens ------------------------------------------------------------------------


def test_every_command_group_registers_commands():
    import typer

    for name in COMMANDS.names():
        app = typer.Typer()
        COMMANDS.get(name)(app)
        assert app.registered_commands or app.registered_groups, name


def test_screens_are_for_known_families():
    from twofold.experiments.human.screens import SCREENS

    assert set(SCREENS.names()) <= set(known_families())
    # the built-in families need no screen of their own: their scenes say how to answer
    assert not set(SCREENS.names()) & {"contrast", "grids", "matrices", "strings"}


# -- analysis parts ------------------------------------------------------------------------------


def test_analysis_parts_are_a_registry_in_running_order():
    from twofold.analysis import _parts
    from twofold.analysis.run import PARTS

    assert list(_parts.REGISTRY.names()) == sorted(p.name for p in _parts.PARTS)
    assert PARTS == tuple(p.name for p in _parts.PARTS)
    assert PARTS[:2] == ("data", "irt") and PARTS[-1] == "export"
    with pytest.raises(ValueError, match="accepted: a Part"):
        _parts.REGISTRY.register("odd", {"name": "odd"})
    with pytest.raises(ValueError, match="is named 'irt'"):
        _parts.REGISTRY.register("other", _parts.REGISTRY.get("irt"))


def test_an_installed_analysis_part_runs_after_the_builtins(tmp_path):
    (tmp_path / "e2part_plugin.py").write_text(
        textwrap.dedent(
            """
            import pandas as pd
            from twofold.analysis._parts import Part

            def _run(ctx):
                return {"plugin_rows": pd.DataFrame({"n": [len(ctx.data.trials)]})}

            PART = Part("plugin-count", "Plugin count", ("plugin_rows",), _run, ())
            """
        )
    )
    dist = tmp_path / "e2part_plugin-1.0.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: e2part-plugin\nVersion: 1.0\n")
    (dist / "entry_points.txt").write_text(
        "[twofold.analysis_parts]\nplugin-count = e2part_plugin:PART\n"
    )
    code = "from twofold.analysis.run import PARTS; print(','.join(PARTS))"
    env = {**os.environ, "PYTHONPATH": str(tmp_path)}
    out = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True
    )
    names = out.stdout.strip().split(",")
    assert names[-1] == "plugin-count" and names[-2] == "export"
