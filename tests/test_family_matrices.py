"""The matrices family: generation, validity, choices, variants, scoring, parsing, rendering."""

from __future__ import annotations

import itertools
import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from twofold.study import generate_bank, load_bank, parse_spec, write_bank
from twofold.study.conformance import check_family
from twofold.study.exceptions import GenerationError, ResponseError
from twofold.study.families import Rejected, get_family
from twofold.study.families import matrices as M
from twofold.study.families.matrices import ATTRIBUTES, LEVELS
from twofold.study.generate import item_rng
from twofold.study.item import canonical_json, validate_record
from twofold.study.render import render, render_picture
from twofold.study.scene import DESIGN_BOX, MIN_OBJECT, scene_problems

FAM = get_family("matrices")
SETTINGS = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])

params_st = st.fixed_dictionaries(
    {
        "n_rules": st.integers(1, 4),
        "rule_set": st.sampled_from(["kept-step", "every-kind", "three-sum"]),
        "n_irrelevant": st.integers(0, 1),
        "max_count": st.integers(3, 6),
    }
)


def make(params=None, *, seed=0, modes=("generate", "select"), scheme="one-off", n_choices=8):
    """First valid item for the key (seed, attempt), as the bank generator would make it."""
    for attempt in range(200):
        s, rng = item_rng(seed, "test-matrices", attempt)
        try:
            return FAM.generate(
                params or {},
                rng,
                seed=s,
                modes=list(modes),
                distractor_scheme=scheme if "select" in modes else None,
                n_choices=n_choices,
            )
        except Rejected:
            continue
    raise AssertionError("no valid item")


# -- an independent statement of the rule space, written from its definition ----------------
def value(attr, v):
    """Numeric value (1-based level number) of an attribute value."""
    return LEVELS[attr].index(v) + 1


def column(item, attr, gap):
    rows = item.stimulus["panels"]
    vals = [rows[r][c][attr] if (r, c) != (2, 2) else gap for r in range(3) for c in range(3)]
    return [vals[0:3], vals[3:6], vals[6:9]]


def holds(rule, attr, rows):
    n = [[value(attr, v) for v in row] for row in rows]
    if rule == "fixed":
        return len({v for row in rows for v in row}) == 1
    if rule == "kept":
        return all(len(set(row)) == 1 for row in rows)
    if rule.startswith("step"):
        k = int(rule[len("step") :])
        return all(r[1] - r[0] == k and r[2] - r[1] == k for r in n)
    if rule == "each-of-three":
        return all(len(set(r)) == 3 and set(r) == set(rows[0]) for r in rows)
    if attr not in ("size", "count"):
        return False
    if rule == "sum":
        return all(r[0] + r[1] == r[2] for r in n)
    if rule == "difference":
        return all(r[0] - r[1] == r[2] for r in n)
    raise AssertionError(rule)


RULE_SPACE = [
    "kept",
    "step+1",
    "step-1",
    "step+2",
    "step-2",
    "each-of-three",
    "sum",
    "difference",
]


def completions(item, attr):
    """Every value of ``attr`` in the gap under which some rule of the space holds."""
    return {
        v for v in LEVELS[attr] for rule in RULE_SPACE if holds(rule, attr, column(item, attr, v))
    }


# -- generation --------------------------------------------------------------------------------
@SETTINGS
@given(params=params_st, seed=st.integers(0, 2**31))
def test_generation_is_deterministic_and_schema_valid(params, seed):
    a = make(params, seed=seed)
    b = make(params, seed=seed)
    assert a.to_json() == b.to_json()
    validate_record(a.to_record())
    assert a.id.startswith("mat-")
    assert set(FAM.factors) <= set(a.factors) and len(FAM.factors) >= 4
    assert a.factors["n_rules"] == params["n_rules"]
    assert a.factors["n_irrelevant"] == params["n_irrelevant"]
    assert len(a.choices) == 8 and a.distractor_scheme == "one-off"


