"""Conformance check for item families: run it on your own family before registering it.

>>> from twofold.study.conformance import check_family
>>> from twofold.study.families import get_family
>>> check_family(get_family("strings"), n=5)   # doctest: +SKIP
"""

from __future__ import annotations

import json
from typing import Any

from .families import Family, Rejected
from .generate import MAX_ATTEMPTS, item_rng
from .item import Item, canonical_json, validate_record

__all__ = ["check_family", "family_problems"]


def _make(family: Family, idx: int, seed: int, mode: str) -> Item | None:
    params = family.default_params()
    scheme = next(iter(family.distractor_schemes), None) if mode == "select" else None
    for attempt in range(MAX_ATTEMPTS):
        s, rng = item_rng(seed, family.name, mode, idx, attempt)
        try:
            return family.generate(
                params,
                rng,
                seed=s,
                modes=[mode],
                distractor_scheme=scheme,
                n_choices=family.default_choices,
            )
        except Rejected:
            continue
    return None


def _contains(view: Any, key: str) -> bool:
    if isinstance(view, dict):
        return key in view or any(_contains(v, key) for v in view.values())
    if isinstance(view, list):
        return any(_contains(v, key) for v in view)
    return False


def family_problems(family: Family, *, n: int = 10, seed: int = 0) -> list[str]:
    """Run the conformance battery on ``family``; return the problems found (empty = conforms).

    Checks, for ``n`` items per response mode at default parameters: the record validates against
    the item schema; generation is deterministic by seed; the answer and every accepted answer
    score correct; ``sample_error`` gives a wrong response scored with the stated error type;
    every medium renders deterministically; the structured view carries no ``answer`` key; each
    variant operator keeps ids, provenance and a correct answer; ``reference_solver`` is a name
    or None and ``typical_rt_ms`` a positive time.
    """
    problems: list[str] = []
    if not family.factors:
        problems.append("declares no factors")
    if family.reference_solver is not None and not (
        isinstance(family.reference_solver, str) and family.reference_solver
    ):
        problems.append(
            f"reference_solver: got {family.reference_solver!r}; accepted: a solver name or None"
        )
    rt = family.typical_rt_ms
    if isinstance(rt, bool) or not isinstance(rt, int | float) or not 0 < rt < 3_600_000:
        problems.append(f"typical_rt_ms: got {rt!r}; accepted: milliseconds, above 0 and below 1 h")
    for mode in family.modes:
        for idx in range(n):
            item = _make(family, idx, seed, mode)
            where = f"{family.name} {mode} #{idx}"
            if item is None:
                problems.append(f"{where}: no valid item at default parameters")
                continue
            try:
                validate_record(item.to_record())
            except ValueError as err:
                problems.append(f"{where}: schema: {err}")
            again = _make(family, idx, seed, mode)
            if again is None or again.to_json() != item.to_json():
                problems.append(f"{where}: not deterministic for the same seed")
            missing = [f for f in family.factors if f not in item.factors]
            if missing:
                problems.append(f"{where}: factors missing: {missing}")
            problems += _check_scoring(family, item, mode, where, seed + idx)
            problems += _check_views(family, item, mode, where)
            problems += _check_scene(family, item, mode, where)
            for op in family.variant_operators:
                _, rng = item_rng(seed, family.name, "vary", op, idx)
                try:
                    var = family.vary(item, op, rng)
                except Rejected:
                    continue
                if var.variant_of != item.id or var.variant_operator != op:
                    problems.append(f"{where}: variant {op}: variant_of/variant_operator not set")
                if var.id == item.id:
                    problems.append(f"{where}: variant {op}: same id as its parent")
                problems += _check_scoring(family, var, mode, f"{where} variant {op}", seed + idx)
    return problems


def _check_scoring(family: Family, item: Item, mode: str, where: str, seed: int) -> list[str]:
    out = []
    correct_response = family.correct_response(item, mode)
    if not family.score(item, correct_response, mode).correct:
        out.append(f"{where}: the answer does not score correct")
    if mode == "generate":
        for acc in item.accepted:
            sc = family.score(item, acc["answer"], mode)
            if not sc.correct or sc.error_type is not None:
                out.append(f"{where}: accepted answer {acc['label']!r} is not scored correct")
    _, rng = item_rng(seed, "sample_error")
    try:
        wrong, etype = family.sample_error(item, mode, rng)
    except Rejected:
        return out
    sc = family.score(item, wrong, mode)
    if sc.correct:
        out.append(f"{where}: sample_error gave a correct response")
    elif sc.error_type != etype:
        out.append(f"{where}: sample_error said {etype!r} but score says {sc.error_type!r}")
    if etype not in family.error_types:
        out.append(f"{where}: error type {etype!r} is not declared")
    return out


