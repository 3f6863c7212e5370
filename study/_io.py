"""File plumbing shared by every writer and reader: atomic writes and JSON-lines reading.

A folder or file is written under a temporary name beside its destination and renamed into
place only when complete, so a crash or an interrupt never leaves a half-written bank, export or
sidecar where a reader would take it for a finished one.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import IO, Any

from .checks import parse_json
from .exceptions import InputError

__all__ = ["atomic_file", "atomic_folder", "read_json_lines"]


@contextlib.contextmanager
def atomic_folder(dest: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield an empty temporary folder beside ``dest``; on success it becomes ``dest``.

    An existing ``dest`` is replaced (callers decide beforehand whether that is allowed): it is
    moved aside, the new folder renamed into place, and the old one removed. On any exception the
    temporary folder is removed and ``dest`` is left as it was.
    """
    dest = Path(dest)
    dest.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{dest.name}.", dir=dest.parent))
    try:
        yield tmp
        if dest.exists():
            old = dest.with_name(f".{dest.name}.old")
            shutil.rmtree(old, ignore_errors=True)
            dest.rename(old)
            tmp.rename(dest)
            shutil.rmtree(old, ignore_errors=True)
        else:
            tmp.rename(dest)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


@contextlib.contextmanager
def atomic_file(
    path: str | os.PathLike[str], *, encoding: str | None = "utf-8", binary: bool = False
) -> Iterator[IO[Any]]:
    """Yield a file open for writing; on success it is flushed, synced and renamed to ``path``.

    On any exception the temporary file is removed and ``path`` is left as it was.
    """
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", dir=p.parent)
    try:
        if binary:
            fh: IO[Any] = os.fdopen(fd, "wb")
        else:
            fh = os.fdopen(fd, "w", encoding=encoding, newline="\n")
        with fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def read_json_lines(
    path: str | os.PathLike[str], *, name: str | None = None, error: type[InputError] = InputError
) -> Iterator[tuple[int, str, Any]]:
    """Parse a JSON-lines file strictly, one record per non-blank line.

    Parameters
    ----------
    path : path-like
        The file.
    name : str, optional
        How errors name the file (default: its file name).
    error : type, default InputError
        The error class raised for a line that is not strict JSON (see ``parse_json``).

    Yields
    ------
    (line_number, where, record)
        ``where`` is ``"<name> line <n>"``, for the caller's own checks of the record.
    """
    label = name or Path(path).name
    with open(path, "rb") as fh:
        for lineno, raw in enumerate(fh, start=1):
            if not raw.strip():
                continue
            where = f"{label} line {lineno}"
            yield lineno, where, parse_json(raw, where=where, error=error)