@SETTINGS
@given(params=params_st, seed=st.integers(0, 2**31))
def test_answer_follows_the_generating_rules_and_is_unique(params, seed):
    item = make(params, seed=seed)
    rules = item.stimulus["rules"]
    for attr in ATTRIBUTES:
        rule = rules[attr]
        if rule == "irrelevant":
            # no rule of the space completes it: any value is as good as another
            assert completions(item, attr) == set()
            continue
        assert holds(rule, attr, column(item, attr, item.answer[attr])), (attr, rule)
        # no other rule consistent with the visible panels predicts another value
        assert completions(item, attr) == {item.answer[attr]}, (attr, rule)
    assert FAM.check(item) == []
    assert FAM.score(item, item.answer, "generate").correct
    for acc in item.accepted:
        assert FAM.score(item, acc["answer"], "generate").correct


@SETTINGS
@given(params=params_st, seed=st.integers(0, 2**31))
def test_no_distractor_satisfies_every_row_rule(params, seed):
    item = make(params, seed=seed)
    assert sum(canonical_json(c) == canonical_json(item.answer) for c in item.choices) == 1
    for choice in item.choices:
        if choice == item.answer:
            continue
        assert any(
            choice[a] not in completions(item, a)
            for a in ATTRIBUTES
            if item.stimulus["rules"][a] != "irrelevant"
        )


def test_rejections_are_counted_and_impossible_levels_fail_clearly():
    spec = parse_spec(
        {
            "seed": 1,
            "families": {"matrices": {"n": 80, "params": {"n_rules": 3}}},
        }
    )
    bank = generate_bank(spec)
    rej = bank.meta["generation"]["matrices"]["rejections"]
    assert sum(rej.values()) > 0
    assert any("predict different values" in r for r in rej)
    bad = parse_spec(
        {"seed": 1, "families": {"matrices": {"n": 1, "params": {"n_rules": 5, "n_irrelevant": 2}}}}
    )
    with pytest.raises(GenerationError, match="exceeds the 6 attributes"):
        generate_bank(bad)


# -- distractor schemes -------------------------------------------------------------------------
@SETTINGS
@given(seed=st.integers(0, 2**31))
def test_one_off_distractors_change_one_attribute(seed):
    item = make(seed=seed, scheme="one-off")
    for choice in item.choices:
        diff = [a for a in ATTRIBUTES if choice[a] != item.answer[a]]
        assert len(diff) in (0, 1)


@SETTINGS
@given(seed=st.integers(0, 2**31), n_choices=st.sampled_from([4, 6, 8, 9, 12]))
def test_balanced_choices_leave_no_attribute_with_the_answer_as_unique_mode(seed, n_choices):
    item = make(seed=seed, scheme="balanced", n_choices=n_choices)
    assert item.distractor_scheme == "balanced"
    assert len(item.choices) == n_choices
    assert len({canonical_json(c) for c in item.choices}) == n_choices
    for attr in ATTRIBUTES:
        counts = Counter(c[attr] for c in item.choices)
        top = max(counts.values())
        # every value of every attribute appears equally often among the choices
        assert len(set(counts.values())) == 1
        assert not (
            counts[item.answer[attr]] == top
            and list(counts.values()).count(top) == 1
            and len(counts) > 1
        )
    assert FAM.check(item) == []


