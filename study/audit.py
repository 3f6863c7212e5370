"""Audit a bank: coverage, duplicates, answer uniqueness, rendering and choices-only shortcuts.

The audit is generic: it reaches families only through the family interface (``check``, the
renderers) and reads choices as plain JSON, so a new family is audited without changes here.

The **context-blind shortcut audit** asks whether the answer of select-mode items can be found
from the choices alone, without looking at the stimulus. Two solvers see only the choices, each
flattened into ``path -> scalar`` features (``{"a": {"b": [1, 2]}}`` gives ``a.b.0`` and
``a.b.1``):

* **majority vote** -- for every feature, the modal value(s) among the choices (all tied values
  count as modal); the choice agreeing with the most modal values wins;
* **nearest to centroid** -- every choice one-hot encoded over ``(path, value)``; the choice
  nearest (Euclidean) to the mean vector wins. Since
  ``||x_k - m||^2 = sum_paths (1 - 2 f(v_k) + sum_v f(v)^2)`` with ``f`` the share of choices
  holding a value, this is the choice whose values are, summed over paths, the most frequent.

Ties are counted fractionally (a tie of ``t`` choices that includes the answer scores ``1/t``),
so a set where every choice ties scores exactly chance. Per (family, distractor scheme, number of
choices) the audit reports accuracy, chance (``1/n_choices``) and a one-sided exact binomial test
of the (rounded) number of hits against chance; a set with ``p < alpha`` for either solver is
flagged: its distractors leak the answer.
"""

from __future__ import annotations

import json
from collections import Counter, defaultdict
from collections.abc import Callable, Iterable, Mapping
from typing import Any

import numpy as np

from .bank import Bank
from .families import get_family
from .item import Item, canonical_json

__all__ = ["audit_bank", "choice_shortcuts", "flatten"]

_PNG = b"\x89PNG\r\n\x1a\n"
_ABSENT = "\x00absent"


# -- features of JSON payloads ---------------------------------------------------------------
def flatten(obj: Any, prefix: str = "") -> dict[str, str]:
    """Flatten a JSON value into ``{path: canonical JSON of a scalar}``.

    Dict keys and list positions join with dots; an empty dict or list is a leaf of its own.

    Examples
    --------
    >>> flatten({"a": {"b": [1, "x"]}, "c": None})
    {'a.b.0': '1', 'a.b.1': '"x"', 'c': 'null'}
    """
    out: dict[str, str] = {}
    _flatten_into(obj, prefix, out)
    return out


def _flatten_into(obj: Any, path: str, out: dict[str, str]) -> None:
    if isinstance(obj, Mapping) and obj:
        for k in sorted(obj, key=str):
            _flatten_into(obj[k], f"{path}.{k}" if path else str(k), out)
    elif isinstance(obj, list | tuple) and obj:
        for i, v in enumerate(obj):
            _flatten_into(v, f"{path}.{i}" if path else str(i), out)
    else:
        out[path] = canonical_json(obj)


def choice_shortcuts(choices: Iterable[Any]) -> dict[str, list[int]]:
    """Winners (0-based choice indices, ties included) of the two choices-only solvers.

    Parameters
    ----------
    choices : iterable of JSON values
        The choices of one item.

    Returns
    -------
    dict
        ``{"majority": [...], "centroid": [...]}``: the indices of the choices that tie for the
        best score under each solver (see the module docstring).
    """
    feats = [flatten(c) for c in choices]
    paths = sorted({p for f in feats for p in f})
    majority = [0] * len(feats)
    centroid = [0] * len(feats)
    for path in paths:
        vals = [f.get(path, _ABSENT) for f in feats]
        counts = Counter(vals)
        top = max(counts.values())
        for k, v in enumerate(vals):
            if counts[v] == top:
                majority[k] += 1
            centroid[k] += counts[v]  # sum of shares times n_choices: same argmax
    best_m, best_c = max(majority), max(centroid)
    return {
        "majority": [k for k, s in enumerate(majority) if s == best_m],
        "centroid": [k for k, s in enumerate(centroid) if s == best_c],
    }


