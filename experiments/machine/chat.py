"""The HTTP adapter: a chat-style endpoint that answers the text view in free text.

Request (POST, JSON) -- the widely used open chat-completions shape::

    {"model": "<options.model>",
     "messages": [{"role": "system", "content": "<options.system>"},   (only when set)
                  {"role": "user", "content": "<the item's text view>"}],
     "temperature": 0.0, "max_tokens": 512, "seed": <session seed>}

Response (JSON)::

    {"choices": [{"message": {"role": "assistant", "content": "<reply text>"}}],
     "usage": {"completion_tokens": 42}}                                 (usage optional)

The reply text goes to the item's family (``parse_text``) to extract the response, so a chatty
reply works. Effort is ``usage.completion_tokens`` in ``tokens`` when given, else wall-clock
``seconds``.

Options (``[solvers.options]``)
-------------------------------
model, temperature (0.0), max_tokens (512), system (none), headers (a table of extra headers),
api_key_env (name of the environment variable holding the key, sent as ``Authorization: Bearer``;
the key itself is never written anywhere), concurrency (4 requests in flight), per_minute (requests
per minute, none = unlimited), retries (4), backoff (0.5 s, doubled per retry, with jitter, capped
at ``backoff_max`` 30 s), request_timeout (the trial timeout), probe (true: check at start that the
endpoint answers at all).

Timeouts, connection errors, 429 and 5xx are retried with exponential backoff and jitter (a 429's
``Retry-After`` is honoured up to ``backoff_max``); other 4xx fail the trial; a 200 whose body is
not the JSON above is logged ``invalid`` with the raw body.
"""

from __future__ import annotations

import os
import random
import threading
import time
from collections.abc import Mapping
from typing import Any

import httpx
from twofold.experiments.solvers import Answer
from twofold.study.exceptions import SolverError

from ._core import FreeText, TrialFailure, scrub

__all__ = ["ChatSolver", "RateLimiter"]

_OPTIONS = (
    "model",
    "temperature",
    "max_tokens",
    "system",
    "headers",
    "api_key_env",
    "concurrency",
    "per_minute",
    "retries",
    "backoff",
    "backoff_max",
    "request_timeout",
    "probe",
    "medium",
)


class RateLimiter:
    """Spaces request starts at least ``60 / per_minute`` seconds apart (thread-safe)."""

    def __init__(self, per_minute: float | None):
        self.interval = 60.0 / per_minute if per_minute else 0.0
        self._next = 0.0
        self._lock = threading.Lock()

    def wait(self) -> float:
        """Block until this caller's slot; return the slot (``time.monotonic()`` seconds)."""
        now = time.monotonic()
        if not self.interval:
            return now
        with self._lock:
            slot = max(now, self._next)
            self._next = slot + self.interval
        if slot > now:
            time.sleep(slot - now)
        return slot