# -- variants ------------------------------------------------------------------------------------
@SETTINGS
@given(
    seed=st.integers(0, 2**31),
    op=st.sampled_from(sorted(FAM.variant_operators)),
    scheme=st.sampled_from(["one-off", "balanced"]),
)
def test_variants_keep_the_structure(seed, op, scheme):
    item = make({"n_rules": 3}, seed=seed, scheme=scheme)
    _, rng = item_rng(seed, "vary")
    try:
        var = FAM.vary(item, op, rng)
    except Rejected:
        return
    assert var.variant_of == item.id and var.variant_operator == op and var.id != item.id
    validate_record(var.to_record())
    assert FAM.check(var) == []
    assert var.distractor_scheme == scheme and len(var.choices) == len(item.choices)
    assert var.stimulus["panels"] != item.stimulus["panels"]
    kinds = Counter(r.rstrip("+-12") for r in item.stimulus["rules"].values())
    assert Counter(r.rstrip("+-12") for r in var.stimulus["rules"].values()) == kinds
    if op == "swap-rows":
        assert var.stimulus["panels"][0] == item.stimulus["panels"][1]
        assert var.answer == item.answer
    if op == "swap-shapes":
        for a in ATTRIBUTES:
            if a != "shape":
                assert var.answer[a] == item.answer[a]
    for attr in ATTRIBUTES:
        rule = var.stimulus["rules"][attr]
        if rule != "irrelevant":
            assert holds(rule, attr, column(var, attr, var.answer[attr]))
            assert completions(var, attr) == {var.answer[attr]}
    assert FAM.score(var, var.answer_choice, "select").correct


def test_every_operator_applies_to_some_items():
    made = Counter()
    for seed in range(40):
        item = make({"n_rules": 3}, seed=seed)
        for op in FAM.variant_operators:
            try:
                FAM.vary(item, op, np.random.default_rng(seed))
                made[op] += 1
            except Rejected:
                pass
    assert all(made[op] >= 10 for op in FAM.variant_operators), made


# -- scoring and errors ---------------------------------------------------------------------------
@SETTINGS
@given(params=params_st, seed=st.integers(0, 2**31), mode=st.sampled_from(["generate", "select"]))
def test_classifier_never_calls_a_correct_answer_an_error(params, seed, mode):
    item = make(params, seed=seed)
    right = item.answer if mode == "generate" else item.answer_choice
    sc = FAM.score(item, right, mode)
    assert sc.correct and sc.error_type is None and sc.label == "intended"
    for k in range(1, 9):
        sc = FAM.score(item, k, "select")
        assert sc.correct == (k == item.answer_choice)
        if not sc.correct:
            assert sc.error_type in FAM.error_types


@SETTINGS
@given(params=params_st, seed=st.integers(0, 2**31), mode=st.sampled_from(["generate", "select"]))
def test_sample_error_is_wrong_with_its_type(params, seed, mode):
    item = make(params, seed=seed)
    wrong, etype = FAM.sample_error(item, mode, np.random.default_rng(seed))
    sc = FAM.score(item, wrong, mode)
    assert not sc.correct and sc.error_type == etype and etype in FAM.error_types


def test_error_types_name_the_broken_attribute():
    item = make({"n_rules": 3}, seed=5)
    rules = item.stimulus["rules"]
    bound = [a for a in ATTRIBUTES if rules[a] != "irrelevant"]
    left, above = item.stimulus["panels"][2][1], item.stimulus["panels"][1][2]
    for attr in bound:
        resp = dict(item.answer)
        resp[attr] = next(v for v in LEVELS[attr] if v != item.answer[attr])
        if resp in (left, above):
            continue
        assert FAM.score(item, resp, "generate").error_type == f"wrong-{attr}"
        assert [b["attribute"] for b in FAM.broken_rules(item, resp)] == [attr]
    two = dict(item.answer)
    for attr in bound[:2]:
        two[attr] = next(v for v in LEVELS[attr] if v != item.answer[attr])
    if two not in (left, above):
        assert FAM.score(item, two, "generate").error_type == "multiple-wrong"
    three = dict(item.answer)
    for attr in bound[:3]:
        three[attr] = next(v for v in LEVELS[attr] if v != item.answer[attr])
    if three not in (left, above):
        assert FAM.score(item, three, "generate").error_type == "other"
    if left != item.answer:
        assert FAM.score(item, dict(left), "generate").error_type == "copied-adjacent"


def test_one_off_distractors_are_single_attribute_errors():
    seen = Counter()
    for seed in range(20):
        item = make(seed=seed)
        for k, ch in enumerate(item.choices, start=1):
            if k == item.answer_choice:
                continue
            (attr,) = [a for a in ATTRIBUTES if ch[a] != item.answer[a]]
            et = FAM.score(item, k, "select").error_type
            assert et in (f"wrong-{attr}", "copied-adjacent")
            seen[et] += 1
    assert len(seen) >= 4