# -- the audit -------------------------------------------------------------------------------
def audit_bank(
    bank: Bank,
    *,
    progress: Callable[[int], Any] | None = None,
    picture_sample: int | None = 6,
    alpha: float = 0.05,
    seed: int = 0,
) -> dict[str, Any]:
    """Audit every item of ``bank``.

    Parameters
    ----------
    bank : Bank
        The bank to audit.
    progress : callable, optional
        Called with ``1`` after each item is audited (for progress bars).
    picture_sample : int or None, default 6
        Pictures are slow to draw; render at most this many items per family as pictures (drawn
        at random with ``seed``). ``None`` renders every item. Text and structured views are
        always rendered for every item and mode.
    alpha : float, default 0.05
        Significance level of the shortcut test.
    seed : int, default 0
        Seeds the picture sample.

    Returns
    -------
    dict
        Plain JSON: ``bank_hash``, ``n_items``, ``families`` (items per family, parents,
        variants, modes, distractor schemes and items per factor level), ``duplicates``
        (``same_content``: groups of ids whose records agree apart from id and seed;
        ``same_stimulus_answer``: groups with identical stimulus and answer), ``uniqueness``
        (answer-uniqueness problems per item), ``rendering`` (counts checked per medium, whether
        pictures were sampled, failures), ``shortcuts`` (one row per family, scheme and number
        of choices), ``flags`` (every finding that needs attention; empty for a clean bank).
    """
    items = list(bank.items)
    report: dict[str, Any] = {
        "bank_hash": bank.meta.get("bank_hash"),
        "n_items": len(items),
        "families": _coverage(items),
        "duplicates": _duplicates(items),
    }
    by_family: dict[str, list[int]] = defaultdict(list)
    for i, it in enumerate(items):
        by_family[it.family].append(i)
    rng = np.random.default_rng(seed)
    pictured: set[int] = set()
    sampled = False
    for _fam, idx in sorted(by_family.items()):
        if picture_sample is None or len(idx) <= picture_sample:
            pictured.update(idx)
        else:
            sampled = True
            pictured.update(int(i) for i in rng.choice(idx, size=picture_sample, replace=False))
    uniqueness: list[dict[str, Any]] = []
    failures: list[dict[str, Any]] = []
    checked: Counter[str] = Counter()
    for i, it in enumerate(items):
        uniqueness.extend(_uniqueness(it))
        for medium in ("text", "structured", "picture"):
            if medium == "picture" and i not in pictured:
                continue
            for mode in it.modes:
                checked[medium] += 1
                err = _render_problem(it, medium, mode)
                if err:
                    failures.append(
                        {
                            "item": it.id,
                            "family": it.family,
                            "medium": medium,
                            "mode": mode,
                            "error": err,
                        }
                    )
        if progress is not None:
            progress(1)
    report["uniqueness"] = uniqueness
    report["rendering"] = {
        "checked": {m: checked[m] for m in ("text", "structured", "picture")},
        "picture_sampled": sampled,
        "picture_sample_per_family": picture_sample,
        "failures": failures,
    }
    report["shortcuts"] = _shortcuts(items, alpha=alpha)
    report["alpha"] = alpha
    report["flags"] = _flags(report)
    return report


