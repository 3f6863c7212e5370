"""The trial log: one CSV row per trial, a JSON sidecar per session, a table schema beside them.

Both runners (participants and machines) write through :class:`TrialLogWriter`; the analysis reads
through :func:`read_trials`. The layout is open: a CSV file (UTF-8, header row, comma separated,
empty cell = missing), a JSON sidecar with the session's metadata, and ``trials.schema.json``, a
Frictionless Table Schema describing every column.

Columns (in order)
------------------
study, bank_hash, respondent, kind, synthetic, session, form, block, trial, item, family, mode,
response, correct, error_type, status, rt_ms, effort, effort_unit, onset_s, response_s, detail,
choice_order

``choice_order`` came last and later: logs written before it (their header ends at ``detail``)
still read, with the column empty; a session resumed on such a log has its header brought up to
date first (every old row gets the empty cell).

The session record (the sidecar, ``<session>.json``) is declared field by field in
:data:`SESSION_FIELDS` and checked on every write and read. A CSV file is a *session log* when
its sidecar declares ``"format": "twofold-session/1"`` (or, for logs written before the format
field, ``"columns": "trials.schema.json"``); :func:`session_logs` finds exactly those, so other
files in a logs folder are never mistaken for sessions.

Durability: rows are written whole and flushed (fsynced by default) before the writer returns.
A row cut short by a crash (no closing newline, too few cells) is cut off when the log is opened
again for appending, and the cut is recorded in the sidecar's ``repairs`` list; a reader warns
(:class:`~twofold.study.exceptions.LogWarning`) about such a row instead of dropping it silently.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as _dt
import io
import json
import math
import os
import re
import warnings
from collections.abc import Mapping
from pathlib import Path
from typing import Any, Literal

from ._io import atomic_file
from .checks import describe, fail
from .exceptions import LogError, LogWarning
from .item import canonical_json
from .render import MEDIA

__all__ = [
    "KINDS",
    "SESSION_FIELDS",
    "SESSION_FORMAT",
    "SESSION_STATUSES",
    "STATUSES",
    "TRIAL_COLUMNS",
    "Column",
    "SessionField",
    "SessionLog",
    "SessionRecord",
    "TrialLogWriter",
    "check_session",
    "is_session_log",
    "parse_session_id",
    "read_session",
    "read_sidecar",
    "read_trials",
    "session_id",
    "session_logs",
    "table_schema",
    "write_json_atomic",
    "write_session",
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
    Column(
        "choice_order",
        "string",
        "select mode, people: the bank's choice numbers in the order shown on screen, space "
        "separated (e.g. '3 1 4 2'); empty for generate mode and machines",
    ),
)
_NAMES = tuple(c.name for c in TRIAL_COLUMNS)
#: the header of logs written before ``choice_order`` existed (read with that column empty)
_OLD_NAMES = _NAMES[:-1]
_CHOICE_ORDER = re.compile(r"^[1-9]\d*( [1-9]\d*)*$")


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
    with atomic_file(path) as fh:
        json.dump(dict(data), fh, indent=2, ensure_ascii=False, default=str)
        fh.write("\n")


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
        if (
            isinstance(value, bool)
            or not isinstance(value, int | float)
            or not math.isfinite(value)
        ):
            raise fail(col.name, value, "a finite number", where=where, error=LogError)
        return repr(float(value))
    if col.enum and value not in col.enum:
        raise fail(col.name, value, "one of " + ", ".join(col.enum), where=where, error=LogError)
    if col.name == "choice_order" and not (isinstance(value, str) and _CHOICE_ORDER.match(value)):
        raise fail(
            col.name, value, "choice numbers separated by spaces", where=where, error=LogError
        )
    return str(value)


# -- the session record -------------------------------------------------------------------------

SESSION_FORMAT = "twofold-session/1"
#: running: trials are being written; complete: every planned trial is on disk; incomplete: the
#: writer was told "complete" but found rows missing; aborted: ended early (ESC, interrupt);
#: failed: ended by an error; declined: consent not given (no trial data kept)
SESSION_STATUSES = ("running", "complete", "incomplete", "aborted", "failed", "declined")

_PY_TYPES: dict[str, tuple[type, ...]] = {
    "string": (str,),
    "integer": (int,),
    "number": (int, float),
    "boolean": (bool,),
    "object": (dict,),
    "array": (list, tuple),
}


@dataclasses.dataclass(frozen=True)
class SessionField:
    """One field of the session record (the sidecar).

    ``type`` is a JSON type (string, integer, number, boolean, object, array); ``required``
    fields must be present and not null; ``enum`` lists the accepted values of a string.
    """

    name: str
    type: str
    description: str
    required: bool = False
    enum: tuple[str, ...] = ()


SESSION_FIELDS: tuple[SessionField, ...] = (
    SessionField("format", "string", "session record format", False, (SESSION_FORMAT,)),
    SessionField("study", "string", "study name", True),
    SessionField("bank_hash", "string", "SHA-256 of the bank the session ran on", True),
    SessionField("session", "string", "session id (the CSV file's stem)", True),
    SessionField("respondent", "string", "respondent id (a code, never a name)", True),
    SessionField("kind", "string", "respondent kind", True, KINDS),
    SessionField("synthetic", "boolean", "true for simulated respondents", True),
    SessionField("form", "string", "form id", True),
    SessionField("status", "string", "session status", True, SESSION_STATUSES),
    SessionField("started", "string", "UTC start time (ISO 8601)"),
    SessionField("ended", "string", "UTC end time (ISO 8601); null while running"),
    SessionField("n_trials", "integer", "trials logged (for a finished session: all of them)"),
    SessionField("n_rows", "integer", "complete rows on disk when the record was written"),
    SessionField("n_planned", "integer", "trials the session's plan holds (machines)"),
    SessionField("n_form_trials", "integer", "test trials of the participant's form"),
    SessionField("interruptions", "array", "one entry per resume after an interruption"),
    SessionField("repairs", "array", "torn last rows cut off before appending"),
    SessionField("columns", "string", "the table schema file of the CSV"),
    SessionField("twofold_version", "string", "twofold version that wrote the session"),
    SessionField("failure", "string", "why a failed session stopped"),
    SessionField("problem", "string", "why a session was marked incomplete"),
    # participants
    SessionField("form_list", "integer", "counterbalancing list of the form"),
    SessionField("form_order", "integer", "row of the block-order square the form uses"),
    SessionField("psychopy_version", "string", "PsychoPy version"),
    SessionField("python_version", "string", "Python version"),
    SessionField("platform", "string", "operating system"),
    SessionField("screen", "object", "window size and mode"),
    SessionField("refresh_hz", "number", "measured refresh rate"),
    SessionField("keyboard_backend", "string", "keyboard backend"),
    SessionField("clock", "object", "clock name and session origin"),
    SessionField("consent", "boolean", "consent given on the consent screen"),
    SessionField("practice_done", "array", "blocks whose practice was run"),
    SessionField("frames", "object", "frame-interval totals"),
    SessionField("dropped_frames", "integer", "intervals over 1.5 refresh periods"),
    SessionField("frames_file", "string", "per-trial frame intervals, relative to the log"),
    # machines
    SessionField("solver", "string", "the study's name for the solver"),
    SessionField("seed", "integer", "the machine session's seed"),
    SessionField("solver_spec", "string", "the solver spec (or import:<file>)"),
    SessionField("solver_version", "string", "version string the solver declares"),
    SessionField("config_hash", "string", "hash of the solver configuration"),
    SessionField("solver_config", "object", "the solver configuration (secrets redacted)"),
    SessionField("effort_unit", "string", "unit of effort"),
    SessionField("elapsed_s", "number", "seconds spent running trials"),
    SessionField("medium", "string", "the item view the solver received", False, MEDIA),
    SessionField("prompt_sha256", "string", "SHA-256 of a chat solver's prompt template"),
    SessionField("n_ok", "integer", "trials answered and read"),
    SessionField("n_invalid", "integer", "trials whose reply could not be read"),
    SessionField("n_timeout", "integer", "trials the solver did not answer in time"),
    SessionField("n_failed", "integer", "trials the solver or adapter failed on"),
    # simulated respondents
    SessionField("simulation", "object", "the simulated respondent's ability and seed"),
)
_SESSION_BY_NAME = {f.name: f for f in SESSION_FIELDS}
_CORE = tuple(f.name for f in SESSION_FIELDS if f.required)


def _a(type_name: str) -> str:
    return ("an " if type_name[0] in "aeiou" else "a ") + type_name


def _check_field(f: SessionField, value: Any, *, where: str) -> None:
    if value is None:
        if f.required:
            raise fail(f.name, value, f"{_a(f.type)} (required)", where=where, error=LogError)
        return
    types = _PY_TYPES[f.type]
    ok = isinstance(value, types) and (f.type == "boolean" or not isinstance(value, bool))
    if ok and f.type == "number" and not math.isfinite(value):
        ok = False
    if not ok:
        raise fail(f.name, value, _a(f.type), where=where, error=LogError)
    if f.enum and value not in f.enum:
        raise fail(f.name, value, "one of " + ", ".join(f.enum), where=where, error=LogError)


def check_session(
    data: Mapping[str, Any], *, where: str = "session record", partial: bool = False
) -> dict[str, Any]:
    """Check a session record against :data:`SESSION_FIELDS`; return it as a plain dict.

    Declared fields must have their declared type; required fields must be present unless
    ``partial``. Undeclared fields are kept (a newer writer may add some) but must hold JSON.

    Raises
    ------
    LogError
        ``<where>: field 'status': got 'done'; accepted: one of running, complete, ...``.
    """
    if not isinstance(data, Mapping):
        raise fail("(record)", data, "a JSON object", where=where, error=LogError)
    out = dict(data)
    for name, value in out.items():
        f = _SESSION_BY_NAME.get(name)
        if f is not None:
            _check_field(f, value, where=where)
    if not partial:
        for name in _CORE:
            if name not in out:
                raise fail(
                    name, None, f"{_a(_SESSION_BY_NAME[name].type)} (required)", where=where,
                    error=LogError,
                )  # fmt: skip
    return out


@dataclasses.dataclass(frozen=True)
class SessionRecord:
    """The typed core of a session record; writer-specific fields go in ``details``.

    Build one when a session starts and pass :meth:`to_dict` to
    :meth:`TrialLogWriter.update_sidecar` (or :func:`write_session`).
    """

    study: str
    bank_hash: str
    session: str
    respondent: str
    kind: str
    synthetic: bool
    form: str
    status: str = "running"
    started: str | None = None
    ended: str | None = None
    n_trials: int | None = None
    interruptions: tuple[Any, ...] = ()
    details: Mapping[str, Any] = dataclasses.field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.started is None:
            object.__setattr__(self, "started", _now())
        check_session(self.to_dict(), where=f"session {self.session!r}")

    def to_dict(self) -> dict[str, Any]:
        """The record as a JSON-ready dict (``details`` merged at the top level)."""
        out: dict[str, Any] = {"format": SESSION_FORMAT}
        for f in dataclasses.fields(self):
            if f.name != "details":
                out[f.name] = getattr(self, f.name)
        out["interruptions"] = list(self.interruptions)
        for k, v in self.details.items():
            if k in out:
                raise fail(k, v, "a field not set by SessionRecord itself", error=LogError)
            out[k] = v
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], *, where: str = "session record") -> SessionRecord:
        """Check ``data`` and split it into the typed core and ``details``."""
        d = check_session(data, where=where)
        names = {f.name for f in dataclasses.fields(cls)} - {"details"}
        core: dict[str, Any] = {k: d[k] for k in names if k in d}
        core["interruptions"] = tuple(d.get("interruptions") or ())
        details = {k: v for k, v in d.items() if k not in names and k != "format"}
        return cls(**core, details=details)


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


_SESSION_ID = re.compile(r"^(?P<name>[A-Za-z0-9][A-Za-z0-9._-]*)-s(?P<seed>\d+)$")


def session_id(name: str, seed: int) -> str:
    """The id of a machine session: ``<name>-s<seed>`` (the inverse of :func:`parse_session_id`)."""
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise fail("seed", seed, "an integer >= 0", error=LogError)
    sid = f"{name}-s{seed}"
    if not _SESSION_ID.match(sid):
        raise fail("name", name, "letters, digits, '.', '-' or '_'", error=LogError)
    return sid


def parse_session_id(text: str) -> tuple[str, int] | None:
    """``(name, seed)`` of a machine session id ``<name>-s<seed>``; ``None`` for other ids."""
    m = _SESSION_ID.match(text) if isinstance(text, str) else None
    return (m.group("name"), int(m.group("seed"))) if m else None


def write_session(path: str | os.PathLike[str], data: Mapping[str, Any]) -> dict[str, Any]:
    """Check a complete session record and write it atomically; return it."""
    rec = check_session(data, where=Path(path).name)
    rec.setdefault("format", SESSION_FORMAT)
    rec.setdefault("columns", "trials.schema.json")
    write_json_atomic(path, rec)
    schema_path = Path(path).parent / "trials.schema.json"
    if not schema_path.exists():
        write_json_atomic(schema_path, table_schema())
    return rec


# -- durable rows ------------------------------------------------------------------------------


def _scan(data: bytes, where: str) -> tuple[list[list[str]], int, list[str]]:
    """Parse a log's bytes into rows; return (rows, length of the complete part, torn texts).

    A complete row ends with a newline and has one cell per column. Only the rows after the
    last complete one may be torn; anything malformed before that is an error.
    """
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        raise LogError(
            f"{where}: byte {err.start}: not UTF-8 text; accepted: a trial log written as UTF-8.",
            where=where,
        ) from None
    lines = text.splitlines(keepends=True)
    rows: list[list[str]] = []
    ends: list[int] = []  # character offset after each parsed record
    reader = csv.reader(io.StringIO(text, newline=""))
    offset, used = 0, 0
    try:
        for row in reader:
            while used < reader.line_num:
                offset += len(lines[used])
                used += 1
            rows.append(row)
            ends.append(offset)
    except csv.Error:
        rows.append(["<unparsable>"])
        ends.append(len(text))
    good = 0  # rows[:good] are complete
    width = len(_OLD_NAMES) if rows and tuple(rows[0]) == _OLD_NAMES else len(_NAMES)
    for k, row in enumerate(rows):
        complete = ends[k] > 0 and text[ends[k] - 1] == "\n" and len(row) == width
        if not complete:
            break
        good = k + 1
    torn_rows = rows[good:]
    if good < len(rows) - 1 or (torn_rows and good < 1):
        if good == 0:
            raise LogError(
                f"{where}: header does not match the trial log columns; "
                f"expected: {','.join(_NAMES)}.",
                where=where,
            )
        bad = rows[good]
        raise LogError(
            f"{where} row {good}: {len(bad)} cells; accepted: {width} cells per row "
            "(only a last row cut short by a crash is repaired).",
            where=where,
        )
    cut = ends[good - 1] if good else 0
    torn = [text[cut:]] if cut < len(text) else []
    return rows[:good], len(text[:cut].encode("utf-8")), torn


def _count_rows(path: Path) -> int:
    rows, _, _ = _scan(path.read_bytes(), path.name)
    return max(len(rows) - 1, 0)


class TrialLogWriter:
    """Append trial rows to a session's CSV, flushed and fsynced before returning.

    Parameters
    ----------
    path : path-like
        The session's CSV file; created with a header when missing, appended to when present
        (resuming a session). A last row cut short by a crash is cut off first and the cut is
        recorded in the sidecar's ``repairs`` (see :attr:`repairs`).
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
        self.repairs: list[dict[str, Any]] = []
        self.n_rows = 0
        new = not self.path.exists() or self.path.stat().st_size == 0
        header = (",".join(_NAMES) + "\n").encode()
        if not new and header.startswith(self.path.read_bytes()):
            new = True  # killed while writing the header: nothing else was written
            self.path.write_bytes(b"")
        if not new:
            data = self.path.read_bytes()
            rows, keep, torn = _scan(data, self.path.name)
            if rows and tuple(rows[0]) == _OLD_NAMES:
                # written before choice_order: the header and the old rows get the empty
                # cell (rewritten atomically; a torn last row stays behind them to be cut below)
                rows = [list(_NAMES)] + [r + [""] for r in rows[1:]]
                buf = io.StringIO(newline="")
                csv.writer(buf, lineterminator="\n").writerows(rows)
                head = buf.getvalue().encode("utf-8")
                data = head + data[keep:]
                with atomic_file(self.path, binary=True) as fh:
                    fh.write(data)
                keep = len(head)
            if not rows or tuple(rows[0]) != _NAMES:
                raise LogError(
                    f"{self.path}: header does not match the trial log columns; "
                    f"expected: {','.join(_NAMES)}.",
                    where=str(self.path),
                )
            self.n_rows = len(rows) - 1
            if torn:
                with open(self.path, "r+b") as fh:
                    fh.truncate(keep)
                    fh.flush()
                    os.fsync(fh.fileno())
                self.repairs.append(
                    {
                        "at": _now(),
                        "after_row": self.n_rows,
                        "bytes_cut": len(data) - keep,
                        "text": torn[0][:200],
                    }
                )
        self._fh = open(self.path, "a", encoding="utf-8", newline="")  # noqa: SIM115
        self._csv = csv.writer(self._fh, lineterminator="\n")
        if new:
            self._csv.writerow(_NAMES)
            self._sync()
        self._meta: dict[str, Any] = {}
        self.n_written = 0
        if self.repairs and self.sidecar.exists():
            self.update_sidecar()

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
        self.n_rows += 1

    def update_sidecar(self, **fields: Any) -> dict[str, Any]:
        """Merge ``fields`` into the sidecar, check it and rewrite it atomically.

        ``n_rows`` is set to the complete rows on disk. A record marked ``complete`` whose rows
        on disk are fewer than its ``n_trials`` is written as ``incomplete`` (with ``problem``).
        Returns the merged record.
        """
        if not self._meta and self.sidecar.exists():
            self._meta = read_sidecar(self.sidecar, partial=True)
        meta = {**self._meta, **fields}
        if self.repairs:
            known = list(meta.get("repairs") or [])
            meta["repairs"] = known + [r for r in self.repairs if r not in known]
        meta.setdefault("format", SESSION_FORMAT)
        meta.setdefault("columns", "trials.schema.json")
        if meta.get("status") == "complete":
            self._fh.flush()
            on_disk = _count_rows(self.path)
            meta["n_rows"] = on_disk
            expected = meta.get("n_trials")
            if isinstance(expected, int) and on_disk < expected:
                meta["status"] = "incomplete"
                meta["problem"] = f"{expected} trials reported, {on_disk} rows on disk"
        else:
            meta["n_rows"] = self.n_rows
        partial = not all(k in meta for k in _CORE if k != "format")
        check_session(meta, where=self.sidecar.name, partial=partial)
        self._meta = meta
        write_json_atomic(self.sidecar, meta)
        schema_path = self.path.parent / "trials.schema.json"
        if not schema_path.exists():
            write_json_atomic(schema_path, table_schema())
        return dict(meta)

    def close(self) -> None:
        if not self._fh.closed:
            self._sync()
            self._fh.close()

    def __enter__(self) -> TrialLogWriter:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def read_sidecar(path: str | os.PathLike[str], *, partial: bool = False) -> dict[str, Any]:
    """Read and check a session sidecar (see :data:`SESSION_FIELDS`)."""
    p = Path(path)
    try:
        data = json.loads(p.read_bytes().decode("utf-8"), parse_constant=_no_constant)
    except FileNotFoundError:
        raise LogError(f"{p}: session sidecar is missing.", where=str(p)) from None
    except UnicodeDecodeError as err:
        raise LogError(
            f"{p}: byte {err.start}: not UTF-8 text; accepted: a JSON session record.",
            where=str(p),
        ) from None
    except (json.JSONDecodeError, ValueError, RecursionError) as err:
        msg = err.msg if isinstance(err, json.JSONDecodeError) else str(err)
        raise LogError(f"{p}: not valid JSON ({msg}).", where=str(p)) from None
    if not isinstance(data, dict):
        raise LogError(f"{p}: a session sidecar must be a JSON object.", where=str(p))
    return check_session(data, where=str(p), partial=partial)


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number")