def test_generate_responses_are_normalised_and_checked():
    item = make(seed=2)
    loose = {
        k.upper(): (str(v) if isinstance(v, int) else v.upper()) for k, v in item.answer.items()
    }
    assert FAM.score(item, loose, "generate").correct
    with pytest.raises(ResponseError, match="response.shade"):
        FAM.score(item, {**item.answer, "shade": "purple"}, "generate")
    with pytest.raises(ResponseError, match="response.count"):
        FAM.score(item, {k: v for k, v in item.answer.items() if k != "count"}, "generate")


# -- parsing free text ----------------------------------------------------------------------------
def _line(p):
    return " ".join(f"{a}={p[a]}" for a in ATTRIBUTES)


@SETTINGS
@given(seed=st.integers(0, 2**31), style=st.integers(0, 5))
def test_parse_text_reads_messy_replies(seed, style):
    item = make(seed=seed)
    p = item.answer
    replies = [
        _line(p),
        f"Let me think. Row 3 continues the pattern.\n\nAnswer: {_line(p)}",
        "```json\n" + canonical_json(p) + "\n```",
        "The missing panel: **Shape:** "
        + str(p["shape"]).title()
        + ", **Size:** "
        + str(p["size"])
        + ", **Shade:** "
        + p["shade"]
        + ", **Count:** "
        + str(p["count"])
        + ", **Position:** "
        + p["position"]
        + ", **Turn:** "
        + p["turn"]
        + ".",
        f"I first guessed shape=drop size=1 but on reflection the answer is\n'{_line(p)}'",
        '{"shape": "'
        + p["shape"]
        + '", "size": "'
        + str(p["size"])
        + '", "shade": "'
        + p["shade"]
        + '", "count": '
        + str(p["count"])
        + ', "position": "'
        + p["position"]
        + '", "turn": "'
        + p["turn"]
        + '"}',
    ]
    got = FAM.parse_text(item, replies[style], "generate")
    assert got == item.answer
    assert FAM.score(item, got, "generate").correct


def test_parse_text_refuses_replies_without_a_panel():
    item = make(seed=1)
    for text in ("I am not sure.", "shape=tee size=2", ""):
        with pytest.raises(ResponseError, match="no value for"):
            FAM.parse_text(item, text, "generate")
    assert FAM.parse_text(item, "The answer is choice 3.", "select") == 3
    with pytest.raises(ResponseError):
        FAM.parse_text(item, "none of them", "select")


# -- rendering ------------------------------------------------------------------------------------
@SETTINGS
@given(params=params_st, seed=st.integers(0, 2**31), mode=st.sampled_from(["generate", "select"]))
def test_views_are_deterministic_and_answer_free(params, seed, mode):
    item = make(params, seed=seed)
    text = render(item, "text", mode)
    assert text == render(item, "text", mode)
    view = render(item, "structured", mode)
    assert canonical_json(view) == canonical_json(render(item, "structured", mode))
    flat = canonical_json(view)
    assert "rules" not in view and '"answer"' not in flat and "accepted" not in flat
    for rule in set(item.stimulus["rules"].values()) - {"fixed", "kept"}:
        assert rule not in text and rule not in flat
    assert view["panels"][2][2] is None
    assert "row 3, column 3: ?" in text
    if mode == "select":
        assert view["choices"] == list(item.choices)
        assert "1-8" in text
    else:
        assert "choices" not in view and "shape=<shape>" in text


def test_picture_is_deterministic_png():
    item = make({"n_rules": 3, "max_count": 6}, seed=4)
    for mode in ("generate", "select"):
        png = render_picture(item, mode)
        assert png.startswith(b"\x89PNG") and png == render_picture(item, mode)
    assert render_picture(item, "select", fmt="svg").lstrip().startswith(b"<?xml")


