"""The HTTP adapter: a chat-style endpoint that answers an item's view in free text.

Request (POST, JSON) -- the widely used open chat-completions shape::

    {"model": "<options.model>",
     "messages": [{"role": "system", "content": "<system text>"},       (only when set)
                  {"role": "user", "content": "<user text around the item's text view>"}],
     "temperature": 0.0, "max_tokens": 512, "seed": <session seed>}

With the picture medium (``medium = "picture"`` in the ``[[solvers]]`` entry, or the option
``medium = "picture"``) the user message carries a list of content parts instead, the item's
picture as a base64 PNG data URL where the template places the view, for vision-language models::

    {"role": "user", "content": [
        {"type": "text", "text": "<user text before the view>"},
        {"type": "image_url", "image_url": {"url": "data:image/png;base64,iVBORw0KGgo..."}},
        {"type": "text", "text": "<user text after the view>"}]}         (empty parts left out)

Response (JSON)::

    {"choices": [{"message": {"role": "assistant", "content": "<reply text>"}}],
     "usage": {"completion_tokens": 42}}                                 (usage optional)

The reply text goes to the item's family (``parse_text``) to extract the response, so a chatty
reply works. Effort is ``usage.completion_tokens`` in ``tokens`` when given, else wall-clock
``seconds``.

Prompt template
---------------
The system and user text around the view come from the study's ``[machine.prompt]`` table
(``system``, ``user``), which an entry's options ``system`` / ``user`` override. ``user`` holds
``{view}`` exactly once, where the item's view goes; ``{mode}`` (``generate`` or ``select``) may
appear in either text; other braces are sent as written. Without a template the user message is
the text view alone (:data:`DEFAULT_USER`), or :data:`DEFAULT_PICTURE_USER` for pictures. The
SHA-256 of the template in force (:attr:`ChatSolver.prompt_sha256`) is written to each session's
sidecar as ``prompt_sha256``, and the template is part of the solver's identity: a new template
starts a new session instead of replaying old answers.

Options (``[solvers.options]``)
-------------------------------
model (required: the model name the endpoint expects, sent in every request), medium (``text``
or ``picture``), system, user (the prompt template above), temperature (0.0), max_tokens (512),
headers (a table of extra headers), api_key_env (name of the environment variable holding the
key, sent as ``Authorization: Bearer``; the key itself is never written anywhere), concurrency (4
requests in flight), per_minute (requests per minute, none = unlimited), retries (4), backoff
(0.5 s, doubled per retry, with jitter, capped at ``backoff_max`` 30 s), request_timeout (the
trial timeout), probe (true: check at start that the endpoint answers at all). Every option is
checked when the solver is built, before the first trial.

Timeouts, connection errors, 429 and 5xx are retried with exponential backoff and jitter (a 429's
``Retry-After`` is honoured up to ``backoff_max``); other 4xx fail the trial; a 200 whose body is
not the JSON above is logged ``invalid`` with the raw body.
"""

from __future__ import annotations

import base64
import dataclasses
import hashlib
import os
import random
import threading
import time
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import httpx
from twofold.experiments.solvers import Answer
from twofold.study.checks import fail
from twofold.study.exceptions import SolverError, SpecError
from twofold.study.item import canonical_json

from ._core import FreeText, TrialFailure, scrub

if TYPE_CHECKING:  # pragma: no cover
    from .spec import SolverSpec

__all__ = [
    "CHAT_MEDIA",
    "DEFAULT_PICTURE_USER",
    "DEFAULT_USER",
    "ChatSolver",
    "RateLimiter",
    "check_prompt",
    "prompt_sha256",
    "study_prompt",
    "with_study_prompt",
]

#: where the item's view goes in the user template
VIEW = "{view}"
#: replaced by the trial's response mode (generate or select) in either text
MODE = "{mode}"
#: the media the chat adapter can send: the text view, or the picture as an image part
CHAT_MEDIA = ("text", "picture")
#: the user template when none is set, for text views: the view alone
DEFAULT_USER = VIEW
#: the user template when none is set, for pictures (a study should set its own)
DEFAULT_PICTURE_USER = (
    "The puzzle is shown in this picture:\n"
    + VIEW
    + "\nSolve it ({mode} mode: in select mode, answer with the number of your choice). End "
    'your reply with one line "Answer: <your answer>".'
)