def read_trials(
    path: str | os.PathLike[str], *, torn: Literal["warn", "raise", "ignore"] = "warn"
) -> Any:
    """Read one trial log CSV into a pandas DataFrame with typed columns.

    Booleans become pandas ``boolean`` (nullable), numbers ``float64``, the trial index ``Int64``,
    text ``object``. Every cell is checked against its column (type, enum, required).

    Parameters
    ----------
    torn : {"warn", "raise", "ignore"}, default "warn"
        A last row cut short by a crash is not a trial: warn (:class:`LogWarning`, naming the
        file), raise :class:`LogError`, or leave it out quietly (a writer about to repair it).
    """
    import pandas as pd

    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise LogError(f"{p}: trial log is missing.", where=str(p)) from None
    rows, _, cut = _scan(data, p.name)
    if rows and tuple(rows[0]) == _OLD_NAMES:  # written before choice_order: fill it empty
        rows = [list(_NAMES)] + [r + [""] for r in rows[1:]]
    if not rows or tuple(rows[0]) != _NAMES:
        raise LogError(
            f"{p}: header does not match the trial log columns; expected: {','.join(_NAMES)}.",
            where=str(p),
        )
    if cut and torn != "ignore":
        msg = (
            f"{p.name}: the last row is cut short ({describe(cut[0])}); it is not a trial "
            "(a resumed session repairs it)."
        )
        if torn == "raise":
            raise LogError(msg, where=str(p))
        warnings.warn(msg, LogWarning, stacklevel=2)
    body = rows[1:]
    for k, r in enumerate(body):
        _check_row(r, where=f"{p.name} row {k + 1}")
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


