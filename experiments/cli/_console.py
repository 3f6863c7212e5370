"""The one terminal object of the command line: diagnostics and progress on stderr.

Progress bars come from rich when stderr is a terminal; otherwise (pipes, CI) they degrade to a
few plain lines, so logs stay readable.
"""

from __future__ import annotations

import contextlib
import os
import sys
import time
from collections.abc import Iterator
from typing import Any

from rich.console import Console

__all__ = ["Progress", "console", "progress", "stdout"]

console = Console(stderr=True, highlight=False)
stdout = Console(highlight=False, soft_wrap=True)


def _interactive() -> bool:
    return console.is_terminal and not os.environ.get("CI")


class Progress:
    """A task-progress handle: ``advance(k)``, ``set_total(n)``, ``note(text)``."""

    def __init__(self, label: str, total: int | None, bar: Any = None, task: Any = None):
        self.label, self.total, self._bar, self._task = label, total, bar, task
        self.done = 0
        self._t0 = time.monotonic()
        self._last_print = 0.0
        self.failures = 0

    def set_total(self, total: int) -> None:
        self.total = total
        if self._bar is not None:
            self._bar.update(self._task, total=total)

    def advance(self, k: int = 1, *, failed: int = 0) -> None:
        self.done += k
        self.failures += failed
        if self._bar is not None:
            self._bar.update(self._task, advance=k, failures=self.failures)
            return
        now = time.monotonic()
        if now - self._last_print >= 5 or (self.total and self.done >= self.total):
            self._last_print = now
            total = f"/{self.total}" if self.total else ""
            console.print(f"{self.label}: {self.done}{total} ({now - self._t0:.1f} s)")

    def note(self, text: str) -> None:
        console.print(text)


@contextlib.contextmanager
def progress(label: str, total: int | None = None) -> Iterator[Progress]:
    """A progress display for one stage; rich bar on a terminal, plain lines otherwise."""
    if not _interactive():
        handle = Progress(label, total)
        yield handle
        return
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )
    from rich.progress import Progress as RichProgress

    with RichProgress(
        TextColumn("{task.description}"),
        BarColumn(),
        MofNCompleteColumn(),
        TextColumn("failures {task.fields[failures]}"),
        TimeElapsedColumn(),
        TimeRemainingColumn(),
        console=console,
        transient=False,
    ) as bar:
        task = bar.add_task(label, total=total, failures=0)
        yield Progress(label, total, bar, task)


def error(text: str) -> None:
    """One clear line for an expected error."""
    console.print(f"error: {text}", style="bold red", markup=False, highlight=False, soft_wrap=True)
    sys.stderr.flush()