_OPTIONS = (
    "model",
    "user",
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


def prompt_sha256(system: str | None, user: str) -> str:
    """SHA-256 (hex) of a prompt template: the canonical JSON of ``{"system": ..., "user": ...}``.

    ``system`` is ``None`` when no system message is sent. This is the ``prompt_sha256`` a chat
    session's sidecar records; compute it for your own template to find its sessions.
    """
    body = {"system": system, "user": user}
    return hashlib.sha256(canonical_json(body).encode("utf-8")).hexdigest()


def check_prompt(system: Any, user: Any, *, where: str, prefix: str = "") -> None:
    """Check a prompt template: text, ``{view}`` exactly once in ``user`` and never in ``system``.

    Raises
    ------
    SpecError
        Naming ``<prefix>system`` or ``<prefix>user``, what was found and what is accepted.
    """
    if system is not None and (not isinstance(system, str) or VIEW in system):
        accepted = "text without {view} (the view goes in the user text)"
        raise fail(prefix + "system", system, accepted, where=where, error=SpecError)
    if user is not None and (not isinstance(user, str) or user.count(VIEW) != 1):
        accepted = "text holding {view} exactly once, where the item's view goes"
        raise fail(prefix + "user", user, accepted, where=where, error=SpecError)


def study_prompt(study: Any) -> dict[str, str]:
    """The study's prompt template, ``[machine.prompt]`` in ``study.toml``, checked.

    Returns
    -------
    dict
        ``system`` and/or ``user`` as set in the study (empty when the table is absent).

    Raises
    ------
    SpecError
        The template is not text, or ``user`` does not hold ``{view}`` exactly once.
    """
    table = study.table("machine")
    prompt = table.get("prompt", {}) if isinstance(table, Mapping) else {}
    out = {k: prompt[k] for k in ("system", "user") if k in prompt}
    check_prompt(
        out.get("system"), out.get("user"), where=study.file.name, prefix="machine.prompt."
    )
    return out


def with_study_prompt(spec: SolverSpec, prompt: Mapping[str, str]) -> SolverSpec:
    """``spec`` with the study's prompt template as default options (HTTP solvers only).

    The entry's own ``system`` / ``user`` options win, key by key. Other solvers are returned
    unchanged: the template wraps a chat message, which only the HTTP adapter sends.
    """
    if spec.kind != "http" or not prompt:
        return spec
    return dataclasses.replace(spec, options={**dict(prompt), **spec.options})


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
        medium: str | None = None,
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
        medium = medium or opts.get("medium") or "text"
        if medium not in CHAT_MEDIA:
            raise SolverError(
                f"{where}: field 'medium': got {medium!r}; accepted: text or picture (the chat "
                "adapter sends the text view, or the picture as an image part)."
            )
        self.medium = medium
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

        self.model = opts.get("model")
        if not isinstance(self.model, str) or not self.model.strip():
            raise SolverError(
                f"{where}: field 'options.model': got {self.model!r}; accepted: the model name "
                'the endpoint expects (model = "..." in [solvers.options], or --option '
                "model=NAME)."
            )
        self.temperature = float(num("temperature", 0.0, 0.0, 10.0))
        self.max_tokens = int(num("max_tokens", 512, 1, 10_000_000, whole=True))
        self.system: str | None = opts.get("system")
        try:
            check_prompt(self.system, opts.get("user"), where=where, prefix="options.")
        except SpecError as err:
            raise SolverError(str(err)) from None
        default = DEFAULT_PICTURE_USER if medium == "picture" else DEFAULT_USER
        self.user: str = opts.get("user") or default
        #: SHA-256 of the prompt template in force (see :func:`prompt_sha256`)
        self.prompt_sha256 = prompt_sha256(self.system, self.user)
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

    def request_body(self, view: str | bytes, mode: str = "generate") -> dict[str, Any]:
        """The JSON body sent for one view: text, or PNG bytes sent as an image part."""
        messages: list[dict[str, Any]] = []
        if self.system:
            messages.append({"role": "system", "content": self.system.replace(MODE, mode)})
        before, _, after = self.user.replace(MODE, mode).partition(VIEW)
        content: Any
        if isinstance(view, bytes):
            url = "data:image/png;base64," + base64.b64encode(view).decode("ascii")
            image = {"type": "image_url", "image_url": {"url": url}}
            content = [
                *([{"type": "text", "text": before}] if before.strip() else []),
                image,
                *([{"type": "text", "text": after}] if after.strip() else []),
            ]
        else:
            content = before + view + after
        messages.append({"role": "user", "content": content})
        return {
            "model": self.model,
            "messages": messages,
            "temperature": self.temperature,
            "max_tokens": self.max_tokens,
            "seed": self.seed,
        }

    def _delay(self, attempt: int, retry_after: str | None = None) -> float:
        if retry_after is not None:
            try:
                return min(float(retry_after), self.backoff_max)
            except ValueError:
                pass
        base = min(self.backoff * 2**attempt, self.backoff_max)
        return base * (0.5 + random.random() / 2)  # noqa: S311 - jitter, not security

    def solve(self, view: Any, mode: str) -> Answer:
        wanted = bytes if self.medium == "picture" else str
        if not isinstance(view, wanted):
            raise TrialFailure(
                "failed", f"the chat adapter was set up for the {self.medium} view; got another"
            )
        body = self.request_body(view, mode)
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