def test_bank_roundtrip(tmp_path):
    spec = parse_spec(
        {
            "seed": 5,
            "families": {
                "matrices": {
                    "n": 12,
                    "modes": ["generate", "select"],
                    "distractor_scheme": "balanced",
                    "params": {"n_rules": [1, 2, 3], "n_irrelevant": [0, 1]},
                    "design": "crossed",
                    "variants": {"operators": sorted(FAM.variant_operators), "per_item": 1},
                }
            },
        }
    )
    bank = write_bank(generate_bank(spec), tmp_path / "b")
    again = load_bank(tmp_path / "b")
    assert again.hash == bank.hash and len(again) == len(bank) > 12
    assert generate_bank(spec).hash == bank.hash
    levels = Counter(
        (it.factors["n_rules"], it.factors["n_irrelevant"]) for it in again if it.variant_of is None
    )
    assert set(levels) == set(itertools.product([1, 2, 3], [0, 1]))
    assert all(FAM.check(it) == [] for it in again)


def test_balanced_scheme_refuses_a_prime_number_of_choices_beyond_the_levels():
    spec = parse_spec(
        {
            "seed": 1,
            "families": {
                "matrices": {
                    "n": 1,
                    "modes": ["select"],
                    "distractor_scheme": "balanced",
                    "n_choices": 7,
                }
            },
        }
    )
    with pytest.raises(GenerationError, match="balanced: cannot build 7 choices"):
        generate_bank(spec)


# -- scenes -----------------------------------------------------------------------------------
def _objects(scene, box=None):
    """Object outlines (with fill and edge) inside ``box``, relative to its bottom-left corner."""
    x0, y0 = (box[0], box[1]) if box else (0.0, 0.0)
    out = []
    for el in scene.of_role("object"):
        bx = el.bbox()
        if box and not (
            bx[0] >= box[0] and bx[2] <= box[2] and bx[1] >= box[1] and bx[3] <= box[3]
        ):
            continue
        pts = tuple((round(x - x0, 2), round(y - y0, 2)) for x, y in el.points)
        out.append((pts, el.fill, el.edge, el.edge_width))
    return sorted(out)


def _same(a, b):
    """Two lists from :func:`_objects` alike up to rounding (0.02 scene units)."""
    return len(a) == len(b) and all(
        pa[1:] == pb[1:]
        and len(pa[0]) == len(pb[0])
        and np.allclose(np.array(pa[0]), np.array(pb[0]), atol=0.02)
        for pa, pb in zip(a, b, strict=True)
    )


def _boxes(scene, role):
    return [el.bbox() for el in scene.of_role(role)]


scene_params = st.fixed_dictionaries(
    {
        "n_rules": st.integers(1, 4),
        "rule_set": st.sampled_from(["kept-step", "every-kind", "three-sum"]),
        "n_irrelevant": st.integers(0, 2),
        "max_count": st.integers(1, 6),
    }
)


@SETTINGS
@given(
    params=scene_params,
    seed=st.integers(0, 2**31),
    scheme=st.sampled_from(["one-off", "balanced"]),
    n_choices=st.sampled_from([2, 3, 4, 6, 8, 9, 12]),
)
def test_scenes_are_legible_in_both_modes(params, seed, scheme, n_choices):
    try:
        item = make(params, seed=seed, scheme=scheme, n_choices=n_choices)
    except AssertionError:  # no valid item for these parameters (e.g. balanced with 1 level)
        return
    for mode in ("generate", "select"):
        sc = FAM.scene(item, mode)
        assert scene_problems(sc, min_object=MIN_OBJECT) == []
        # laid out for the design box: painted there at scale 1, the floors hold on screen
        assert sc.width <= DESIGN_BOX[0] + 1e-6 and sc.height <= DESIGN_BOX[1] + 1e-6
        assert sc == FAM.scene(item, mode)
    sel = FAM.scene(item, "select")
    assert sel.response.kind == "choose"
    assert [s.key for s in sel.slots] == [f"choice:{k}" for k in range(1, n_choices + 1)]
    # the choices stand to the right of the matrix
    right_of_matrix = max(b[2] for b in _boxes(sel, "panel") + _boxes(sel, "gap"))
    assert all(s.bbox()[0] > right_of_matrix for s in sel.slots)


