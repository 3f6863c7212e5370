"""One machine sweep per study at a time: an exclusive lock file in the study's cache folder.

The lock is an operating-system file lock (the ``filelock`` library; ``flock`` on Linux), so it
is released by the kernel when its holder dies, even by ``kill -9``: a stale lock from a dead
process is simply taken over by the next sweep. Beside the lock file, ``machine.lock.json`` names
the holder (process id, host, start time) so a refused sweep can say who holds the study.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import socket
import time
from pathlib import Path
from typing import Any

import filelock
from twofold.study.exceptions import RunnerError

__all__ = ["LOCK_FILE", "SweepLock"]

LOCK_FILE = "machine.lock"


def _pid_alive(pid: Any) -> bool:
    if isinstance(pid, bool) or not isinstance(pid, int) or pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


class SweepLock:
    """An exclusive, non-waiting lock on one study's machine sweeps.

    Parameters
    ----------
    folder : path-like
        The folder holding the lock (the study's cache folder); created when missing.

    Raises
    ------
    RunnerError
        From :meth:`acquire` when another live process holds the lock; the one-line message names
        its process id and start time.
    """

    def __init__(self, folder: str | os.PathLike[str]):
        self.folder = Path(folder)
        self.path = self.folder / LOCK_FILE
        self.info_path = self.folder / (LOCK_FILE + ".json")
        self._lock: filelock.BaseFileLock | None = None

    def holder(self) -> dict[str, Any]:
        """The holder record last written (empty when unreadable)."""
        try:
            data = json.loads(self.info_path.read_text("utf-8"))
        except (OSError, ValueError):
            return {}
        return data if isinstance(data, dict) else {}

    def acquire(self) -> SweepLock:
        self.folder.mkdir(parents=True, exist_ok=True)
        lock = filelock.FileLock(str(self.path), timeout=0)
        try:
            lock.acquire()
        except filelock.Timeout:
            # the holder writes its record just after locking: give it a moment
            deadline = time.monotonic() + 1.0
            info = self.holder()
            while not _pid_alive(info.get("pid")) and time.monotonic() < deadline:
                time.sleep(0.02)
                info = self.holder()
            pid, started = info.get("pid"), info.get("started")
            if _pid_alive(pid) and pid != os.getpid():
                who = f"process {pid} on {info.get('host', '?')}, started {started}"
            else:
                who = "a process that is just starting"
            raise RunnerError(
                f"{self.path}: another machine sweep is running on this study ({who}); wait "
                "for it to finish or stop it, then run again."
            ) from None
        self._lock = lock
        record = {
            "pid": os.getpid(),
            "host": socket.gethostname(),
            "started": _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
        }
        tmp = self.info_path.with_name(f".{self.info_path.name}.{os.getpid()}")
        tmp.write_text(json.dumps(record) + "\n", "utf-8")
        os.replace(tmp, self.info_path)
        return self

    def release(self) -> None:
        if self._lock is not None:
            with contextlib.suppress(OSError):
                self.info_path.unlink()
            self._lock.release()
            self._lock = None

    def __enter__(self) -> SweepLock:
        return self.acquire()

    def __exit__(self, *exc: object) -> None:
        self.release()
