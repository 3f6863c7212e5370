"""The subprocess adapter: a long-running child process speaking JSON lines.

Protocol ``twofold-jsonl``, version 1 (also in ``PROTOCOL.md`` beside this module)
----------------------------------------------------------------------------------
The child is started once with the spec's argv and kept running. Every message is one JSON object
on one line (UTF-8, ``\\n``-terminated); the runner writes to the child's stdin and reads its
stdout; the child's stderr is kept in a file and its last lines are quoted in failure reasons.

1. hello (runner -> child)::

       {"protocol": "twofold-jsonl", "version": 1, "type": "hello", "seed": 0, "options": {...}}

   reply (child -> runner), the child's first line on stdout::

       {"protocol": "twofold-jsonl", "version": 1, "type": "hello", "medium": "structured",
        "name": "optional display name", "solver_version": "optional, e.g. 2.1"}

   ``medium`` is the view the child wants: ``text``, ``structured`` or ``picture``.
   ``solver_version`` (text) becomes part of the trial-cache key: declare a new one when the
   child's answers change, and the next run solves every item again instead of replaying.

2. solve (one per trial)::

       {"version": 1, "type": "solve", "id": "t17", "item": "str-0123456789ab",
        "family": "strings", "mode": "generate", "medium": "structured", "view": {...}}

   ``view`` is the rendered item (a string for text, an object for structured, base64 PNG for
   picture). The reply carries the same ``id`` and one of::

       {"version": 1, "id": "t17", "answer": <the answer in the family's form or a choice number>}
       {"version": 1, "id": "t17", "text": "free text; the family extracts the answer"}
       {"version": 1, "id": "t17", "error": "why the child could not answer"}

   with optional ``effort`` (number), ``effort_unit`` (string) and ``explanation`` (string).

3. shutdown: the runner closes stdin; the child should exit. It is killed after 2 seconds.

Faults: a reply not received within the trial timeout, a child that exits, or a broken pipe end
the trial as ``timeout`` or ``failed`` with the reason; the child is restarted (hello again) for
the next trial. Lines on stdout that are not JSON objects are skipped and quoted in the reason if
no reply follows. A reply with a wrong ``version`` fails the trial. A reply line longer than
``max_reply_bytes`` (an adapter option, default 16 MiB, not sent to the child) is skipped and the
trial logged ``invalid``.
"""

from __future__ import annotations

import base64
import contextlib
import json
import os
import queue
import shlex
import subprocess
import tempfile
import threading
import time
from collections.abc import Mapping
from typing import Any

from twofold.experiments.solvers import Answer
from twofold.study.exceptions import SolverError
from twofold.study.render import MEDIA

from ._core import TrialFailure, coerce_answer

__all__ = ["PROTOCOL", "PROTOCOL_VERSION", "CommandSolver"]

PROTOCOL = "twofold-jsonl"
PROTOCOL_VERSION = 1
#: seconds a child has to answer the hello message
HELLO_TIMEOUT = 20.0
#: longest reply line accepted by default (bytes)
MAX_REPLY_BYTES = 16 * 1024 * 1024
_EOF = object()
_TOO_LONG = object()
_ADAPTER_OPTIONS = ("env", "max_reply_bytes")


def _read_lines(stream: Any, out: queue.Queue[Any], limit: int) -> None:
    """Reader thread body: buffered line reads from ``stream`` into ``out``, then ``_EOF``.

    A line longer than ``limit`` bytes is skipped to its end and reported as ``_TOO_LONG``. A
    stream closed under the reader ends it quietly (no traceback from a dead child's reader).
    """
    try:
        while True:
            line = stream.readline(limit + 1)
            if not line:
                break
            if len(line) > limit and not line.endswith(b"\n"):
                while True:
                    rest = stream.readline(1 << 16)
                    if not rest or rest.endswith(b"\n"):
                        break
                out.put(_TOO_LONG)
                continue
            out.put(line)
    except (OSError, ValueError):
        pass
    finally:
        out.put(_EOF)


