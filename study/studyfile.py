"""The study file, ``study.toml``: one study's name, seed, bank and the options of every stage.

Top-level tables::

    [study]      name, seed, description                        (this module)
    [bank]       spec = "generate.toml" or an inline spec; path = "bank"
    [[blocks]]   blocks of the participant form                 (twofold.study.forms)
    [forms]      form design                                    (twofold.study.forms)
    [runner]     participant window and screen options          (participant runner)
    [[solvers]]  machine respondents                            (machine runner)
    [simulate]   simulated respondents                          (simulation)
    [analysis]   analysis options                               (twofold.analysis)

Each stage checks its own tables when it runs; this module checks the layout and the first two.
Relative paths are resolved against the study folder.
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from collections.abc import Callable
from pathlib import Path
from typing import Any

from ._check import check_int, fail
from .bank import Bank, load_bank, write_bank
from .exceptions import SpecError
from .generate import GenerationSpec, generate_bank, load_spec, parse_spec

__all__ = ["TABLES", "Study", "load_study"]

TABLES = ("study", "bank", "blocks", "forms", "runner", "solvers", "simulate", "analysis")


@dataclasses.dataclass(frozen=True)
class Study:
    """A loaded ``study.toml``.

    Attributes
    ----------
    root : Path
        The study folder.
    name : str
        Study name (letters, digits, ``-`` and ``_``).
    seed : int
        The study seed; forms, simulations and solver seeds derive from it.
    raw : dict
        The whole parsed file; each stage reads its own table from it.
    """

    root: Path
    name: str
    seed: int
    raw: dict[str, Any]

    @property
    def file(self) -> Path:
        return self.root / "study.toml"

    def table(self, name: str) -> Any:
        """A top-level table (``{}`` or ``[]`` when absent)."""
        default: Any = [] if name in ("blocks", "solvers") else {}
        return self.raw.get(name, default)

    def path(self, key: str, default: str) -> Path:
        """A study folder: ``bank``, ``logs``, ``forms``, ``results``, ``report``, ``cache``."""
        paths = self.raw.get("study", {}).get("paths", {})
        return (self.root / paths.get(key, default)).resolve()

    @property
    def bank_dir(self) -> Path:
        return self.path("bank", str(self.table("bank").get("path", "bank")))

    @property
    def logs_dir(self) -> Path:
        return self.path("logs", "logs")

    @property
    def forms_dir(self) -> Path:
        return self.path("forms", "forms")

    @property
    def results_dir(self) -> Path:
        return self.path("results", "results")

    def generation_spec(self) -> GenerationSpec:
        """The bank's generation spec (from ``[bank] spec = FILE`` or inline ``[bank.spec]``)."""
        spec = self.table("bank").get("spec")
        where = f"{self.file.name}: bank.spec"
        if isinstance(spec, str):
            return load_spec(self.root / spec)
        if isinstance(spec, dict):
            return parse_spec(spec, where=where)
        raise fail(
            "bank.spec",
            spec,
            "a spec file name or an inline table",
            where=self.file.name,
            error=SpecError,
        )

    def bank(
        self, *, create: bool = True, progress: Callable[[str, int], None] | None = None
    ) -> Bank:
        """Load the study's bank, generating and writing it first when missing and ``create``."""
        if self.bank_dir.exists() or not create:
            return load_bank(self.bank_dir)
        bank = generate_bank(self.generation_spec(), progress=progress)
        return write_bank(bank, self.bank_dir)


_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$")


def load_study(path: str | Path) -> Study:
    """Read and check ``study.toml`` (``path`` may be the file or its folder)."""
    p = Path(path)
    if p.is_dir():
        p = p / "study.toml"
    try:
        raw = tomllib.loads(p.read_text("utf-8"))
    except FileNotFoundError:
        raise SpecError(f"{p}: no such study file.", where=str(p)) from None
    except tomllib.TOMLDecodeError as err:
        raise SpecError(f"{p}: not valid TOML ({err}).", where=str(p)) from err
    where = p.name
    for key in raw:
        if key not in TABLES:
            raise fail(
                key, "(table)", "the tables " + ", ".join(TABLES), where=where, error=SpecError
            )
    st = raw.get("study")
    if not isinstance(st, dict):
        raise fail("study", st, "a [study] table with name and seed", where=where, error=SpecError)
    name = st.get("name")
    if not isinstance(name, str) or not _NAME.match(name):
        raise fail(
            "study.name", name, "1-64 letters, digits, '-' or '_'", where=where, error=SpecError
        )
    seed = check_int(
        "study.seed", st.get("seed", 0), low=0, high=2**63 - 1, where=where, error=SpecError
    )
    bank = raw.get("bank")
    if not isinstance(bank, dict) or not ({"spec", "path"} & set(bank)):
        raise fail(
            "bank",
            bank,
            "a [bank] table with spec (a file or inline table) and/or path",
            where=where,
            error=SpecError,
        )
    return Study(root=p.parent.resolve(), name=name, seed=seed, raw=raw)
