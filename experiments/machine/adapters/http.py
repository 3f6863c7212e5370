"""The ``http:`` adapter: a chat-style HTTP endpoint (``http:URL`` or a bare ``http(s)://`` URL)."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from . import Adapter

if TYPE_CHECKING:  # pragma: no cover
    from twofold.experiments.solvers import Solver

    from ..spec import SolverSpec

__all__ = ["ADAPTER", "url"]


def url(spec: str) -> str:
    """The endpoint address of a spec string (``http:https://...`` drops the first prefix)."""
    return spec[len("http:") :] if spec.startswith("http:http") else spec


def default_name(spec: str) -> str:
    """``http-`` and the address without its scheme (``http-127-0-0-1-8000-v1-chat``)."""
    return "http-" + re.sub(r"[^A-Za-z0-9]+", "-", url(spec).split("://", 1)[-1]).strip("-")


def build(spec: SolverSpec, seed: int, where: str) -> Solver:
    """A client of the endpoint; it checks that the endpoint answers."""
    from ..chat import ChatSolver

    return ChatSolver(
        url(spec.spec),
        options=spec.options,
        seed=seed,
        timeout=spec.timeout,
        name=spec.name,
        medium=spec.medium,
    )


ADAPTER = Adapter(
    "http",
    ("http:", "https:"),
    "http:URL",
    default_name,
    build,
    own_timeout=True,
    worker_processes=False,
)
