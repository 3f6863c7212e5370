"""Plausible wrong answers of the ``strings`` family: one-symbol edits and partial changes."""

from __future__ import annotations

import numpy as np

from .._base import Rejected


def _sample_edits(
    answer: str, symbols: str, k: int, exclude: set[str], rng: np.random.Generator
) -> list[str]:
    """``k`` distinct one-symbol edits of ``answer`` outside ``exclude``."""
    out: list[str] = []
    seen = set(exclude)
    for _ in range(20 * k):
        if len(out) >= k:
            return out
        i = int(rng.integers(len(answer)))
        kind = int(rng.integers(3))
        s = symbols[int(rng.integers(len(symbols)))]
        if kind == 0:
            cand = answer[:i] + s + answer[i + 1 :]
        elif kind == 1:
            cand = answer[:i] + s + answer[i:]
        else:
            cand = answer[:i] + answer[i + 1 :]
        if cand and cand not in seen:
            seen.add(cand)
            out.append(cand)
    rest = [e for e in _one_edits(answer, symbols) if e not in seen]
    if len(out) + len(rest) < k:
        raise Rejected("too few distractors")
    idx = rng.choice(len(rest), size=k - len(out), replace=False)
    return out + [rest[int(i)] for i in sorted(idx)]


def _one_edits(answer: str, symbols: str) -> list[str]:
    out: list[str] = []
    seen = {answer}
    for i in range(len(answer)):
        for s in symbols:
            for cand in (answer[:i] + s + answer[i + 1 :], answer[:i] + s + answer[i:]):
                if cand not in seen:
                    seen.add(cand)
                    out.append(cand)
        if len(answer) > 1:
            cand = answer[:i] + answer[i + 1 :]
            if cand not in seen:
                seen.add(cand)
                out.append(cand)
    return out


def _partials(tgt: tuple[int, ...], ans: tuple[int, ...]) -> list[tuple[int, ...]]:
    """Responses that carry out part of the change from ``tgt`` to ``ans``."""
    out: list[tuple[int, ...]] = []
    if len(tgt) == len(ans):
        diff = [i for i in range(len(ans)) if ans[i] != tgt[i]]
        if len(diff) >= 2:
            for i in diff:  # leave one changed place unchanged / change only one place
                r = list(ans)
                r[i] = tgt[i]
                out.append(tuple(r))
                r = list(tgt)
                r[i] = ans[i]
                out.append(tuple(r))
    elif len(ans) > len(tgt) and ans[: len(tgt)] == tgt:
        out.extend(ans[:k] for k in range(len(tgt) + 1, len(ans)))
    elif len(ans) < len(tgt) and tgt[len(tgt) - len(ans) :] == ans:
        out.extend(tgt[k:] for k in range(1, len(tgt) - len(ans)))
    return [o for o in out if o != ans and o != tgt]


def _is_partial(tgt: tuple[int, ...], ans: tuple[int, ...], resp: tuple[int, ...]) -> bool:
    if resp == ans or resp == tgt:
        return False
    if len(tgt) == len(ans) == len(resp):
        return all(r == a or r == t for r, a, t in zip(resp, ans, tgt, strict=True))
    if len(tgt) < len(resp) < len(ans):
        return ans[: len(resp)] == resp and resp[: len(tgt)] == tgt
    if len(ans) < len(resp) < len(tgt):
        return tgt[len(tgt) - len(resp) :] == resp and resp[len(resp) - len(ans) :] == ans
    return False
