"""The trial cache: every finished machine trial, in an SQLite file in the study folder.

One row per trial, keyed by bank hash, item id, mode, solver configuration hash and seed; the
value is the trial-log row (JSON). The file uses write-ahead logging and commits each trial, so a
killed run keeps every trial it finished; the session CSVs are rebuilt from it on resume.
"""

from __future__ import annotations

import json
import os
import sqlite3
import threading
from collections.abc import Mapping
from pathlib import Path
from typing import Any

__all__ = ["CACHE_FILE", "TrialCache"]

CACHE_FILE = "machine_trials.sqlite"

_SCHEMA = """
CREATE TABLE IF NOT EXISTS trials (
    bank_hash   TEXT NOT NULL,
    item        TEXT NOT NULL,
    mode        TEXT NOT NULL,
    config_hash TEXT NOT NULL,
    seed        INTEGER NOT NULL,
    row         TEXT NOT NULL,
    finished    REAL NOT NULL DEFAULT (julianday('now')),
    PRIMARY KEY (bank_hash, item, mode, config_hash, seed)
) WITHOUT ROWID;
"""


class TrialCache:
    """An SQLite trial cache (WAL mode; safe against a killed process).

    Parameters
    ----------
    path : path-like
        The SQLite file (created with its folder when missing).
    """

    def __init__(self, path: str | os.PathLike[str]):
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._db = sqlite3.connect(
            self.path, timeout=30, check_same_thread=False, isolation_level=None
        )
        self._lock = threading.Lock()
        self._db.execute("PRAGMA journal_mode=WAL")
        self._db.execute("PRAGMA synchronous=NORMAL")
        self._db.executescript(_SCHEMA)

    def done(
        self, bank_hash: str, config_hash: str, seed: int
    ) -> dict[tuple[str, str], dict[str, Any]]:
        """Finished trials of one session: ``{(item, mode): row}``."""
        with self._lock:
            cur = self._db.execute(
                "SELECT item, mode, row FROM trials WHERE bank_hash=? AND config_hash=? AND seed=?",
                (bank_hash, config_hash, seed),
            )
            return {(i, m): json.loads(r) for i, m, r in cur.fetchall()}

    def put(self, bank_hash: str, config_hash: str, seed: int, row: Mapping[str, Any]) -> None:
        """Store one finished trial (committed when this returns)."""
        with self._lock:
            self._db.execute(
                "INSERT OR REPLACE INTO trials (bank_hash, item, mode, config_hash, seed, row) "
                "VALUES (?, ?, ?, ?, ?, ?)",
                (
                    bank_hash,
                    row["item"],
                    row["mode"],
                    config_hash,
                    seed,
                    json.dumps(dict(row), ensure_ascii=False),
                ),
            )

    def count(self) -> int:
        with self._lock:
            return int(self._db.execute("SELECT COUNT(*) FROM trials").fetchone()[0])

    def clear(self, bank_hash: str, config_hash: str, seed: int) -> int:
        """Forget one session's trials (to rerun them); return how many were removed."""
        with self._lock:
            cur = self._db.execute(
                "DELETE FROM trials WHERE bank_hash=? AND config_hash=? AND seed=?",
                (bank_hash, config_hash, seed),
            )
            return cur.rowcount

    def close(self) -> None:
        with self._lock:
            self._db.close()

    def __enter__(self) -> TrialCache:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
