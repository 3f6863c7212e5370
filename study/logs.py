"""The trial log: one CSV row per trial, a JSON sidecar per session, a table schema beside them.

Both runners (participants and machines) write through :class:`TrialLogWriter`; the analysis reads
through :func:`read_trials`. The layout is open: a CSV file (UTF-8, header row, comma separated,
empty cell = missing), a JSON sidecar with the session's metadata, and ``trials.schema.json``, a
Frictionless Table Schema describing every column.

Columns (in order)
------------------
study, bank_hash, respondent, kind, synthetic, session, form, block, trial, item, family, mode,
response, correct, error_type, status, rt_ms, effort, effort_unit, onset_s, response_s, detail
"""

from __future__ import annotations

import csv
import dataclasses
import json
import os
import tempfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from ._check import fail
from .exceptions import LogError
from .item import canonical_json

__all__ = [
    "KINDS",
    "STATUSES",
    "TRIAL_COLUMNS",
    "Column",
    "TrialLogWriter",
    "read_sidecar",
    "read_trials",
    "table_schema",
    "write_json_atomic",
]

KINDS = ("human", "machine")
#: ok: answered and scored; timeout: no answer in time; invalid: an answer that could not be
#: parsed (raw text kept in ``detail``); failed: the respondent or solver failed (reason in detail)
STATUSES = ("ok", "timeout", "invalid", "failed")


@dataclasses.dataclass(frozen=True)
class Column:
    """One column of the trial log."""

    name: str
    type: str  # Frictionless type: string, integer, number, boolean
    description: str
    required: bool = False
    enum: tuple[str, ...] = ()


TRIAL_COLUMNS: tuple[Column, ...] = (
    Column("study", "string", "study name from study.toml", True),
    Column("bank_hash", "string", "SHA-256 of the bank the items came from", True),
    Column("respondent", "string", "respondent id (a code, never a name)", True),
    Column("kind", "string", "respondent kind", True, KINDS),
    Column("synthetic", "boolean", "true for simulated respondents", True),
    Column("session", "string", "session id (one respondent taking one form)", True),
    Column("form", "string", "form id", True),
    Column("block", "string", "block name within the form", True),
    Column("trial", "integer", "0-based trial index within the session", True),
    Column("item", "string", "item id", True),
    Column("family", "string", "item family", True),
    Column("mode", "string", "response mode", True, ("generate", "select")),
    Column("response", "string", "the response as canonical JSON (empty when none)"),
    Column("correct", "boolean", "whether the response is correct (empty when not scored)"),
    Column("error_type", "string", "the family's error type for a wrong response"),
    Column("status", "string", "trial outcome", True, STATUSES),
    Column("rt_ms", "number", "response time in ms from the item's onset flip (humans)"),
    Column("effort", "number", "machine effort in effort_unit (machines)"),
    Column("effort_unit", "string", "unit of effort: nodes, programs, tokens, seconds..."),
    Column("onset_s", "number", "item onset, seconds since session start"),
    Column("response_s", "number", "response event, seconds since session start"),
    Column("detail", "string", "free text: failure reason, raw reply of an invalid answer"),
)
_NAMES = tuple(c.name for c in TRIAL_COLUMNS)


def table_schema() -> dict[str, Any]:
    """The trial log's Frictionless Table Schema (a JSON-ready dict)."""
    fields = []
    for c in TRIAL_COLUMNS:
        f: dict[str, Any] = {"name": c.name, "type": c.type, "description": c.description}
        cons: dict[str, Any] = {}
        if c.required:
            cons["required"] = True
        if c.enum:
            cons["enum"] = list(c.enum)
        if cons:
            f["constraints"] = cons
        if c.type == "boolean":
            f["trueValues"] = ["true"]
            f["falseValues"] = ["false"]
        fields.append(f)
    return {"fields": fields, "missingValues": [""]}


def write_json_atomic(path: str | os.PathLike[str], data: Mapping[str, Any]) -> None:
    """Write JSON to ``path`` through a temporary file, fsync and rename (never half-written)."""
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", dir=p.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump(dict(data), fh, indent=2, ensure_ascii=False, default=str)
            fh.write("\n")
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _cell(col: Column, value: Any, *, where: str) -> str:
    if value is None or (isinstance(value, float) and value != value):
        if col.required:
            raise fail(
                col.name, value, f"a {col.type} value (required)", where=where, error=LogError
            )
        return ""
    if col.name == "response":  # always the value itself, serialised here (never pre-encoded)
        return canonical_json(value)
    if col.type == "boolean":
        if not isinstance(value, bool):
            raise fail(col.name, value, "true or false", where=where, error=LogError)
        return "true" if value else "false"
    if col.type == "integer":
        if isinstance(value, bool) or not isinstance(value, int):
            raise fail(col.name, value, "an integer", where=where, error=LogError)
        return str(value)
    if col.type == "number":
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise fail(col.name, value, "a number", where=where, error=LogError)
        return repr(float(value))
    if col.enum and value not in col.enum:
        raise fail(col.name, value, "one of " + ", ".join(col.enum), where=where, error=LogError)
    return str(value)