class _Child:
    """One running child: the process, its own reader thread and queue, a stderr file.

    Each child gets a fresh reader and queue, so nothing a dead child printed (nor its reader)
    can reach the next one.
    """

    def __init__(self, argv: list[str], env: Mapping[str, str] | None, max_reply: int):
        self.stderr = tempfile.TemporaryFile(mode="w+b")  # noqa: SIM115 - closed in kill()
        try:
            self.proc = subprocess.Popen(
                argv,
                stdin=subprocess.PIPE,
                stdout=subprocess.PIPE,
                stderr=self.stderr,
                env=None if env is None else {**os.environ, **env},
                bufsize=-1,
            )
        except OSError:
            self.stderr.close()
            raise
        self.lines: queue.Queue[Any] = queue.Queue()
        self._reader = threading.Thread(
            target=_read_lines,
            args=(self.proc.stdout, self.lines, max_reply),
            name="twofold-child-reader",
            daemon=True,
        )
        self._reader.start()

    def send(self, message: Mapping[str, Any]) -> None:
        assert self.proc.stdin is not None
        data = (json.dumps(message, ensure_ascii=False, separators=(",", ":")) + "\n").encode()
        self.proc.stdin.write(data)
        self.proc.stdin.flush()

    def stderr_tail(self, n: int = 3) -> str:
        try:
            self.stderr.flush()
            self.stderr.seek(0)
            lines = self.stderr.read().decode("utf-8", "replace").strip().splitlines()
        except (OSError, ValueError):
            return ""
        return " | ".join(lines[-n:])

    def kill(self, *, now: bool = False) -> None:
        if now:
            self.proc.kill()
        with contextlib.suppress(OSError, ValueError):
            if self.proc.stdin:
                self.proc.stdin.close()
        try:
            self.proc.wait(timeout=2)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        # the reader sees end-of-file once the child is gone; close its pipe only after it is
        # done, so it never reads a closed file
        self._reader.join(timeout=2)
        if self.proc.stdout and not self._reader.is_alive():
            self.proc.stdout.close()
        self.stderr.close()