_INT = re.compile(r"^-?\d+$")


def _check_row(cells: list[str], *, where: str) -> None:
    for c, v in zip(TRIAL_COLUMNS, cells, strict=True):
        if v == "":
            if c.required:
                raise fail(c.name, v, f"a {c.type} value (required)", where=where, error=LogError)
            continue
        if c.type == "boolean" and v not in ("true", "false"):
            raise fail(c.name, v, "true, false or empty", where=where, error=LogError)
        if c.type == "integer" and not _INT.match(v):
            raise fail(c.name, v, "an integer", where=where, error=LogError)
        if c.type == "number":
            try:
                ok = math.isfinite(float(v))
            except ValueError:
                ok = False
            if not ok:
                raise fail(c.name, v, "a finite number or empty", where=where, error=LogError)
        if c.enum and v not in c.enum:
            raise fail(c.name, v, "one of " + ", ".join(c.enum), where=where, error=LogError)
        if c.name == "choice_order" and not _CHOICE_ORDER.match(v):
            raise fail(
                c.name,
                v,
                "choice numbers separated by spaces, or empty",
                where=where,
                error=LogError,
            )


# -- session logs --------------------------------------------------------------------------------


def is_session_log(path: str | os.PathLike[str]) -> bool:
    """Whether ``path`` is a session log: a ``.csv`` whose sidecar declares a session record.

    A CSV holding the trial log header without a readable sidecar also counts (so a missing or
    broken sidecar is reported, not skipped); any other file does not.
    """
    p = Path(path)
    if p.suffix != ".csv" or p.name.startswith(".") or not p.is_file():
        return False
    side = p.with_suffix(".json")
    if side.is_file():
        try:
            data = json.loads(side.read_bytes().decode("utf-8"))
        except (ValueError, UnicodeDecodeError, RecursionError):
            return True  # a broken sidecar: read_session will say so
        if isinstance(data, dict) and (
            data.get("format") == SESSION_FORMAT or data.get("columns") == "trials.schema.json"
        ):
            return True
    try:
        with open(p, "rb") as fh:
            first = fh.readline()
    except OSError:
        return False
    return first.rstrip(b"\r\n") in (",".join(_NAMES).encode(), ",".join(_OLD_NAMES).encode())


