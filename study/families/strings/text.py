"""Strings as text: encoding and decoding symbols, and reading an answer out of a reply."""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from functools import lru_cache
from typing import Any


def _encode(text: str, symbols: str) -> tuple[int, ...]:
    return tuple(symbols.index(c) for c in text)


def _decode(seq: Sequence[int], symbols: str) -> str:
    return "".join(symbols[v] for v in seq)


_SEPARATORS = re.compile(r"[\s,;·\-–—_|/]+")
_STRIP = "\"'`*“”‘’«»()[]{}<>.:!?"


def _clean(text: str, symbols: str) -> str | None:
    """A candidate answer with separators and wrapping punctuation removed, or ``None``."""
    s = text.strip().strip(_STRIP).strip()
    if symbols.isalpha():
        s = s.lower()
    s = _SEPARATORS.sub("", s)
    if not s or any(c not in symbols for c in s):
        return None
    return s


@lru_cache(maxsize=8)
def _marker() -> re.Pattern[str]:
    return re.compile(
        r"(?:final\s+answer|answer|result|output)\s*(?:is|would\s+be|:|=|-)?\s*[:=]?\s*",
        re.IGNORECASE,
    )


def _segment_answer(segment: str, symbols: str, near: set[str]) -> str | None:
    """The answer written at the start of a segment (``pqt``, ``p q t``, ``**pqt**``), or ``None``.

    Punctuation-only tokens are skipped. A run of single symbols separated by spaces is one answer.
    Otherwise the first token made of symbols is taken; for letter orders a later token whose
    symbols all lie near the item's strings wins over a leading ordinary word (``the``).
    """
    cleaned = []
    for tok in segment.split():
        if not tok.strip(_STRIP):
            continue  # punctuation only: ** or :
        cleaned.append(_clean(tok, symbols))
    if not cleaned or cleaned[0] is None:
        return None
    singles = []
    for c in cleaned:
        if c is None or len(c) != 1:
            break
        singles.append(c)
    if len(singles) >= 2:
        return "".join(singles)
    first = cleaned[0]
    if not symbols.isalpha() or set(first) <= near:
        return first
    for c in cleaned[1:]:
        if c is not None and len(c) >= 2 and set(c) <= near:
            return c
    return first


def _near(symbols: str, stimulus: Mapping[str, Any]) -> set[str]:
    """Symbols within two places of a symbol of the target or the changed string."""
    n = len(symbols)
    return {
        symbols[(symbols.index(c) + k) % n]
        for c in stimulus["target"] + stimulus["changed"]
        for k in (-2, -1, 0, 1, 2)
    }


def _parse_reply(text: str, symbols: str, stimulus: Mapping[str, Any]) -> str | None:
    near = _near(symbols, stimulus)
    # 1. after the last "Answer:"-style marker
    for m in reversed(list(_marker().finditer(text))):
        lines = [ln for ln in text[m.end() :].split("\n") if ln.strip(_STRIP + " \t")]
        rest = lines[0] if lines else ""
        got = _segment_answer(rest, symbols, near)
        if got is not None:
            return got
    # 2. the last code block, quoted or bold stretch
    spans = re.findall(
        r"```[^\n]*\n(.*?)```|`([^`\n]+)`|\*\*([^*\n]+)\*\*|\"([^\"\n]+)\"", text, re.DOTALL
    )
    for groups in reversed(spans):
        inner = next((g for g in groups if g), "")
        for line in reversed(inner.strip().splitlines()):
            got = _clean(line, symbols)
            if got is not None:
                return got
    # 3. the last run of symbols in prose that could be an answer to this item: two or more
    # symbols, each near the target or the changed string (so ordinary words are not taken for
    # answers), preferring runs other than the strings shown
    shown = {stimulus["source"], stimulus["changed"], stimulus["target"]}
    cands = []
    for line in text.splitlines():
        for tok in re.split(r"\s+|->|→|=>", line):
            c = _clean(tok, symbols)
            if c is not None and len(c) >= 2 and set(c) <= near:
                cands.append(c)
    fresh = [c for c in cands if c not in shown]
    if fresh:
        return fresh[-1]
    return cands[-1] if cands else None