class ChatSolver:
    """A solver behind a chat-style HTTP endpoint (see the module docstring for the shapes).

    Parameters
    ----------
    url : str
        The endpoint (http or https).
    options : mapping
        See the module docstring; unknown options are an error.
    seed : int
        Sent as ``seed`` in every request.
    timeout : float
        Seconds per trial (the default per-request timeout).
    name : str
        The study's name for the solver (in error messages).
    """

    medium = "text"

    def __init__(
        self,
        url: str,
        *,
        options: Mapping[str, Any] | None = None,
        seed: int = 0,
        timeout: float = 120.0,
        name: str = "http",
    ):
        opts = dict(options or {})
        where = f"solver '{name}'"
        unknown = sorted(set(opts) - set(_OPTIONS))
        if unknown:
            raise SolverError(
                f"{where}: field 'options.{unknown[0]}': unknown option; accepted: "
                + ", ".join(sorted(_OPTIONS))
                + "."
            )
        if not url.startswith(("http://", "https://")):
            raise SolverError(f"{where}: url {url!r} must start with http:// or https://.")
        if opts.get("medium", "text") != "text":
            raise SolverError(f"{where}: the chat adapter sends the text view; set medium = text.")
        self.url, self.name, self.seed = url, name, seed

        def num(key: str, default: float, low: float, high: float, *, whole: bool = False) -> Any:
            value = opts.get(key, default)
            kinds = (int,) if whole else (int, float)
            if (
                isinstance(value, bool)
                or not isinstance(value, kinds)
                or not low <= value <= high
                or value != value
            ):
                kind = "an integer" if whole else "a number"
                raise SolverError(
                    f"{where}: field 'options.{key}': got {value!r}; accepted: {kind} from "
                    f"{low:g} to {high:g}."
                )
            return value

        self.model = opts.get("model", "")
        if not isinstance(self.model, str):
            raise SolverError(
                f"{where}: field 'options.model': got {self.model!r}; accepted: text."
            )
        self.temperature = float(num("temperature", 0.0, 0.0, 10.0))
        self.max_tokens = int(num("max_tokens", 512, 1, 10_000_000, whole=True))
        self.system = opts.get("system")
        if self.system is not None and not isinstance(self.system, str):
            raise SolverError(
                f"{where}: field 'options.system': got {self.system!r}; accepted: text."
            )
        self.concurrency = int(num("concurrency", 4, 1, 256, whole=True))
        self.retries = int(num("retries", 4, 0, 100, whole=True))
        self.backoff = float(num("backoff", 0.5, 0.0, 3600.0))
        self.backoff_max = float(num("backoff_max", 30.0, 0.0, 86400.0))
        self.request_timeout = float(num("request_timeout", timeout, 0.001, 86400.0))
        per_minute = opts.get("per_minute")
        if per_minute is not None:
            per_minute = num("per_minute", 60, 0.001, 1e9)
        self.max_in_flight = self.concurrency
        self._limiter = RateLimiter(per_minute)
        self._gate = threading.BoundedSemaphore(self.concurrency)
        raw_headers = opts.get("headers") or {}
        if not isinstance(raw_headers, Mapping):
            raise SolverError(
                f"{where}: field 'options.headers': got {type(raw_headers).__name__}; "
                "accepted: a table of header names and values."
            )
        headers = {str(k): str(v) for k, v in raw_headers.items()}
        #: values the runner writes as ``***`` wherever they would appear (header values, the key)
        self.secrets: list[str] = list(headers.values())
        env = opts.get("api_key_env")
        if env:
            key = os.environ.get(str(env))
            if not key:
                raise SolverError(
                    f"{where}: environment variable {env} (options.api_key_env) is not set; "
                    "export the API key in it."
                )
            headers["Authorization"] = f"Bearer {key}"
            self.secrets += [key, headers["Authorization"]]
        self._client = httpx.Client(
            headers=headers,
            timeout=httpx.Timeout(self.request_timeout, connect=min(10.0, self.request_timeout)),
            limits=httpx.Limits(
                max_connections=self.concurrency, max_keepalive_connections=self.concurrency
            ),
        )
        if opts.get("probe", True):
            self._probe(where)

    def _probe(self, where: str) -> None:
        try:
            self._client.get(self.url, timeout=min(5.0, self.request_timeout))
        except httpx.TimeoutException:
            return  # it accepted the connection; slow, but up
        except httpx.TransportError as err:
            self._client.close()
            raise SolverError(
                f"{where}: cannot reach {self.url} ({type(err).__name__}); start the endpoint "
                "or fix the url."
            ) from None

    def request_body(self, text: str) -> dict[str, Any]:
        """The JSON body sent for one text view."""
        messages = []
        if self.system:
            messages.append({"role": "system", "content": str(self.system)})
        messages.append({"role": "user", "content": text})
        body: dict[str, Any] = {
            "messages": messages,
            "temperature": self.temperature,
            "max_tokens": self.max_tokens,
            "seed": self.seed,
        }
        if self.model:
            body["model"] = self.model
        return body

    def _delay(self, attempt: int, retry_after: str | None = None) -> float:
        if retry_after is not None:
            try:
                return min(float(retry_after), self.backoff_max)
            except ValueError:
                pass
        base = min(self.backoff * 2**attempt, self.backoff_max)
        return base * (0.5 + random.random() / 2)  # noqa: S311 - jitter, not security

    def solve(self, view: Any, mode: str) -> Answer:
        if not isinstance(view, str):
            raise TrialFailure("failed", "the chat adapter needs the text view")
        body = self.request_body(view)
        t0 = time.monotonic()
        last, status = "", "failed"
        retry_after: str | None = None
        with self._gate:
            for attempt in range(self.retries + 1):
                if attempt:
                    time.sleep(self._delay(attempt - 1, retry_after))
                retry_after = None
                self._limiter.wait()
                try:
                    resp = self._client.post(self.url, json=body)
                except httpx.TimeoutException:
                    last, status = f"request timed out after {self.request_timeout:g} s", "timeout"
                    continue
                except httpx.TransportError as err:
                    last, status = f"connection error ({type(err).__name__})", "failed"
                    continue
                if resp.status_code == 429 or resp.status_code >= 500:
                    last, status = f"HTTP {resp.status_code}", "failed"
                    retry_after = resp.headers.get("retry-after")
                    continue
                if resp.status_code >= 400:
                    raise TrialFailure(
                        "failed",
                        f"HTTP {resp.status_code} (not retried)",
                        raw=scrub(resp.text[:2000], self.secrets),
                    )
                try:
                    return self._answer(resp, time.monotonic() - t0)
                except TrialFailure as err:
                    err.raw = scrub(err.raw, self.secrets)
                    raise
        raise TrialFailure(status, f"{last}; gave up after {self.retries + 1} attempts")

    @staticmethod
    def _answer(resp: httpx.Response, seconds: float) -> Answer:
        raw = resp.text
        try:
            data = resp.json()
            content = data["choices"][0]["message"]["content"]
        except (ValueError, KeyError, IndexError, TypeError):
            raise TrialFailure(
                "invalid",
                "reply body is not a chat response (choices[0].message.content)",
                raw=raw[:2000],
            ) from None
        if not isinstance(content, str):
            raise TrialFailure("invalid", "reply content is not text", raw=raw[:2000])
        tokens = None
        usage = data.get("usage") if isinstance(data, dict) else None
        if isinstance(usage, dict) and isinstance(usage.get("completion_tokens"), int | float):
            tokens = float(usage["completion_tokens"])
        if tokens is not None:
            return Answer(FreeText(content), effort=tokens, effort_unit="tokens", raw=content)
        return Answer(FreeText(content), effort=seconds, effort_unit="seconds", raw=content)

    def close(self) -> None:
        self._client.close()
