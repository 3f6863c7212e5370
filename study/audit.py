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

The **answer-position audit** counts, per family and number of choices (and over all families
sharing a number of choices), how often the answer is choice 1, 2, ... among select-mode items,
and tests the counts against a uniform distribution (:func:`position_uniformity`): Pearson's
chi-square goodness-of-fit test when every expected count is at least 5, otherwise the exact
multinomial test (outcomes ordered by their probability), enumerated when the outcomes are few
and estimated by Monte-Carlo draws when they are many. A row with ``p < alpha`` is flagged. Beside
it sits the **position-only baseline**: always answer the family's commonest position; its
accuracy is the share of that position (shown in the shortcut table too).
"""

from __future__ import annotations

import json
from collections import Counter, defaultdict
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any

import numpy as np

from .bank import Bank
from .families import get_family
from .item import Item, canonical_json

__all__ = [
    "answer_positions",
    "audit_bank",
    "choice_shortcuts",
    "commonest_positions",
    "flatten",
    "position_uniformity",
]

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
        pictures were sampled, failures), ``positions`` (answer positions per family and number of
        choices, see :func:`answer_positions`), ``shortcuts`` (one row per family, scheme and
        number of choices, with the position-only baseline's accuracy), ``flags`` (every
        finding that needs attention; empty for a clean bank).
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
    report["positions"] = answer_positions(items, alpha=alpha, seed=seed)
    report["shortcuts"] = _shortcuts(items, alpha=alpha)
    _add_position_baseline(report["shortcuts"], items)
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


# -- answer positions ------------------------------------------------------------------------
#: largest number of possible count vectors enumerated by the exact test
EXACT_MAX_OUTCOMES = 20_000
#: Monte-Carlo draws of the exact test when the outcomes are too many to enumerate
MC_DRAWS = 20_000


def position_uniformity(counts: Sequence[int], *, seed: int = 0) -> dict[str, Any]:
    """Test whether answer-position counts are uniform over the positions.

    Parameters
    ----------
    counts : sequence of int
        How often the answer sits at position 1, 2, ... (one entry per position, zeros
        included).
    seed : int, default 0
        Seeds the Monte-Carlo draws (used only when the exact test has too many outcomes).

    Returns
    -------
    dict
        ``statistic`` (Pearson's X^2), ``p_val``, ``method`` (``"chi-square"``,
        ``"exact multinomial"`` or ``"monte-carlo multinomial"``) and ``n``.

    Notes
    -----
    With ``n`` answers over ``k`` positions the expected count is ``e = n / k`` and
    ``X^2 = sum_i (c_i - e)^2 / e``. When ``e >= 5``, ``p = P(chi2_{k-1} >= X^2)`` (Pearson's
    goodness-of-fit test). Otherwise the exact multinomial test is used: ``p`` is the probability,
    under equal position probabilities, of every count vector no more probable than the observed
    one. Under the uniform null the probability of a vector is proportional to
    ``1 / prod_i c_i!``, so vectors are ordered by ``sum_i log c_i!``. The vectors are enumerated
    when there are at most :data:`EXACT_MAX_OUTCOMES` of them (``C(n + k - 1, k - 1)``);
    otherwise ``p`` is estimated from :data:`MC_DRAWS` seeded draws as ``(1 + hits) / (1 +
    draws)``.

    References
    ----------
    Pearson, K. (1900). On the criterion that a given system of deviations from the probable...
    Philosophical Magazine 50, 157-175.
    """
    from math import comb

    from scipy.special import gammaln
    from scipy.stats import chi2

    c = np.asarray(list(counts), dtype=float)
    k, n = len(c), int(c.sum())
    if k < 2 or n == 0:
        return {"statistic": float("nan"), "p_val": float("nan"), "method": "none", "n": n}
    e = n / k
    stat = float(((c - e) ** 2 / e).sum())
    if e >= 5:
        return {
            "statistic": stat,
            "p_val": float(chi2.sf(stat, k - 1)),
            "method": "chi-square",
            "n": n,
        }
    # log(1/prob) up to a constant; tolerance guards ties against rounding
    obs = float(gammaln(c + 1).sum())
    tol = 1e-9 * max(1.0, abs(obs))
    if comb(n + k - 1, k - 1) <= EXACT_MAX_OUTCOMES:
        vecs = np.array(list(_compositions(n, k)), dtype=float)
        log_w = gammaln(n + 1) - gammaln(vecs + 1).sum(axis=1) - n * np.log(k)
        keep = gammaln(vecs + 1).sum(axis=1) >= obs - tol
        p = float(np.exp(log_w[keep]).sum())
        return {"statistic": stat, "p_val": min(p, 1.0), "method": "exact multinomial", "n": n}
    draws = np.random.default_rng(seed).multinomial(n, [1.0 / k] * k, size=MC_DRAWS)
    hits = int((gammaln(draws + 1).sum(axis=1) >= obs - tol).sum())
    return {
        "statistic": stat,
        "p_val": (1 + hits) / (1 + MC_DRAWS),
        "method": "monte-carlo multinomial",
        "n": n,
    }


def _compositions(n: int, k: int) -> Iterable[tuple[int, ...]]:
    """Every vector of ``k`` non-negative integers summing to ``n``."""
    if k == 1:
        yield (n,)
        return
    for first in range(n + 1):
        for rest in _compositions(n - first, k - 1):
            yield (first, *rest)


def _select_positions(items: Iterable[Item]) -> list[tuple[str, int, int]]:
    """``(family, n_choices, answer position)`` of every select-mode item with choices."""
    out = []
    for it in items:
        if it.choices is None or "select" not in it.modes:
            continue
        pos = it.answer_choice
        if pos is not None:
            out.append((it.family, len(it.choices), pos))
    return out


def answer_positions(
    items: Iterable[Item], *, alpha: float = 0.05, seed: int = 0
) -> list[dict[str, Any]]:
    """Answer positions of the select-mode items, per family and overall, tested for balance.

    Parameters
    ----------
    items : iterable of Item
        The items (a bank's ``items``); items without choices are skipped.
    alpha : float, default 0.05
        Rows with ``p_val < alpha`` are flagged.
    seed : int, default 0
        Seeds the Monte-Carlo test (see :func:`position_uniformity`).

    Returns
    -------
    list of dict
        One row per family and number of choices, then one per number of choices shared by
        two or more families (``family`` = ``"all families"``): ``family``, ``n_choices``,
        ``n_items``, ``counts`` (items per position 1..n_choices), ``commonest_position``
        (the lowest of tied positions), ``commonest_share`` (the position-only baseline's
        accuracy), ``chance``, ``statistic``, ``p_val``, ``method``, ``flagged``.
    """
    rows = _select_positions(items)
    groups: dict[tuple[str, int], list[int]] = defaultdict(list)
    pooled: dict[int, list[int]] = defaultdict(list)
    fams: dict[int, set[str]] = defaultdict(set)
    for fam, n_choices, pos in rows:
        groups[(fam, n_choices)].append(pos)
        pooled[n_choices].append(pos)
        fams[n_choices].add(fam)
    keys: list[tuple[str, int, list[int]]] = [(f, k, p) for (f, k), p in sorted(groups.items())]
    keys += [("all families", k, p) for k, p in sorted(pooled.items()) if len(fams[k]) > 1]
    out = []
    for fam, n_choices, positions in keys:
        counts = [positions.count(k) for k in range(1, n_choices + 1)]
        test = position_uniformity(counts, seed=seed)
        top = max(counts)
        out.append(
            {
                "family": fam,
                "n_choices": n_choices,
                "n_items": len(positions),
                "counts": counts,
                "commonest_position": counts.index(top) + 1,
                "commonest_share": top / len(positions),
                "chance": 1.0 / n_choices,
                "statistic": test["statistic"],
                "p_val": test["p_val"],
                "method": test["method"],
                "flagged": bool(test["p_val"] < alpha),
            }
        )
    return out


def commonest_positions(items: Iterable[Item]) -> dict[str, int]:
    """The commonest answer position of each family's select-mode items (ties: the lowest).

    This is what the position-only baseline answers (``twofold`` solver ``position-only`` with
    option ``positions``); families without choices are left out.
    """
    counts: dict[str, Counter[int]] = defaultdict(Counter)
    for fam, _, pos in _select_positions(items):
        counts[fam][pos] += 1
    return {
        fam: min(c, key=lambda p: (-c[p], p))  # most common, then lowest
        for fam, c in sorted(counts.items())
    }


def _add_position_baseline(shortcuts: list[dict[str, Any]], items: list[Item]) -> None:
    """Add each shortcut row's accuracy of always answering the family's commonest position."""
    best = commonest_positions(items)
    hits: dict[tuple[str, str, int], list[int]] = defaultdict(list)
    for it in items:
        if it.choices is None or "select" not in it.modes or it.answer_choice is None:
            continue
        key = (it.family, it.distractor_scheme or "(none)", len(it.choices))
        hits[key].append(int(it.answer_choice == best[it.family]))
    for row in shortcuts:
        h = hits.get((row["family"], row["distractor_scheme"], row["n_choices"]), [])
        row["position_accuracy"] = sum(h) / len(h) if h else float("nan")


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
    for pr in report.get("positions", []):
        if pr["flagged"]:
            flags.append(
                {
                    "kind": "answer-position",
                    "family": pr["family"],
                    "message": (
                        f"{pr['family']} ({pr['n_items']} items, {pr['n_choices']} choices): "
                        f"answer positions are unbalanced ({_counts_text(pr['counts'])}; "
                        f"{pr['method']} p = {pr['p_val']:.2g}); always answering "
                        f"{pr['commonest_position']} scores {pr['commonest_share']:.1%} "
                        f"(chance {pr['chance']:.1%})"
                    ),
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


def _counts_text(counts: Sequence[int]) -> str:
    return " ".join(f"{k}:{c}" for k, c in enumerate(counts, start=1))