def session_logs(logs_dir: str | os.PathLike[str]) -> list[Path]:
    """Every session log in the ``human``, ``simulated`` and ``machine`` folders of ``logs_dir``.

    Simulated respondents (``twofold simulate``) have a folder of their own so that they never
    sit beside real participant sessions; their rows are marked synthetic.
    """
    root = Path(logs_dir)
    files: list[Path] = []
    for sub in ("human", "simulated", "machine"):
        d = root / sub
        if d.is_dir():
            files.extend(sorted(p for p in d.glob("*.csv") if is_session_log(p)))
    return files


@dataclasses.dataclass(frozen=True)
class SessionLog:
    """One session log, read and checked: its record and its trials.

    Attributes
    ----------
    path : Path
        The CSV file.
    record : dict
        The checked sidecar.
    trials : pandas.DataFrame
        The rows, typed as by :func:`read_trials`.
    session, respondent, kind : str
        From the rows (from the record when the log has no rows).
    """

    path: Path
    record: dict[str, Any]
    trials: Any
    session: str
    respondent: str
    kind: str


def read_session(
    path: str | os.PathLike[str],
    *,
    bank_hash: str | None = None,
    item_ids: Any = None,
    where: str | None = None,
) -> SessionLog:
    """Read one session log and its sidecar and check that they agree.

    Checks: the record's fields; the rows' cell types; one session, respondent and kind per
    file, equal to the record's; the bank hash of rows and record equal to ``bank_hash`` (when
    given); every item id in ``item_ids`` (when given).

    Raises
    ------
    LogError
        Naming the file (as ``where``, default the path), the field, what was found and what is
        accepted.
    """
    p = Path(path)
    rel = where or str(p)
    side = read_sidecar(p.with_suffix(".json"))
    df = read_trials(p)
    if bank_hash is not None:
        found: set[str] = set(df["bank_hash"].dropna().astype(str)) if len(df) else set()
        found.add(str(side["bank_hash"]))
        bad = sorted(found - {bank_hash})
        if bad:
            raise LogError(
                f"{rel}: field 'bank_hash': got {bad[0][:16]}…; accepted: {bank_hash[:16]}… "
                "(the study's bank). This log was collected on a different bank; analyse it "
                "with that bank or move it out of the logs folder.",
                where=rel,
                field="bank_hash",
            )
    if len(df) == 0:
        session = str(side.get("session") or p.stem)
        respondent = str(side.get("respondent") or session)
        kind = str(side.get("kind") or p.parent.name)
    else:
        for col in ("session", "respondent", "kind"):
            vals = set(df[col].dropna().astype(str))
            if len(vals) > 1:
                raise LogError(
                    f"{rel}: column '{col}' holds {len(vals)} values "
                    f"({', '.join(sorted(vals)[:3])}); one session per log file.",
                    where=rel,
                    field=col,
                )
        session = str(df["session"].iloc[0])
        respondent = str(df["respondent"].iloc[0])
        kind = str(df["kind"].iloc[0])
        for col, val in (("session", session), ("respondent", respondent), ("kind", kind)):
            sval = side.get(col)
            if sval is not None and str(sval) != val:
                raise LogError(
                    f"{rel}: sidecar field '{col}': got {sval!r}; the rows say {val!r}.",
                    where=rel,
                    field=col,
                )
    if item_ids is not None and len(df):
        unknown = sorted(set(df["item"]) - set(item_ids))
        if unknown:
            raise LogError(
                f"{rel}: field 'item': got {unknown[0]!r}; accepted: an item id of the bank "
                f"({len(unknown)} unknown item ids in this log).",
                where=rel,
                field="item",
            )
    return SessionLog(
        path=p, record=side, trials=df, session=session, respondent=respondent, kind=kind
    )