@pytest.mark.parametrize("n_choices", [2, 4, 6, 8, 9, 12])
def test_choices_are_drawn_at_the_matrix_scale_with_badges_outside_their_frames(n_choices):
    for seed in range(6):
        item = make({"n_rules": 3, "max_count": 6}, seed=seed, n_choices=n_choices)
        sc = FAM.scene(item, "select")
        panels, frames = _boxes(sc, "panel"), _boxes(sc, "frame")
        assert len(panels) == 8 and len(frames) == n_choices
        sides = {round(b[2] - b[0], 6) for b in panels + frames + _boxes(sc, "gap")}
        sides |= {round(b[3] - b[1], 6) for b in panels + frames}
        assert len(sides) == 1
        # a matrix panel and the same panel as a choice draw the same objects, to the unit
        for r in range(3):
            for c in range(3):
                p = item.stimulus["panels"][r][c]
                if p is None:
                    continue
                box = panels[3 * r + c - (1 if 3 * r + c > 8 else 0)]
                assert _same(_objects(sc, box), _objects(FAM.answer_scene(item, "select", p)))
        badges = sc.of_role("badge")
        assert [b.text for b in badges] == [str(k) for k in range(1, n_choices + 1)]
        for k, (badge, slot) in enumerate(zip(badges, sc.slots, strict=True), start=1):
            b, s = badge.bbox(), slot.bbox()
            for f in frames:  # outside every frame ...
                assert b[2] <= f[0] or b[0] >= f[2] or b[3] <= f[1] or b[1] >= f[3]
            # ... and next to its own: at its top-left corner
            assert 0 <= s[0] - b[2] <= 12 and abs(b[3] - s[3]) <= 2
            assert _same(_objects(sc, s), _objects(FAM.answer_scene(item, "select", k)))


def test_no_two_choices_draw_alike_and_every_value_draws_differently():
    for seed in range(40):
        for scheme in ("one-off", "balanced"):
            item = make({"n_rules": 2, "max_count": 6}, seed=seed, scheme=scheme)
            sc = FAM.scene(item, "select")
            drawn = [tuple(_objects(sc, s.bbox())) for s in sc.slots]
            assert all(drawn) and len(set(drawn)) == len(drawn)
    item = make({"max_count": 6}, seed=3)
    for attr in ATTRIBUTES:
        values = LEVELS[attr]
        pictures = {
            v: tuple(_objects(FAM.answer_scene(item, "generate", {**item.answer, attr: v})))
            for v in values
        }
        assert len(set(pictures.values())) == len(values), attr


def test_generate_builds_the_missing_panel_at_its_own_scale():
    for seed in range(10):
        item = make({"max_count": 6 if seed % 2 else 3}, seed=seed, modes=("generate",))
        sc = FAM.scene(item, "generate")
        assert sc.response.kind == "build" and not sc.slots
        attrs = sc.response.options["attributes"]
        assert list(attrs) == list(ATTRIBUTES)
        assert attrs["count"] == list(range(1, item.params["max_count"] + 1))
        (gap,) = _boxes(sc, "gap")
        assert sc.answer_box == pytest.approx(gap)
        x0, y0, x1, y1 = sc.answer_box
        rng = np.random.default_rng(seed)
        for _ in range(25):  # any complete panel, not only the answer
            panel = {a: list(v)[int(rng.integers(len(v)))] for a, v in attrs.items()}
            ans = FAM.answer_scene(item, "generate", panel)
            assert (ans.width, ans.height) == pytest.approx((x1 - x0, y1 - y0))
            assert scene_problems(ans, min_object=MIN_OBJECT) == []
            assert len(ans.of_role("object")) == panel["count"]
        # a panel of the matrix drawn on its own equals the matrix's panel
        p = item.stimulus["panels"][0][1]
        box = _boxes(sc, "panel")[1]
        assert _same(_objects(sc, box), _objects(FAM.answer_scene(item, "generate", p)))
    with pytest.raises(ResponseError, match="response.turn"):
        FAM.answer_scene(item, "generate", {a: v for a, v in item.answer.items() if a != "turn"})