class TrialLogWriter:
    """Append trial rows to a session's CSV, flushed and fsynced before returning.

    Parameters
    ----------
    path : path-like
        The session's CSV file; created with a header when missing, appended to when present
        (resuming a session).
    sidecar : path-like, optional
        The session's JSON sidecar; :meth:`update_sidecar` rewrites it atomically.
    fsync : bool, default True
        Call ``os.fsync`` after each row. Turn off only for simulated data written in bulk.
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        *,
        sidecar: str | os.PathLike[str] | None = None,
        fsync: bool = True,
    ):
        self.path = Path(path)
        self.sidecar = Path(sidecar) if sidecar else self.path.with_suffix(".json")
        self.fsync = fsync
        self.path.parent.mkdir(parents=True, exist_ok=True)
        new = not self.path.exists() or self.path.stat().st_size == 0
        if not new:
            with open(self.path, encoding="utf-8", newline="") as fh:
                header = next(csv.reader(fh), [])
            if tuple(header) != _NAMES:
                raise LogError(
                    f"{self.path}: header does not match the trial log columns; "
                    f"expected: {','.join(_NAMES)}.",
                    where=str(self.path),
                )
        self._fh = open(self.path, "a", encoding="utf-8", newline="")  # noqa: SIM115
        self._csv = csv.writer(self._fh, lineterminator="\n")
        if new:
            self._csv.writerow(_NAMES)
            self._sync()
        self._meta: dict[str, Any] = {}
        self.n_written = 0

    def _sync(self) -> None:
        self._fh.flush()
        if self.fsync:
            os.fsync(self._fh.fileno())

    def append(self, row: Mapping[str, Any]) -> None:
        """Validate and append one trial row; it is on disk when this returns."""
        extra = sorted(set(row) - set(_NAMES))
        where = f"{self.path.name} trial {row.get('trial')}"
        if extra:
            raise fail(
                extra[0],
                row[extra[0]],
                "a trial log column: " + ", ".join(_NAMES),
                where=where,
                error=LogError,
            )
        cells = [_cell(c, row.get(c.name), where=where) for c in TRIAL_COLUMNS]
        self._csv.writerow(cells)
        self._sync()
        self.n_written += 1

    def update_sidecar(self, **fields: Any) -> dict[str, Any]:
        """Merge ``fields`` into the sidecar and rewrite it atomically; return the merged dict."""
        if not self._meta and self.sidecar.exists():
            self._meta = read_sidecar(self.sidecar)
        self._meta.update(fields)
        self._meta.setdefault("columns", "trials.schema.json")
        write_json_atomic(self.sidecar, self._meta)
        schema_path = self.path.parent / "trials.schema.json"
        if not schema_path.exists():
            write_json_atomic(schema_path, table_schema())
        return dict(self._meta)

    def close(self) -> None:
        if not self._fh.closed:
            self._sync()
            self._fh.close()

    def __enter__(self) -> TrialLogWriter:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def read_sidecar(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a session sidecar (JSON object)."""
    p = Path(path)
    try:
        data = json.loads(p.read_text("utf-8"))
    except FileNotFoundError:
        raise LogError(f"{p}: session sidecar is missing.", where=str(p)) from None
    except json.JSONDecodeError as err:
        raise LogError(
            f"{p}: not valid JSON ({err.msg}, line {err.lineno}).", where=str(p)
        ) from err
    if not isinstance(data, dict):
        raise LogError(f"{p}: a session sidecar must be a JSON object.", where=str(p))
    return data


def read_trials(path: str | os.PathLike[str]) -> Any:
    """Read one trial log CSV into a pandas DataFrame with typed columns.

    Booleans become pandas ``boolean`` (nullable), numbers ``float64``, the trial index ``Int64``,
    text ``object``. A last line cut short by a crash is dropped.
    """
    import pandas as pd

    p = Path(path)
    with open(p, encoding="utf-8", newline="") as fh:
        rows = list(csv.reader(fh))
    if not rows or tuple(rows[0]) != _NAMES:
        raise LogError(
            f"{p}: header does not match the trial log columns; expected: {','.join(_NAMES)}.",
            where=str(p),
        )
    body = [r for r in rows[1:] if len(r) == len(_NAMES)]
    df = pd.DataFrame(body, columns=list(_NAMES), dtype=object)
    for c in TRIAL_COLUMNS:
        col = df[c.name].replace("", None)
        if c.type == "boolean":
            df[c.name] = col.map({"true": True, "false": False, None: pd.NA}).astype("boolean")
        elif c.type == "integer":
            df[c.name] = pd.to_numeric(col).astype("Int64")
        elif c.type == "number":
            df[c.name] = pd.to_numeric(col).astype("float64")
        else:
            df[c.name] = col.astype(object).where(col.notna(), None)
    return df
