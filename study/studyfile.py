"""The study file, ``study.toml``: one study's name, seed, bank and the options of every stage.

Top-level tables::

    [study]      name, seed, description                        (this module)
    [bank]       spec = "generate.toml" or an inline spec; path = "bank"
    [[blocks]]   blocks of the participant form                 (twofold.study.forms)
    [forms]      form design                                    (twofold.study.forms)
    [runner]     participant window and screen options          (participant runner)
    [[solvers]]  machine respondents                            (machine runner)
    [machine]    machine-session options: [machine.prompt]      (machine runner)
    [simulate]   simulated respondents                          (simulation)
    [analysis]   analysis options                               (twofold.analysis)

Every key of every table is declared once, in :data:`STUDY_FIELDS`; :func:`load_study` refuses
unknown keys and wrong TOML types anywhere in the file. Each stage then checks what its values
mean when it runs.
Relative paths are resolved against the study folder.
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from .bank import Bank, load_bank, write_bank
from .checks import check_int, fail
from .exceptions import SpecError
from .generate import GenerationSpec, generate_bank, load_spec, parse_spec

__all__ = ["STUDY_FIELDS", "TABLES", "Field", "Study", "check_fields", "load_study"]

TABLES = (
    "study",
    "bank",
    "blocks",
    "forms",
    "runner",
    "solvers",
    "machine",
    "simulate",
    "analysis",
)


@dataclasses.dataclass(frozen=True)
class Field:
    """One key of ``study.toml``: its accepted TOML types and, for a table, its own keys.

    ``types`` holds names from ``string, integer, number, boolean, array, table, tables``
    (``tables`` is an array of tables, such as ``[[blocks]]``). ``keys`` declares the keys of a
    table (or of each table of an array); ``None`` leaves the table open (solver options, an
    inline generation spec, which its own parser checks).
    """

    types: tuple[str, ...]
    description: str
    keys: Mapping[str, Field] | None = None


def _f(types: str, description: str, keys: Mapping[str, Field] | None = None) -> Field:
    return Field(tuple(types.split("|")), description, keys)


#: The whole layout of ``study.toml``, key by key; :func:`load_study` checks every table
#: against it (unknown keys and TOML types); each stage then checks the meaning of its values.
STUDY_FIELDS: dict[str, Field] = {
    "study": _f(
        "table",
        "the study",
        {
            "name": _f("string", "study name"),
            "seed": _f("integer", "study seed"),
            "description": _f("string", "what the study asks"),
            "paths": _f(
                "table",
                "folders of the study",
                {
                    k: _f("string", f"the {k} folder")
                    for k in ("bank", "logs", "forms", "results", "report", "cache")
                },
            ),
        },
    ),
    "bank": _f(
        "table",
        "the bank",
        {
            "spec": _f("string|table", "generation spec file or inline spec"),
            "path": _f("string", "the bank folder"),
        },
    ),
    "blocks": _f(
        "tables",
        "blocks of the participant form",
        {
            "name": _f("string", "block name"),
            "families": _f("array", "families of the block"),
            "items": _f("array", "item ids of the block"),
            "mode": _f("string", "response mode"),
            "instructions": _f("string", "instructions file"),
            "time_limit_s": _f("number", "time limit per item"),
            "practice": _f("integer|array", "practice items"),
            "feedback": _f("boolean", "feedback after practice items"),
            "state_rule": _f("boolean", "also ask for the rule in words"),
        },
    ),
    "forms": _f(
        "table",
        "form design",
        {
            "order": _f("string", "item order"),
            "lists": _f("integer", "item lists"),
            "max_run": _f("integer", "longest run of one family"),
            "separate_isomorphs": _f("boolean", "keep isomorphs apart"),
            "break_every": _f("integer", "a break after this many items"),
            "break_between_blocks": _f("boolean", "a break between blocks"),
            "respondents": _f("integer", "forms to build"),
        },
    ),
    "runner": _f(
        "table",
        "participant window",
        {
            "fullscreen": _f("boolean", "full screen"),
            "size": _f("array", "window size"),
            "respondent_pattern": _f("string", "respondent id pattern"),
            "consent": _f("string", "consent text file"),
            "background": _f("string", "background colour"),
            "end_text": _f("string", "text of the end screen"),
            "allow_template_consent": _f("boolean", "allow the shipped consent template"),
            "redraw": _f("string", "redraw policy"),
            "shuffle_choices": _f("boolean", "shuffle select-mode choices per trial"),
            "countdown": _f("boolean", "show the seconds left of a timed item"),
        },
    ),
    "solvers": _f(
        "tables",
        "machine respondents",
        {
            "name": _f("string", "solver name"),
            "spec": _f("string", "solver spec"),
            "seeds": _f("integer|array", "seeds"),
            "options": _f("table", "options for the solver or adapter"),
            "timeout": _f("number", "seconds per trial"),
            "modes": _f("array", "response modes"),
            "medium": _f("string", "rendering medium"),
            "families": _f("array", "families"),
        },
    ),
    "machine": _f(
        "table",
        "machine sessions",
        {
            "prompt": _f(
                "table",
                "prompt template of chat solvers",
                {
                    "system": _f("string", "system text"),
                    "user": _f("string", "user text holding {view}"),
                },
            ),
        },
    ),
    "simulate": _f(
        "table",
        "simulated respondents",
        {
            "humans": _f("integer", "simulated respondents"),
            "ability_sd": _f("number", "ability spread"),
            "factor_weight": _f("number", "weight of the factors"),
            "item_sd": _f("number", "item noise"),
            "variant_shift": _f("number", "isomorph shift"),
            "rt_sd": _f("number", "response time noise"),
        },
    ),
    "analysis": _f(
        "table",
        "analysis options",
        {
            "conf_level": _f("number", "confidence level"),
            "n_boot": _f("integer", "bootstrap resamples"),
            "seed": _f("integer", "analysis seed"),
            "irt_model": _f("string", "item-response model"),
            "min_items": _f("integer", "fewest items per respondent"),
            "synthetic": _f("string", "simulated respondents"),
            "human_pairs": _f("string", "human-human pairs"),
            "gap_intervals": _f("string", "intervals of the by-item gap SD"),
            "parts": _f("array", "report parts"),
        },
    ),
}

_TOML_TYPES: dict[str, tuple[type, ...]] = {
    "string": (str,),
    "integer": (int,),
    "number": (int, float),
    "boolean": (bool,),
    "array": (list,),
    "table": (dict,),
}


def _type_ok(value: Any, types: tuple[str, ...]) -> bool:
    for t in types:
        if t == "tables":
            if isinstance(value, list) and all(isinstance(v, dict) for v in value):
                return True
            continue
        if isinstance(value, _TOML_TYPES[t]) and (t == "boolean" or not isinstance(value, bool)):
            return True
    return False


def _accepted(types: tuple[str, ...]) -> str:
    names = {
        "string": "a string",
        "integer": "an integer",
        "number": "a number",
        "boolean": "true or false",
        "array": "an array",
        "table": "a table",
        "tables": "an array of tables ([[...]])",
    }
    return " or ".join(names[t] for t in types)


def check_fields(
    table: Mapping[str, Any], fields: Mapping[str, Field], *, prefix: str = "", where: str
) -> None:
    """Check a table's keys and value types against declared ``fields`` (recursively).

    Raises
    ------
    SpecError
        ``study.toml: field 'study.seeed': got 2026; accepted: the keys name, seed, ...``.
    """
    for key, value in table.items():
        name = f"{prefix}{key}"
        f = fields.get(key)
        if f is None:
            raise fail(name, value, "the keys " + ", ".join(fields), where=where, error=SpecError)
        if not _type_ok(value, f.types):
            raise fail(name, value, _accepted(f.types), where=where, error=SpecError)
        if f.keys is None:
            continue
        if isinstance(value, dict):
            check_fields(value, f.keys, prefix=f"{name}.", where=where)
        elif isinstance(value, list) and "tables" in f.types:
            for k, entry in enumerate(value):
                check_fields(entry, f.keys, prefix=f"{name}[{k}].", where=where)


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
        raw = tomllib.loads(p.read_bytes().decode("utf-8"))
    except (FileNotFoundError, IsADirectoryError):
        raise SpecError(f"{p}: no such study file.", where=str(p)) from None
    except UnicodeDecodeError as err:
        raise SpecError(
            f"{p}: byte {err.start}: not UTF-8 text; accepted: a TOML file saved as UTF-8.",
            where=str(p),
        ) from None
    except tomllib.TOMLDecodeError as err:
        raise SpecError(f"{p}: not valid TOML ({err}).", where=str(p)) from err
    where = p.name
    for key in raw:
        if key not in TABLES:
            raise fail(
                key, "(table)", "the tables " + ", ".join(TABLES), where=where, error=SpecError
            )
    check_fields(raw, STUDY_FIELDS, where=where)
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