def test_every_size_and_count_stays_above_the_object_floor():
    # the smallest panels (eight to twelve choices) with the tallest groups
    item = make({"max_count": 6}, seed=1, n_choices=12)
    for shape, size, count, turn, position in itertools.product(
        LEVELS["shape"], LEVELS["size"], LEVELS["count"], LEVELS["turn"], LEVELS["position"]
    ):
        panel = {**item.answer, "shape": shape, "size": size, "count": count}
        panel.update(turn=turn, position=position)
        ans = FAM.answer_scene(item, "select", panel)
        assert scene_problems(ans, min_object=MIN_OBJECT) == [], panel
        frame = ans.of_role("panel")[0].bbox()
        for b in _boxes(ans, "object"):  # inside the panel, apart from each other
            assert frame[0] < b[0] and b[2] < frame[2] and frame[1] < b[1] and b[3] < frame[3]


def test_neighbouring_sizes_and_heights_differ_visibly():
    # at the smallest panels (12 choices) and the tallest groups (six copies in two rows)
    item = make({"max_count": 6}, seed=1, n_choices=12)

    def boxes(**change):
        return _boxes(FAM.answer_scene(item, "select", {**item.answer, **change}), "object")

    for shape in LEVELS["shape"]:
        longs = [
            max(b[2] - b[0], b[3] - b[1])
            for size in LEVELS["size"]
            for b in boxes(shape=shape, size=size, count=1)[:1]
        ]
        assert min(n - m for m, n in zip(longs, longs[1:], strict=False)) >= 2.5, shape
    for count in LEVELS["count"]:
        tops = [max(b[3] for b in boxes(count=count, position=p)) for p in LEVELS["position"]]
        # our measurement: 20.7 units between neighbouring heights (10.4 with five heights)
        assert min(m - n for m, n in zip(tops, tops[1:], strict=False)) >= 18, count


def test_too_many_choices_are_refused_by_name():
    spec = parse_spec(
        {"seed": 1, "families": {"matrices": {"n": 1, "modes": ["select"], "n_choices": 16}}}
    )
    with pytest.raises(GenerationError, match="at most 12 fit beside the matrix"):
        generate_bank(spec)


def _lightness(colour):
    # reference: CIE 1976 L* from relative luminance Y (white Y = 1; from memory)
    y = M.contrast_ratio(colour, "#000000") * 0.05 - 0.05
    return 116 * y ** (1 / 3) - 16 if y > (6 / 29) ** 3 else y * (29 / 3) ** 3


def test_edges_and_shades_contrast():
    # reference: WCAG 2.x contrast ratio; black on white is 21:1 and #777777 on white about
    # 4.48:1 (from memory)
    assert M.contrast_ratio("#000000", "#ffffff") == pytest.approx(21.0)
    assert M.contrast_ratio("#777777", "#ffffff") == pytest.approx(4.48, abs=0.01)
    for seed in range(5):
        item = make({"max_count": 6}, seed=seed)
        for mode in ("generate", "select"):
            sc = FAM.scene(item, mode)
            backs = {el.fill for el in sc.of_role("panel") + sc.of_role("frame")}
            for obj in sc.of_role("object"):
                # WCAG 2.x non-text contrast (SC 1.4.11): at least 3:1 against the panel
                assert all(M.contrast_ratio(obj.edge, b) >= 3.0 for b in backs)
            for el in sc.of_role("panel") + sc.of_role("frame") + sc.of_role("gap"):
                assert M.contrast_ratio(el.edge, sc.background) >= 3.0
            for t in sc.of_role("badge") + sc.of_role("mark"):
                # WCAG 2.x text contrast (SC 1.4.3): at least 4.5:1
                assert M.contrast_ratio(t.colour, sc.background) >= 4.5
                assert all(M.contrast_ratio(t.colour, el.fill) >= 4.5 for el in sc.of_role("gap"))
    # neighbouring shades differ by at least 15 in L*, so a one-level change is seen
    greys = [M.SHADE_FILL[s] for s in LEVELS["shade"]]
    steps = [_lightness(a) - _lightness(b) for a, b in zip(greys, greys[1:], strict=False)]
    assert min(steps) >= 15, steps


