"""The trial cache: every finished machine trial, in an SQLite file in the study folder.

One row per trial, keyed by bank hash, solver name, solver identity (the hash of its spec,
options and declared version), seed, item id and mode; the value is the trial-log row (JSON) and
its status. The file uses write-ahead logging and commits each trial, so a killed run keeps every
trial it finished; the session CSVs are rebuilt from it on resume.

A cache file that is not SQLite, or holds a row that cannot be read, stops the run with one line
(:class:`~twofold.study.exceptions.RunnerError`) saying to move the file aside or run again with
``--fresh``; with ``recover=True`` (what ``--fresh`` passes) an unreadable file is moved aside
under a new name and a new cache is started.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import sqlite3
import threading
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from twofold.study.exceptions import RunnerError

__all__ = ["CACHE_FILE", "TrialCache"]

CACHE_FILE = "machine_trials.sqlite"

_SCHEMA = """
CREATE TABLE IF NOT EXISTS trial_rows (
    bank_hash   TEXT NOT NULL,
    solver      TEXT NOT NULL,
    config_hash TEXT NOT NULL,
    seed        INTEGER NOT NULL,
    item        TEXT NOT NULL,
    mode        TEXT NOT NULL,
    status      TEXT NOT NULL,
    row         TEXT NOT NULL,
    finished    REAL NOT NULL DEFAULT (julianday('now')),
    PRIMARY KEY (bank_hash, solver, config_hash, seed, item, mode)
) WITHOUT ROWID;
"""
_FIX = "move the file aside (rename it) or run again with --fresh"


class TrialCache:
    """An SQLite trial cache (WAL mode; safe against a killed process).

    Parameters
    ----------
    path : path-like
        The SQLite file (created with its folder when missing).
    recover : bool, default False
        When the file is not a readable SQLite database, move it aside (to
        ``<name>.unreadable-<time>``) and start an empty cache instead of raising.

    Raises
    ------
    RunnerError
        The file is not a readable trial cache (without ``recover``).
    """

    def __init__(self, path: str | os.PathLike[str], *, recover: bool = False):
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self.moved_aside: Path | None = None
        self._lock = threading.Lock()
        try:
            self._open()
        except sqlite3.DatabaseError as err:
            if not recover:
                raise self._unreadable(err) from None
            stamp = _dt.datetime.now(_dt.UTC).strftime("%Y%m%dT%H%M%S")
            self.moved_aside = self.path.with_name(f"{self.path.name}.unreadable-{stamp}")
            os.replace(self.path, self.moved_aside)
            for suffix in ("-wal", "-shm"):
                Path(f"{self.path}{suffix}").unlink(missing_ok=True)
            self._open()

    def _open(self) -> None:
        self._db = sqlite3.connect(
            self.path, timeout=30, check_same_thread=False, isolation_level=None
        )
        try:
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=NORMAL")
            self._db.executescript(_SCHEMA)
            self._db.execute("SELECT COUNT(*) FROM trial_rows").fetchone()
        except sqlite3.DatabaseError:
            self._db.close()
            raise

    def _unreadable(self, err: Exception) -> RunnerError:
        return RunnerError(f"{self.path}: trial cache is unreadable ({err}); {_FIX}.")

    def _run(self, sql: str, args: Iterable[Any] = ()) -> list[Any]:
        with self._lock:
            try:
                return self._db.execute(sql, tuple(args)).fetchall()
            except sqlite3.DatabaseError as err:
                raise self._unreadable(err) from None

    def done(
        self,
        bank_hash: str,
        solver: str,
        config_hash: str,
        seed: int,
        *,
        statuses: Iterable[str] | None = None,
    ) -> dict[tuple[str, str], dict[str, Any]]:
        """Finished trials of one session: ``{(item, mode): row}`` (only ``statuses`` if given).

        Raises
        ------
        RunnerError
            A stored row is not a JSON object naming its item and mode.
        """
        rows = self._run(
            "SELECT item, mode, status, row FROM trial_rows "
            "WHERE bank_hash=? AND solver=? AND config_hash=? AND seed=?",
            (bank_hash, solver, config_hash, seed),
        )
        keep = None if statuses is None else set(statuses)
        out: dict[tuple[str, str], dict[str, Any]] = {}
        for item, mode, status, text in rows:
            try:
                row = json.loads(text)
            except (TypeError, ValueError):
                row = None
            if not isinstance(row, dict) or row.get("item") != item or row.get("mode") != mode:
                raise RunnerError(
                    f"{self.path}: cached trial of solver '{solver}' (item {item}, mode {mode}, "
                    f"seed {seed}) is unreadable; {_FIX}."
                )
            if keep is None or status in keep:
                out[(item, mode)] = row
        return out

    def put(
        self, bank_hash: str, solver: str, config_hash: str, seed: int, row: Mapping[str, Any]
    ) -> None:
        """Store one finished trial (committed when this returns); replaces an earlier try."""
        self._run(
            "INSERT OR REPLACE INTO trial_rows "
            "(bank_hash, solver, config_hash, seed, item, mode, status, row) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
            (
                bank_hash,
                solver,
                config_hash,
                seed,
                row["item"],
                row["mode"],
                row["status"],
                json.dumps(dict(row), ensure_ascii=False, allow_nan=False),
            ),
        )

    def count(self, *, solver: str | None = None) -> int:
        """Rows stored (of one solver, when given)."""
        if solver is None:
            return int(self._run("SELECT COUNT(*) FROM trial_rows")[0][0])
        return int(self._run("SELECT COUNT(*) FROM trial_rows WHERE solver=?", (solver,))[0][0])

    def forget(self, solver: str) -> int:
        """Discard every cached trial of one solver (all banks, configurations and seeds)."""
        with self._lock:
            try:
                cur = self._db.execute("DELETE FROM trial_rows WHERE solver=?", (solver,))
            except sqlite3.DatabaseError as err:
                raise self._unreadable(err) from None
            return int(cur.rowcount)

    def close(self) -> None:
        with self._lock:
            self._db.close()

    def __enter__(self) -> TrialCache:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