def _check_scene(family: Family, item: Item, mode: str, where: str) -> list[str]:
    """The scene is deterministic, legible (:func:`~twofold.study.scene.scene_problems`) and fits
    the mode: a response of the right kind, one ``choice:k`` slot per choice when slots are
    given, and an answer scene that fits the answer box."""
    from .scene import Response, Scene, scene_problems

    try:
        sc = family.scene(item, mode)
        if not isinstance(sc, Scene):
            return [f"{where}: scene() returned {type(sc).__name__}, not a Scene"]
        out = [f"{where}: scene: {p}" for p in scene_problems(sc)]
        if sc != family.scene(item, mode):
            out.append(f"{where}: scene is not deterministic")
        if not isinstance(sc.response, Response):
            out.append(f"{where}: scene has no response")
            return out
        kind = sc.response.kind
        if mode == "select" and kind not in ("choose", "label"):
            out.append(f"{where}: select mode answers by {kind!r}; accepted: choose, label")
        if mode == "generate" and kind == "choose":
            out.append(f"{where}: generate mode cannot answer by choosing")
        keys = [s.key for s in sc.slots if s.key.startswith("choice:")]
        if keys and keys != [f"choice:{k + 1}" for k in range(len(item.choices or ()))]:
            out.append(
                f"{where}: choice slots {keys} do not match the {len(item.choices or ())} choices"
            )
        if kind in ("build", "paint"):
            if sc.answer_box is None:
                out.append(f"{where}: a {kind} response needs an answer_box")
            else:
                ans = family.answer_scene(item, mode, family.correct_response(item, mode))
                x0, y0, x1, y1 = sc.answer_box
                if abs(ans.width - (x1 - x0)) > 0.5 or abs(ans.height - (y1 - y0)) > 0.5:
                    out.append(f"{where}: answer scene is not the size of the answer box")
        return out
    except Exception as err:  # noqa: BLE001 - reported, not raised
        return [f"{where}: scene failed: {type(err).__name__}: {err}"]


def _check_views(family: Family, item: Item, mode: str, where: str) -> list[str]:
    from .render import render

    out = []
    try:
        t1, t2 = render(item, "text", mode), render(item, "text", mode)
        s1 = render(item, "structured", mode)
        json.dumps(s1)
        if t1 != t2 or canonical_json(s1) != canonical_json(render(item, "structured", mode)):
            out.append(f"{where}: rendering is not deterministic")
        if _contains(s1, "answer") or _contains(s1, "accepted"):
            out.append(f"{where}: the structured view carries the answer")
        if not t1.strip():
            out.append(f"{where}: empty text view")
    except Exception as err:  # noqa: BLE001 - reported, not raised
        out.append(f"{where}: rendering failed: {type(err).__name__}: {err}")
    return out


def check_family(family: Family, *, n: int = 10, seed: int = 0, pictures: bool = True) -> None:
    """Raise ``AssertionError`` listing every conformance problem of ``family``.

    ``pictures=True`` also renders the first item of each mode as PNG and SVG.
    """
    problems = family_problems(family, n=n, seed=seed)
    if pictures:
        from .render import render_picture

        for mode in family.modes:
            item = _make(family, 0, seed, mode)
            if item is None:
                continue
            try:
                png = render_picture(item, mode, fmt="png")
                if png != render_picture(item, mode, fmt="png") or not png.startswith(b"\x89PNG"):
                    problems.append(f"{family.name} {mode}: PNG not deterministic or not a PNG")
                render_picture(item, mode, fmt="svg")
            except Exception as err:  # noqa: BLE001
                problems.append(f"{family.name} {mode}: picture failed: {err}")
    if problems:
        raise AssertionError(
            f"family {family.name!r} does not conform:\n  - " + "\n  - ".join(problems)
        )
