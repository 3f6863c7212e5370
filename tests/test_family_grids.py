"""Tests of the grids family: operations, generator validity, variants, scoring, parsing, views."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import ndimage
from twofold.study.bank import load_bank, write_bank
from twofold.study.exceptions import ResponseError
from twofold.study.families import Rejected, get_family
from twofold.study.families import grids as G
from twofold.study.generate import generate_bank, item_rng, parse_spec
from twofold.study.item import Item, canonical_json, validate_record
from twofold.study.render import render, render_picture

FAM = get_family("grids")
SETTINGS = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def make(seed: int, *, modes=("generate",), **params) -> Item:
    """The first valid item for ``seed`` (the bank machinery's retry loop in miniature)."""
    p = FAM.default_params() | params
    for attempt in range(200):
        s, rng = item_rng(seed, "grids-test", attempt)
        try:
            return FAM.generate(
                p,
                rng,
                seed=s,
                modes=list(modes),
                distractor_scheme="near-miss" if "select" in modes else None,
                n_choices=FAM.default_choices,
            )
        except Rejected:
            continue
    raise AssertionError("no item")


def arr(g):
    return np.asarray(g, dtype=np.int8)


seeds = st.integers(min_value=0, max_value=2**31)
depths = st.integers(min_value=1, max_value=3)


# -- operations -----------------------------------------------------------------------------------
def test_gravity_slides_objects_until_contact():
    g = arr([[0, 2, 0], [0, 0, 0], [3, 0, 0], [0, 0, 4], [0, 0, 0]])
    down = G.apply_op(g, ("gravity", "down"))
    # worked by hand: every object falls to the floor
    assert down.tolist() == [[0, 0, 0], [0, 0, 0], [0, 0, 0], [0, 0, 0], [3, 2, 4]]
    stacked = arr([[0, 5, 0], [0, 0, 0], [0, 6, 0], [0, 0, 0]])
    assert G.apply_op(stacked, ("gravity", "down")).tolist() == [
        [0, 0, 0],
        [0, 0, 0],
        [0, 5, 0],
        [0, 6, 0],
    ]
    assert G.apply_op(stacked, ("gravity", "up")).tolist() == [
        [0, 5, 0],
        [0, 6, 0],
        [0, 0, 0],
        [0, 0, 0],
    ]


@given(st.integers(0, 10_000))
@SETTINGS
def test_gravity_keeps_colours_and_is_stable(seed):
    rng = np.random.default_rng(seed)
    g = ((rng.random((7, 6)) < 0.3) * rng.integers(1, 10, (7, 6))).astype(np.int8)
    for d in ("down", "up", "left", "right"):
        out = G.apply_op(g, ("gravity", d))
        assert (
            np.bincount(out.ravel(), minlength=10).tolist()
            == np.bincount(g.ravel(), minlength=10).tolist()
        )
        again = G.apply_op(out, ("gravity", d))
        assert np.array_equal(again, out)


@given(st.integers(0, 10_000), st.integers(1, 9))
@SETTINGS
def test_fill_matches_scipy_fill_holes(seed, colour):
    rng = np.random.default_rng(seed)
    g = ((rng.random((8, 9)) < 0.45) * rng.integers(1, 10, (8, 9))).astype(np.int8)
    out = G.apply_op(g, ("fill", colour))
    # reference: scipy.ndimage.binary_fill_holes (reference library; background 4-connected)
    holes = ndimage.binary_fill_holes(g != 0) & (g == 0)
    expected = np.where(holes, colour, g)
    assert np.array_equal(out, expected)


@given(st.integers(0, 10_000), st.sampled_from(["down", "up", "left", "right"]))
@SETTINGS
def test_translate_matches_scipy_shift(seed, d):
    rng = np.random.default_rng(seed)
    g = rng.integers(0, 10, (5, 7)).astype(np.int8)
    out = G.apply_op(g, ("translate", d))
    # reference: scipy.ndimage.shift with order 0 and constant background (reference library)
    expected = ndimage.shift(g, G.operations._STEP[d], order=0, mode="constant", cval=0)
    assert np.array_equal(out, expected)


def test_scale_matches_kronecker_product():
    g = arr([[1, 0], [0, 2], [3, 3]])
    # reference: numpy.kron with a block of ones (common practice for nearest-neighbour upscaling)
    assert np.array_equal(G.apply_op(g, ("scale", 3)), np.kron(g, np.ones((3, 3), np.int8)))


def test_object_operations_by_hand():
    g = arr([[1, 1, 0, 0], [1, 0, 0, 2], [0, 0, 0, 0], [3, 3, 3, 0]])
    assert G.apply_op(g, ("count_row",)).tolist() == [[1, 2, 3]]
    assert G.apply_op(g, ("keep_smallest",)).tolist() == [
        [0, 0, 0, 0],
        [0, 0, 0, 2],
        [0, 0, 0, 0],
        [0, 0, 0, 0],
    ]
    # two objects of three cells tie for largest: both stay
    assert G.apply_op(g, ("keep_largest",)).tolist() == [
        [1, 1, 0, 0],
        [1, 0, 0, 0],
        [0, 0, 0, 0],
        [3, 3, 3, 0],
    ]
    assert G.apply_op(g, ("crop",)).shape == (4, 4)
    assert G.apply_op(arr([[0, 0, 0], [0, 4, 0], [0, 0, 0]]), ("crop",)).tolist() == [[4]]
    assert G.apply_op(np.zeros((3, 3), np.int8), ("crop",)) is None
    assert G.apply_op(g, ("swap", 1, 3))[3, 0] == 1
    assert G.apply_op(g, ("tile", 1, 2)).shape == (4, 8)


def test_describe_program_in_words():
    text = G.describe_program([["rot180"], ["recolour", 3, 5]])
    assert text == "rotate a half turn, then recolour 3 to 5"


# -- generation -----------------------------------------------------------------------------------
@given(seeds, depths)
@SETTINGS
def test_deterministic_and_schema_valid(seed, depth):
    a = make(seed, depth=depth, modes=("generate", "select"))
    b = make(seed, depth=depth, modes=("generate", "select"))
    assert a.to_json() == b.to_json()
    validate_record(a.to_record())
    assert a.id.startswith("grd-")
    assert set(FAM.factors) <= set(a.factors)
    assert a.factors["depth"] == depth == len(a.stimulus["program"])


@given(seeds, depths)
@SETTINGS
def test_answer_follows_the_program_and_item_is_valid(seed, depth):
    item = make(seed, depth=depth)
    program = item.stimulus["program"]
    for pair in item.stimulus["train"]:
        assert G.apply_program(arr(pair["input"]), program).tolist() == pair["output"]
        assert pair["input"] != pair["output"]
    answer = G.apply_program(arr(item.stimulus["test"]), program)
    assert answer.tolist() == item.answer
    assert item.answer != item.stimulus["test"]
    assert FAM.check(item) == []
    # no consistent program of depth <= 2 gives another test output
    pairs = [(arr(p["input"]), arr(p["output"])) for p in item.stimulus["train"]]
    for prog, out in G.search(pairs, arr(item.stimulus["test"]), max_depth=min(depth, 2)):
        assert out.tolist() == item.answer
        assert len(prog) == depth


def test_check_reports_a_tampered_item():
    item = make(3)
    bad = item.replace(prefix="grd", answer=item.stimulus["test"])
    assert "the answer does not follow the program" in FAM.check(bad)


def test_ambiguous_demonstrations_are_rejected():
    # a symmetric demonstration cannot tell a left-right mirror from a half turn
    x = arr([[1, 0, 1], [2, 0, 2], [0, 0, 0]])
    y = G.apply_op(x, ("flip_ud",))
    test = arr([[1, 2, 0], [0, 0, 0], [0, 0, 3]])
    problem = G.generation._validity(
        [["flip_ud"]], [x, x], [y, y], test, G.apply_op(test, ("flip_ud",))
    )
    assert problem == "ambiguous"


@given(
    seeds,
    st.sampled_from(["same", "different"]),
    st.lists(st.sampled_from(G.KINDS), min_size=1, max_size=4, unique=True),
)
@SETTINGS
def test_factors_follow_parameters(seed, resize, kinds):
    try:
        item = make(seed, resize=resize, kinds=kinds, depth=1)
    except AssertionError:
        # size operations always change the size; colour and geometric ones (as sampled) never
        impossible = (resize == "same" and kinds == ["size"]) or (
            resize == "different" and not {"size", "object"} & set(kinds)
        )
        assert impossible
        return
    used = {G.OPS[op[0]][0] for op in item.stimulus["program"]}
    assert used <= set(kinds)
    assert item.factors["size_change"] is (resize == "different")
    assert item.factors["n_demos"] == len(item.stimulus["train"])


def test_bad_parameter_is_named():
    _, rng = item_rng(1)
    with pytest.raises(ValueError, match="depth"):
        FAM.generate(
            {"depth": 7}, rng, seed=1, modes=["generate"], distractor_scheme=None, n_choices=4
        )


# -- variants -------------------------------------------------------------------------------------
@given(seeds, st.sampled_from(sorted(FAM.variant_operators)))
@SETTINGS
def test_variants_keep_structure(seed, operator):
    item = make(seed, modes=("generate", "select"))
    _, rng = item_rng(seed, "vary", operator)
    try:
        var = FAM.vary(item, operator, rng)
    except Rejected:
        return
    assert var.variant_of == item.id and var.variant_operator == operator
    assert var.id != item.id
    validate_record(var.to_record())
    assert FAM.check(var) == []
    assert var.factors["depth"] == item.factors["depth"]
    assert var.factors["n_demos"] == item.factors["n_demos"]
    names = [op[0] for op in var.stimulus["program"]]
    if operator != "rotate_flip":
        assert names == [op[0] for op in item.stimulus["program"]]
    else:
        kinds = [G.OPS[n][0] for n in names]
        assert kinds == [G.OPS[op[0]][0] for op in item.stimulus["program"]]
    if operator == "permute_colours":
        # the layout of content is unchanged, only colours are relabelled
        assert (arr(var.answer) != 0).tolist() == (arr(item.answer) != 0).tolist() or any(
            op[0] in ("recolour", "count_row") for op in item.stimulus["program"]
        )
    assert FAM.score(var, var.answer_choice, "select").correct


# -- scoring --------------------------------------------------------------------------------------
@given(seeds, st.sampled_from(["generate", "select"]))
@SETTINGS
def test_correct_answer_never_an_error_and_sampled_errors_classify(seed, mode):
    item = make(seed, modes=(mode,))
    right = item.answer if mode == "generate" else item.answer_choice
    sc = FAM.score(item, right, mode)
    assert sc.correct and sc.error_type is None
    if mode == "generate":
        assert FAM.score(item, format_text(item.answer), mode).correct
    _, rng = item_rng(seed, "err")
    wrong, etype = FAM.sample_error(item, mode, rng)
    sc = FAM.score(item, wrong, mode)
    assert not sc.correct and sc.error_type == etype
    assert etype in FAM.error_types


def format_text(grid):
    return G.format_grid(grid)


def test_error_types_by_comparison():
    item = make(8, depth=2)
    test = arr(item.stimulus["test"])
    answer = arr(item.answer)
    program = item.stimulus["program"]
    assert FAM.score(item, test.tolist(), "generate").error_type == "identity_copy"
    first = G.apply_program(test, program[:1])
    if not np.array_equal(first, answer) and not (
        first.shape == test.shape and np.array_equal(first, test)
    ):
        assert FAM.score(item, first.tolist(), "generate").error_type == "partial"
    bigger = np.pad(answer, ((0, 1), (0, 0)))
    assert FAM.score(item, bigger.tolist(), "generate").error_type == "wrong_size"


def test_wrong_colours_and_content():
    item = make(21, depth=1, kinds=["geometric"])
    answer = arr(item.answer)
    c = int(answer[answer != 0][0])
    recoloured = np.where(answer == c, c % 9 + 1, answer)
    if np.array_equal(recoloured, arr(item.stimulus["test"])):
        pytest.skip("recolouring happened to give the test input")
    assert FAM.score(item, recoloured.tolist(), "generate").error_type in (
        "wrong_colours",
        "partial",
    )
    one = answer.copy()
    zeros = np.argwhere(answer == 0)
    one[tuple(zeros[0])] = 9
    et = FAM.score(item, one.tolist(), "generate").error_type
    assert et == "wrong_content"


def test_malformed_response_is_named():
    item = make(2)
    with pytest.raises(ResponseError, match="response"):
        FAM.score(item, [[1, 2], [3]], "generate")
    with pytest.raises(ResponseError, match="response"):
        FAM.score(item, [[12]], "generate")


# -- parsing --------------------------------------------------------------------------------------
WRAPS = [
    "{g}",
    "Answer:\n{g}",
    "Here is my reasoning: the shapes move.\n\n```\n{g}\n```\nThat should be it.",
    "The test input was\n{t}\nso the output is:\n{g}",
    "Output grid:\n```text\n{g}\n```",
    "**Answer**\n{sp}",
    "As JSON: {js}",
    "I think the result is\n{pipes}\n",
]


@given(seeds, st.sampled_from(WRAPS))
@SETTINGS
def test_parse_text_reads_messy_replies(seed, wrap):
    item = make(seed)
    g = item.answer
    text = wrap.format(
        g=G.format_grid(g),
        t=G.format_grid(item.stimulus["test"]),
        sp="\n".join(" ".join(str(v) for v in row) for row in g),
        js=json.dumps(g),
        pipes="\n".join("| " + " | ".join(str(v) for v in row) + " |" for row in g),
    )
    assert FAM.parse_text(item, text, "generate") == g


def test_parse_text_without_grid_raises():
    item = make(4)
    with pytest.raises(ResponseError):
        FAM.parse_text(item, "I am not sure what the rule is.", "generate")
    sel = make(4, modes=("select",))
    assert FAM.parse_text(sel, "I pick choice 2.", "select") == 2


# -- views ----------------------------------------------------------------------------------------
@given(seeds, st.sampled_from(["generate", "select"]))
@settings(max_examples=4, deadline=None, suppress_health_check=[HealthCheck.too_slow])
def test_views_deterministic_and_answer_free(seed, mode):
    item = make(seed, modes=(mode,))
    other = item.replace(
        prefix="grd", answer=[[9]], stimulus=item.stimulus | {"program": [["crop"]]}
    )
    text = render(item, "text", mode)
    assert text == render(item, "text", mode) == render(other, "text", mode)
    assert "0 is the background" in text
    view = FAM.render_structured(item, mode)
    assert canonical_json(view) == canonical_json(FAM.render_structured(other, mode))
    assert "program" not in canonical_json(view) and "answer" not in view
    assert view["test_input"] == item.stimulus["test"]
    if mode == "select":
        assert view["choices"] == list(item.choices)
        assert "Choice 1:" in text
    png = render_picture(item, mode)
    assert png.startswith(b"\x89PNG") and png == render_picture(other, mode)


def test_digit_labels_change_the_picture(monkeypatch):
    item = make(5)
    plain = render_picture(item, "generate", fmt="svg")
    monkeypatch.setattr(G.drawing, "DIGIT_LABELS", True)
    labelled = render_picture(item, "generate", fmt="svg")
    assert plain != labelled


def test_palette_is_ten_distinct_colours():
    assert len(G.PALETTE) == 10 and len(set(G.PALETTE)) == 10


def test_select_choices_unique_and_scheme_recorded():
    item = make(6, modes=("select",))
    keys = [canonical_json(c) for c in item.choices]
    assert len(set(keys)) == len(keys) == FAM.default_choices
    assert keys.count(canonical_json(item.answer)) == 1
    assert item.distractor_scheme == "near-miss"


# -- banks ----------------------------------------------------------------------------------------
def test_bank_round_trip(tmp_path):
    spec = parse_spec(
        {
            "seed": 3,
            "families": {
                "grids": {
                    "n": 6,
                    "modes": ["generate", "select"],
                    "params": {"depth": [1, 2]},
                    "variants": {"operators": ["permute_colours", "resize_canvas"]},
                }
            },
        }
    )
    bank = generate_bank(spec)
    assert len([it for it in bank if it.variant_of is None]) == 6
    assert any(it.variant_of for it in bank)
    write_bank(bank, tmp_path / "b")
    back = load_bank(tmp_path / "b")
    assert back.hash == bank.hash
    for it in back:
        assert FAM.check(it) == []


@given(st.integers(0, 10_000))
@SETTINGS
def test_choice_credit_matches_the_bank_audit(seed):
    from twofold.study.audit import choice_shortcuts

    rng = np.random.default_rng(seed)
    grids = [
        rng.integers(0, 3, size=(int(rng.integers(1, 4)), int(rng.integers(1, 4)))).astype(np.int8)
        for _ in range(4)
    ]
    wins = choice_shortcuts([g.tolist() for g in grids])
    expected = sum(0.5 / len(w) for w in wins.values() if 0 in w)
    assert G.errors._credit(grids) == pytest.approx(expected)


def test_select_choices_do_not_give_the_answer_away():
    from twofold.study.audit import audit_bank

    spec = parse_spec(
        {
            "seed": 9,
            "families": {"grids": {"n": 150, "modes": ["select"], "params": {"depth": [1, 2]}}},
        }
    )
    report = audit_bank(generate_bank(spec), picture_sample=0)
    (row,) = report["shortcuts"]
    assert not row["flagged"]
    assert row["majority_accuracy"] < 0.32 and row["centroid_accuracy"] < 0.32