def test_structured_view_keeps_values_and_no_drawing_hints():
    item = make(seed=3)
    view = render(item, "structured", "select")
    assert "drawing" not in view
    assert list(view["attributes"]) == list(ATTRIBUTES)
    assert view["attributes"]["turn"] == ["up", "right", "down", "left"]
    text = render(item, "text", "select")
    assert "turn: up|right|down|left" in text and "drop|crescent|house|tee|ring" in text
    for old in ("triangle", "hexagon", "progression", "distribution", "constant"):
        assert old not in text and old not in canonical_json(view)
    assert "draw" not in type(FAM).__dict__  # pictures paint the scene


def test_conformance():
    check_family(FAM, n=6)


# -- version 1 banks -------------------------------------------------------------------------------
V1_BANK = Path(__file__).parent / "data" / "matrices_v1"  # written by family version 1 (five
# attributes, polygon shapes, constant/progression/distribution rules) before version 2 existed


def test_version_1_banks_load_score_classify_and_draw():
    bank = load_bank(V1_BANK)  # validates every item
    assert bank.hash == json.loads((V1_BANK / "bank.json").read_text())["bank_hash"]
    rules_seen = set()
    for item in bank:
        assert item.family_version == "1" and "turn" not in item.answer
        assert item.answer["shape"] in ("triangle", "square", "pentagon", "hexagon", "circle")
        rules_seen |= set(item.stimulus["rules"].values())
        assert FAM.check(item) == []
        assert FAM.score(item, item.answer, "generate").correct
        assert FAM.score(item, dict(item.answer), "generate").label == "intended"
        assert FAM.score(item, item.answer_choice, "select").correct
        for k in range(1, len(item.choices) + 1):
            if k != item.answer_choice:
                assert FAM.score(item, k, "select").error_type in FAM.error_types
        wrong = {**item.answer, "shape": "drop"}  # a version 2 value is not a version 1 value
        with pytest.raises(ResponseError, match="triangle"):
            FAM.score(item, wrong, "generate")
        for mode in ("generate", "select"):
            resp, etype = FAM.sample_error(item, mode, np.random.default_rng(1))
            assert FAM.score(item, resp, mode).error_type == etype != "wrong-turn"
            sc = FAM.scene(item, mode)
            assert scene_problems(sc, min_object=MIN_OBJECT) == []
            assert "turn" not in render(item, "structured", mode)["attributes"]
            assert "turn" not in render(item, "text", mode)
        # old shapes keep their old outlines: a square has four corners, a hexagon six
        for shape, corners in (("triangle", 3), ("square", 4), ("hexagon", 6)):
            ans = FAM.answer_scene(item, "generate", {**item.answer, "shape": shape})
            assert {len(o.points) for o in ans.of_role("object")} == {corners}
        assert FAM.parse_text(item, _v1_line(item.answer), "generate") == item.answer
        assert render_picture(item, "select").startswith(b"\x89PNG")
    assert {"constant", "distribution", "sum", "difference"} <= rules_seen
    assert any(r.startswith("progression") for r in rules_seen)
    # an item is not rewritten by reading it: the record keeps its version 1 rule names
    item = bank.items[0]
    assert FAM.broken_rules(item, item.answer) == []
    assert bank.items[0].to_json() == load_bank(V1_BANK).items[0].to_json()
    with pytest.raises(Rejected, match="family version 1"):
        FAM.vary(item, "swap-rows", np.random.default_rng(0))


def _v1_line(p):
    return " ".join(f"{a}={p[a]}" for a in ("shape", "size", "shade", "count", "position"))