def _coverage(items: list[Item]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for it in items:
        f = out.setdefault(
            it.family,
            {
                "n_items": 0,
                "n_parents": 0,
                "n_variants": 0,
                "modes": Counter(),
                "distractor_schemes": Counter(),
                "variant_operators": Counter(),
                "factors": {},
            },
        )
        f["n_items"] += 1
        f["n_variants" if it.variant_of else "n_parents"] += 1
        for m in it.modes:
            f["modes"][m] += 1
        if it.distractor_scheme is not None:
            f["distractor_schemes"][it.distractor_scheme] += 1
        if it.variant_operator is not None:
            f["variant_operators"][it.variant_operator] += 1
        for name, level in it.factors.items():
            f["factors"].setdefault(name, Counter())[_level(level)] += 1
    for f in out.values():
        for key in ("modes", "distractor_schemes", "variant_operators"):
            f[key] = dict(sorted(f[key].items()))
        f["factors"] = {
            name: dict(sorted(c.items(), key=lambda kv: _sort_key(kv[0])))
            for name, c in sorted(f["factors"].items())
        }
    return dict(sorted(out.items()))


def _level(v: Any) -> str:
    return v if isinstance(v, str) else canonical_json(v)


def _sort_key(s: str) -> tuple[int, float, str]:
    try:
        return (0, float(s), s)
    except ValueError:
        return (1, 0.0, s)


def _duplicates(items: list[Item]) -> dict[str, list[list[str]]]:
    content: dict[str, list[str]] = defaultdict(list)
    stim: dict[str, list[str]] = defaultdict(list)
    for it in items:
        rec = it.to_record()
        rec.pop("id")
        rec.pop("seed")
        content[canonical_json(rec)].append(it.id)
        stim[canonical_json([it.family, it.stimulus, it.answer])].append(it.id)
    return {
        "same_content": [ids for ids in content.values() if len(ids) > 1],
        "same_stimulus_answer": [ids for ids in stim.values() if len(ids) > 1],
    }


def _uniqueness(it: Item) -> list[dict[str, Any]]:
    problems: list[str] = []
    if it.choices is not None:
        key = canonical_json(it.answer)
        hits = sum(canonical_json(c) == key for c in it.choices)
        if hits != 1:
            problems.append(f"the answer appears {hits} times among the choices (expected once)")
    try:
        fam = get_family(it.family)
    except ValueError:
        problems.append(f"family {it.family!r} is not registered; its checks could not run")
    else:
        try:
            found = fam.check(it)
        except Exception as err:  # a check that crashes is itself a finding
            found = [f"check raised {type(err).__name__}: {err}"]
        problems.extend(p for p in found if p not in problems)
    return [{"item": it.id, "family": it.family, "problem": p} for p in problems]


def _render_problem(it: Item, medium: str, mode: str) -> str | None:
    from .render import render, render_picture

    try:
        if medium == "picture":
            out = render_picture(it, mode)
            if not isinstance(out, bytes) or not out.startswith(_PNG):
                return "the picture is not a PNG image"
            return None
        out = render(it, medium, mode)
        if medium == "text":
            if not isinstance(out, str) or not out.strip():
                return "the text view is empty"
        else:
            if not isinstance(out, dict):
                return f"the structured view is a {type(out).__name__}, not a dict"
            json.dumps(out, allow_nan=False)
    except Exception as err:  # report every failure; the audit must finish
        return f"{type(err).__name__}: {err}"
    return None


def _shortcuts(items: list[Item], *, alpha: float) -> list[dict[str, Any]]:
    from scipy.stats import binomtest

    groups: dict[tuple[str, str, int], list[tuple[float, float]]] = defaultdict(list)
    for it in items:
        if it.choices is None or "select" not in it.modes:
            continue
        target = it.answer_choice
        if target is None:
            continue  # reported as a uniqueness problem
        wins = choice_shortcuts(it.choices)
        credit = tuple(
            (1.0 / len(w) if target - 1 in w else 0.0) for w in (wins["majority"], wins["centroid"])
        )
        key = (it.family, it.distractor_scheme or "(none)", len(it.choices))
        groups[key].append(credit)  # type: ignore[arg-type]
    rows = []
    for (fam, scheme, n_choices), credits in sorted(groups.items()):
        n = len(credits)
        chance = 1.0 / n_choices
        row: dict[str, Any] = {
            "family": fam,
            "distractor_scheme": scheme,
            "n_choices": n_choices,
            "n_items": n,
            "chance": chance,
        }
        flagged = False
        for j, name in enumerate(("majority", "centroid")):
            total = sum(c[j] for c in credits)
            hits = round(total)
            p = float(binomtest(hits, n, chance, alternative="greater").pvalue)
            row[f"{name}_accuracy"] = total / n
            row[f"{name}_hits"] = hits
            row[f"{name}_p"] = p
            flagged = flagged or p < alpha
        row["flagged"] = flagged
        rows.append(row)
    return rows


def _flags(report: Mapping[str, Any]) -> list[dict[str, Any]]:
    flags: list[dict[str, Any]] = []
    dup = report["duplicates"]
    for ids in dup["same_content"]:
        flags.append(
            {
                "kind": "duplicate",
                "items": ids,
                "message": f"{len(ids)} items share their content apart from id/seed: "
                + ", ".join(ids),
            }
        )
    for ids in dup["same_stimulus_answer"]:
        flags.append(
            {
                "kind": "duplicate",
                "items": ids,
                "message": f"{len(ids)} items have the same stimulus and answer: " + ", ".join(ids),
            }
        )
    for u in report["uniqueness"]:
        flags.append(
            {
                "kind": "uniqueness",
                "items": [u["item"]],
                "family": u["family"],
                "message": f"{u['item']}: {u['problem']}",
            }
        )
    for f in report["rendering"]["failures"]:
        flags.append(
            {
                "kind": "rendering",
                "items": [f["item"]],
                "family": f["family"],
                "message": f"{f['item']}: {f['medium']} view ({f['mode']}) failed: {f['error']}",
            }
        )
    for s in report["shortcuts"]:
        if s["flagged"]:
            flags.append(
                {
                    "kind": "shortcut",
                    "family": s["family"],
                    "distractor_scheme": s["distractor_scheme"],
                    "message": (
                        f"{s['family']} / {s['distractor_scheme']} ({s['n_items']} items, "
                        f"{s['n_choices']} choices): the choices alone give away the answer "
                        f"(majority vote {s['majority_accuracy']:.1%}, p = {s['majority_p']:.2g}; "
                        f"centroid {s['centroid_accuracy']:.1%}, p = {s['centroid_p']:.2g}; "
                        f"chance {s['chance']:.1%})"
                    ),
                }
            )
    return flags