class CommandSolver:
    """A solver living in a child process (any language) that speaks ``twofold-jsonl`` v1.

    Parameters
    ----------
    command : str
        The child's command line (split with shell rules, no shell involved).
    options : mapping
        Sent to the child in the hello message; ``medium`` (if set) overrides the child's choice,
        ``env`` (a table) adds environment variables.
    seed : int
        Sent in the hello message.
    timeout : float
        Seconds allowed per trial; a child that takes longer is restarted.
    name : str
        The study's name for the solver (in error messages).

    Raises
    ------
    SolverError
        When the child cannot be started or does not answer the hello message properly.
    """

    #: one request at a time per child
    max_in_flight = 1
    #: the runner passes item= and family= to solve (sent in the request)
    takes_item_id = True

    def __init__(
        self,
        command: str,
        *,
        options: Mapping[str, Any] | None = None,
        seed: int = 0,
        timeout: float = 120.0,
        name: str = "command",
    ):
        self.argv = shlex.split(command)
        if not self.argv:
            raise SolverError(f"solver '{name}': empty command; write command:PROGRAM ARGS...")
        self.options = dict(options or {})
        self.env = self.options.pop("env", None)
        if self.env is not None and not (
            isinstance(self.env, Mapping) and all(isinstance(v, str) for v in self.env.values())
        ):
            raise SolverError(
                f"solver '{name}': field 'options.env': got {type(self.env).__name__}; "
                "accepted: a table of text values."
            )
        limit = self.options.pop("max_reply_bytes", MAX_REPLY_BYTES)
        if isinstance(limit, bool) or not isinstance(limit, int) or not 1024 <= limit <= 1 << 31:
            raise SolverError(
                f"solver '{name}': field 'options.max_reply_bytes': got {limit!r}; accepted: "
                "an integer from 1024 to 2147483648."
            )
        self.max_reply_bytes = limit
        #: values the runner writes as ``***`` wherever they would appear
        self.secrets = [str(v) for v in (self.env or {}).values()]
        #: the version the child declares in its hello reply (part of the trial-cache key)
        self.version: str | None = None
        self.seed = seed
        self.timeout = timeout
        self.name = name
        self.restarts = 0
        self._lock = threading.Lock()
        self._counter = 0
        self._child: _Child | None = None
        self.medium = ""
        try:
            self._start()
        except TrialFailure as err:
            raise SolverError(
                f"solver '{name}': {err.reason}; check that `{command}` speaks "
                f"{PROTOCOL} v{PROTOCOL_VERSION} (see PROTOCOL.md)."
            ) from None

    # -- child management -----------------------------------------------------------------------
    def _start(self) -> None:
        try:
            child = _Child(self.argv, self.env, self.max_reply_bytes)
        except OSError as err:
            raise TrialFailure(
                "failed", f"cannot start {self.argv[0]!r}: {err.strerror or err}"
            ) from None
        self._child = child
        hello = {
            "protocol": PROTOCOL,
            "version": PROTOCOL_VERSION,
            "type": "hello",
            "seed": self.seed,
            "options": self.options,
        }
        try:
            child.send(hello)
        except OSError:
            pass  # the reply read below reports the exit
        reply = self._read_reply(child, None, HELLO_TIMEOUT, what="hello reply", strict=True)
        if reply.get("protocol") != PROTOCOL or reply.get("version") != PROTOCOL_VERSION:
            self._drop()
            raise TrialFailure(
                "failed",
                f"hello reply names protocol {reply.get('protocol')!r} version "
                f"{reply.get('version')!r}; expected {PROTOCOL!r} version {PROTOCOL_VERSION}",
            )
        medium = self.options.get("medium") or reply.get("medium") or "structured"
        if medium not in MEDIA:
            self._drop()
            raise TrialFailure(
                "failed",
                f"hello reply field 'medium': got {medium!r}; accepted: one of " + ", ".join(MEDIA),
            )
        self.medium = medium
        declared = reply.get("solver_version")
        self.version = None if declared is None else str(declared)[:200]

    def _drop(self, *, now: bool = False) -> None:
        if self._child is not None:
            self._child.kill(now=now)
            self._child = None

    def _read_reply(
        self, child: _Child, want_id: str | None, timeout: float, *, what: str, strict: bool
    ) -> dict[str, Any]:
        deadline = time.monotonic() + timeout
        stray: list[str] = []
        while True:
            left = deadline - time.monotonic()
            try:
                line = (
                    child.lines.get(timeout=max(left, 0.0))
                    if left > 0
                    else child.lines.get_nowait()
                )
            except queue.Empty:
                self._drop(now=True)
                extra = f"; it printed: {stray[-1]!r}" if stray else ""
                raise TrialFailure(
                    "timeout", f"no {what} within {timeout:g} s (child restarted){extra}"
                ) from None
            if line is _TOO_LONG:
                if strict:
                    self._drop()
                    raise TrialFailure("failed", f"{what} longer than {self.max_reply_bytes} bytes")
                raise TrialFailure(
                    "invalid",
                    f"{what} longer than {self.max_reply_bytes} bytes (options.max_reply_bytes); "
                    "skipped",
                )
            if line is _EOF:
                code = child.proc.wait()
                tail = child.stderr_tail()
                self._drop()
                extra = f"; it printed: {stray[-1]!r}" if stray else ""
                raise TrialFailure(
                    "failed",
                    f"child exited with code {code} before its {what}{extra}"
                    + (f"; stderr: {tail}" if tail else ""),
                )
            text = line.decode("utf-8", "replace").strip()
            try:
                msg = json.loads(text)
            except ValueError:
                msg = None
            if not isinstance(msg, dict):
                if strict:
                    self._drop()
                    raise TrialFailure(
                        "failed", f"child printed non-JSON instead of its {what}: {text[:80]!r}"
                    )
                stray.append(text[:80])
                continue
            if want_id is not None and msg.get("id") != want_id:
                stray.append(text[:80])
                continue
            return msg

    # -- the solver protocol --------------------------------------------------------------------
    def solve(self, view: Any, mode: str, *, item: str = "", family: str = "") -> Answer:
        """Send one solve request and wait for the reply (restarting a dead or hung child)."""
        with self._lock:
            if self._child is None:
                self.restarts += 1
                self._start()
            child = self._child
            assert child is not None
            self._counter += 1
            rid = f"t{self._counter}"
            if isinstance(view, bytes | bytearray):
                view = base64.b64encode(view).decode("ascii")
            request = {
                "version": PROTOCOL_VERSION,
                "type": "solve",
                "id": rid,
                "item": item,
                "family": family,
                "mode": mode,
                "medium": self.medium,
                "view": view,
            }
            try:
                child.send(request)
            except OSError:
                pass  # a dead child is reported by the read below
            reply = self._read_reply(child, rid, self.timeout, what="reply", strict=False)
        if reply.get("version") != PROTOCOL_VERSION:
            raise TrialFailure(
                "failed", f"reply version {reply.get('version')!r}; expected {PROTOCOL_VERSION}"
            )
        if reply.get("error") is not None:
            raise TrialFailure("failed", f"child reported: {str(reply['error'])[:200]}")
        if "answer" not in reply and "text" not in reply:
            raise TrialFailure(
                "invalid", "reply has neither 'answer' nor 'text'", raw=json.dumps(reply)[:2000]
            )
        return coerce_answer(reply)

    def close(self) -> None:
        """Stop the child."""
        with self._lock:
            self._drop()

    def __del__(self) -> None:
        with contextlib.suppress(Exception):
            self._drop()
