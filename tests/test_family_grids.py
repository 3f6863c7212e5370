"""Tests of the grids family: operations, generator validity, variants, scoring, parsing, views."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import ndimage
from twofold.experiments.solvers import make_builtin as make_solver
from twofold.study import colour as C
from twofold.study.bank import load_bank, write_bank
from twofold.study.exceptions import ResponseError
from twofold.study.families import Rejected, get_family
from twofold.study.families import grids as G
from twofold.study.generate import generate_bank, item_rng, parse_spec
from twofold.study.item import Item, canonical_json, validate_record
from twofold.study.render import render, render_picture
from twofold.study.scene import DESIGN_BOX, MIN_CELL, scene_problems
from twofold.study.scene import Grid as SceneGrid

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
    assert G.apply_op(g, ("count-row",)).tolist() == [[1, 2, 3]]
    assert G.apply_op(g, ("keep-smallest",)).tolist() == [
        [0, 0, 0, 0],
        [0, 0, 0, 2],
        [0, 0, 0, 0],
        [0, 0, 0, 0],
    ]
    # two objects of three cells tie for largest: both stay
    assert G.apply_op(g, ("keep-largest",)).tolist() == [
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
    for pair in item.stimulus["examples"]:
        assert G.apply_program(arr(pair["before"]), program).tolist() == pair["after"]
        assert pair["before"] != pair["after"]
    answer = G.apply_program(arr(item.stimulus["probe"]), program)
    assert answer.tolist() == item.answer
    assert item.answer != item.stimulus["probe"]
    assert FAM.check(item) == []
    # no consistent program of depth <= 2 gives another test output
    pairs = [(arr(p["before"]), arr(p["after"])) for p in item.stimulus["examples"]]
    for prog, out in G.search(pairs, arr(item.stimulus["probe"]), max_depth=min(depth, 2)):
        assert out.tolist() == item.answer
        assert len(prog) == depth


def test_check_reports_a_tampered_item():
    item = make(3)
    bad = item.replace(prefix="grd", answer=item.stimulus["probe"])
    assert "the answer does not follow the program" in FAM.check(bad)


def test_ambiguous_demonstrations_are_rejected():
    # a symmetric demonstration cannot tell a left-right mirror from a half turn
    x = arr([[1, 0, 1], [2, 0, 2], [0, 0, 0]])
    y = G.apply_op(x, ("flip-ud",))
    test = arr([[1, 2, 0], [0, 0, 0], [0, 0, 3]])
    problem = G.generation._validity(
        [["flip-ud"]], [x, x], [y, y], test, G.apply_op(test, ("flip-ud",))
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
    assert item.factors["n_demos"] == len(item.stimulus["examples"])


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
    if operator != "turn-or-mirror":
        assert names == [op[0] for op in item.stimulus["program"]]
    else:
        kinds = [G.OPS[n][0] for n in names]
        assert kinds == [G.OPS[op[0]][0] for op in item.stimulus["program"]]
    if operator == "permute-colours":
        # the layout of content is unchanged, only colours are relabelled
        assert (arr(var.answer) != 0).tolist() == (arr(item.answer) != 0).tolist() or any(
            op[0] in ("recolour", "count-row") for op in item.stimulus["program"]
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
    test = arr(item.stimulus["probe"])
    answer = arr(item.answer)
    program = item.stimulus["program"]
    assert FAM.score(item, test.tolist(), "generate").error_type == "copy-of-probe"
    first = G.apply_program(test, program[:1])
    if not np.array_equal(first, answer) and not (
        first.shape == test.shape and np.array_equal(first, test)
    ):
        assert FAM.score(item, first.tolist(), "generate").error_type == "part-of-rule"
    bigger = np.pad(answer, ((0, 1), (0, 0)))
    assert FAM.score(item, bigger.tolist(), "generate").error_type == "wrong-size"


def test_wrong_colours_and_content():
    item = make(21, depth=1, kinds=["geometric"])
    answer = arr(item.answer)
    c = int(answer[answer != 0][0])
    recoloured = np.where(answer == c, c % 9 + 1, answer)
    if np.array_equal(recoloured, arr(item.stimulus["probe"])):
        pytest.skip("recolouring happened to give the test input")
    assert FAM.score(item, recoloured.tolist(), "generate").error_type in (
        "wrong-colours",
        "part-of-rule",
    )
    one = answer.copy()
    zeros = np.argwhere(answer == 0)
    one[tuple(zeros[0])] = 9
    et = FAM.score(item, one.tolist(), "generate").error_type
    assert et == "wrong-cells"


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
        t=G.format_grid(item.stimulus["probe"]),
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
    assert "0 is an empty cell" in text
    view = FAM.render_structured(item, mode)
    assert canonical_json(view) == canonical_json(FAM.render_structured(other, mode))
    assert "program" not in canonical_json(view) and "answer" not in view
    assert view["probe"] == item.stimulus["probe"]
    assert [p["before"] for p in view["examples"]] == [
        p["before"] for p in item.stimulus["examples"]
    ]
    if mode == "select":
        assert view["choices"] == list(item.choices)
        assert "Choice 1:" in text
    png = render_picture(item, mode)
    assert png.startswith(b"\x89PNG") and png == render_picture(other, mode)


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
                    "variants": {"operators": ["permute-colours", "grow-canvas"]},
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


# -- scenes ---------------------------------------------------------------------------------------
def _grids_of(sc):
    return [e for e in sc.elements if isinstance(e, SceneGrid)]


@pytest.mark.parametrize("mode", ["generate", "select"])
def test_scenes_are_legible_with_one_cell_size(mode):
    seen = 0
    for seed in range(24):
        item = make(900 + seed, modes=(mode,), demos=2 + seed % 3, size=4 + seed % 9)
        sc = FAM.scene(item, mode)
        assert scene_problems(sc) == [], (item.id, scene_problems(sc))
        cells = {g.cell for g in _grids_of(sc)}
        assert len(cells) == 1 and min(cells) >= MIN_CELL
        st = item.stimulus
        grids = [st["probe"], item.answer, *(item.choices or ())]
        grids += [g for p in st["examples"] for g in (p["before"], p["after"])]
        assert max(max(len(g), len(g[0])) for g in grids) <= G.SIDE_CAP
        # every example, the probe and (select) every choice is drawn, nothing else
        n = 2 * len(st["examples"]) + 1 + len(item.choices or ())
        assert len(_grids_of(sc)) == n
        assert item.answer not in [[list(r) for r in g.cells] for g in _grids_of(sc)] or (
            mode == "select"
        )
        seen += 1
    assert seen == 24


def test_size_cap_follows_from_the_design_box():
    # 112 + 36 N <= 560 (height) and 160 + 60 N <= 960 (choices row): N = 12 (see grids.scene)
    assert G.SIDE_CAP == 12 == min((560 - 112) // 36, (960 - 160) // 60)
    assert G.side_cap(4, 4) == G.SIDE_CAP
    assert G.side_cap(4, 8) < G.SIDE_CAP  # more choices in the row leave less room per grid
    # the cap binds: a 13-wide layout does not fit at the smallest legible cell
    from twofold.study.families.grids.scene import _Plan

    s = (13, 13)
    w, h = _Plan([(s, s)] * 4, s, None, [s] * 4).extent(MIN_CELL)
    assert w > DESIGN_BOX[0] or h > DESIGN_BOX[1]
    with pytest.raises(ValueError, match="size"):
        make(1, size=13)


def test_generator_respects_a_tighter_cap_with_many_choices():
    cap = G.side_cap(4, 8)
    p = FAM.default_params() | {"demos": 4, "size": 12}
    got = 0
    for attempt in range(300):
        s, rng = item_rng(77, "many-choices", attempt)
        try:
            item = FAM.generate(
                p, rng, seed=s, modes=["select"], distractor_scheme="near-miss", n_choices=8
            )
        except Rejected:
            continue
        grids = [item.stimulus["probe"], *item.choices]
        grids += [g for e in item.stimulus["examples"] for g in (e["before"], e["after"])]
        assert max(max(len(g), len(g[0])) for g in grids) <= cap
        assert scene_problems(FAM.scene(item, "select")) == []
        got += 1
        if got == 3:
            break
    assert got == 3


def test_generate_scene_offers_a_paint_response_sized_for_the_cap():
    item = make(31)
    sc = FAM.scene(item, "generate")
    assert sc.response.kind == "paint"
    opt = sc.response.options
    assert opt["start"] == item.stimulus["probe"]
    assert opt["palette"] == list(G.PALETTE)
    assert opt["hatches"][0] is None and all(opt["hatches"][1:])
    assert len(set(opt["labels"])) == 10
    cell = _grids_of(sc)[0].cell
    assert opt["cell"] == cell and opt["max_size"] == [G.SIDE_CAP, G.SIDE_CAP]
    x0, y0, x1, y1 = sc.answer_box
    assert (x1 - x0, y1 - y0) == pytest.approx((G.SIDE_CAP * cell, G.SIDE_CAP * cell))
    # the answer box lies right of the probe, not over it
    probe = next(g for g in _grids_of(sc) if g.role == "probe")
    assert probe.bbox()[2] < x0
    # any complete grid paints at the item's cell size into a scene the size of the box
    for grid in (item.answer, [[9, 0, 1]], [[v % 10 for v in range(12)]] * 12):
        ans = FAM.answer_scene(item, "generate", grid)
        assert (ans.width, ans.height) == pytest.approx((x1 - x0, y1 - y0))
        (g,) = _grids_of(ans)
        assert g.cell == cell and [list(r) for r in g.cells] == grid
        assert scene_problems(ans) == []
    with pytest.raises(ResponseError):
        FAM.answer_scene(item, "generate", [[1, 2], [3]])


def test_select_scene_slots_and_badges():
    item = make(32, modes=("select",))
    sc = FAM.scene(item, "select")
    keys = [s.key for s in sc.slots]
    assert keys == [f"choice:{k}" for k in range(1, len(item.choices) + 1)]
    badges = sc.of_role("badge")
    assert [b.text for b in badges] == [str(k) for k in range(1, len(item.choices) + 1)]
    choices = [g for g in _grids_of(sc) if g.role == "choice"]
    for slot, badge, grid, choice in zip(sc.slots, badges, choices, item.choices, strict=True):
        sx0, sy0, sx1, sy1 = slot.bbox()
        bx0, by0, bx1, by1 = badge.bbox()
        assert by0 >= sy1 - 0.5  # the badge sits above the frame, outside it
        gx0, gy0, gx1, gy1 = grid.bbox()
        assert sx0 <= gx0 and gx1 <= sx1 and sy0 <= gy0 and gy1 <= sy1
        assert [list(r) for r in grid.cells] == choice
    k = item.answer_choice
    ans = FAM.answer_scene(item, "select", k)
    assert [list(r) for r in _grids_of(ans)[0].cells] == item.answer


def test_hatches_and_inks_are_painted():
    from matplotlib.figure import Figure
    from twofold.study.render import paint_scene

    item = make(33)
    sc = FAM.scene(item, "generate")
    drawn = paint_scene(sc, Figure(figsize=(9.6, 5.6)))
    used = {v for g in _grids_of(sc) for row in g.cells for v in row} - {0}
    assert used
    line_colours = {d["colour"] for d in drawn if d["kind"] == "line"}
    # each colour's hatch is drawn in its own ink (black or white, whichever reads on it)
    assert {C.GRID_INKS[v] for v in used} <= line_colours
    cells = [d for d in drawn if d["kind"] == "shape" and d.get("fill") in C.GRID_PALETTE]
    assert cells


def test_conformance():
    from twofold.study.conformance import check_family

    check_family(FAM, n=4)


# -- version 1 items ------------------------------------------------------------------------------
# A record written by version 1 of the family (git 462485e, seed 2026, depth 2, size 6, 2 demos).
V1_RECORD = json.loads(
    '{"id": "grd-8309dd9cc7d0", "family": "grids", "family_version": "1", "params": {"demos":'
    ' 2, "depth": 2, "kinds": ["geometric", "colour", "object", "size"], "objects": 3, "resiz'
    'e": "any", "size": 6}, "factors": {"depth": 2, "kinds": "colour+object", "n_demos": 2, "'
    'n_objects": 2, "size": 6, "size_change": false}, "modes": ["generate", "select"], "stimu'
    'lus": {"program": [["gravity", "right"], ["recolour", 3, 4]], "test": [[0, 0, 0, 0], [3,'
    ' 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [5, 5, 0, 0]], "train": [{"input": '
    '[[0, 0, 0], [0, 3, 0], [0, 0, 0], [0, 0, 0], [0, 3, 3], [0, 0, 0]], "output": [[0, 0, 0]'
    ', [0, 0, 4], [0, 0, 0], [0, 0, 0], [0, 4, 4], [0, 0, 0]]}, {"input": [[0, 0, 0, 0, 0, 0]'
    ", [3, 0, 0, 0, 0, 0], [0, 0, 0, 3, 3, 0], [0, 3, 0, 3, 3, 0], [0, 3, 0, 0, 0, 0], [0, 0,"
    ' 0, 0, 0, 0]], "output": [[0, 0, 0, 0, 0, 0], [0, 0, 0, 0, 0, 4], [0, 0, 0, 0, 4, 4], [0'
    ', 0, 0, 4, 4, 4], [0, 0, 0, 4, 0, 0], [0, 0, 0, 0, 0, 0]]}]}, "answer": [[0, 0, 0, 0], ['
    '0, 0, 0, 4], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 5, 5]], "accepted": [], "c'
    'hoices": [[[0, 0, 0, 0], [5, 5, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, '
    "0, 0]], [[0, 0, 0, 0], [0, 0, 0, 2], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 5,"
    " 5]], [[0, 0, 0, 0], [0, 0, 0, 4], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 5, 5"
    "]], [[0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [0, 0, 0, 0], [4, 0, 0, 0], [5, 5, 0, 0]]"
    '], "distractor_scheme": "near-miss", "variant_of": null, "variant_operator": null, "seed'
    '": 4513359881998389325}'
)


def _hue_category(colour: str) -> str:
    """A coarse hue category of ``#rrggbb`` (HSV hue bins; common practice naming)."""
    import colorsys

    h, s, v = colorsys.rgb_to_hsv(*C.hex_to_rgb(colour))
    if s < 0.15:
        return "neutral-light" if v > 0.9 else "neutral"
    deg = h * 360
    if deg < 15 or deg >= 345:
        return "red"
    if deg < 42:
        return "brown" if v < 0.55 else "orange"
    if deg < 70:
        return "yellow"
    if deg < 160:
        return "green"
    if deg < 195:
        return "teal"
    if deg < 250:
        return "blue"
    if deg < 295:
        return "purple"
    return "purple" if v < 0.6 else "pink"  # dark magentas read as purple, light ones as pink


def test_v1_record_loads_unchanged_and_scores():
    item = Item.from_record(V1_RECORD)
    assert item.family_version == "1" and item.to_record() == V1_RECORD  # nothing rewritten
    FAM.validate_item(item)
    assert FAM.check(item) == []
    st = V1_RECORD["stimulus"]
    for mode in ("generate", "select"):
        assert FAM.score(item, FAM.correct_response(item, mode), mode).correct
    # wrong answers classify under the version 2 names
    assert FAM.score(item, st["test"], "generate").error_type == "copy-of-probe"
    first = G.apply_program(arr(st["test"]), st["program"][:1]).tolist()
    assert FAM.score(item, first, "generate").error_type == "part-of-rule"
    bigger = np.pad(arr(item.answer), ((0, 1), (0, 0))).tolist()
    assert FAM.score(item, bigger, "generate").error_type == "wrong-size"
    for k in range(1, len(item.choices) + 1):
        if k != item.answer_choice:
            assert FAM.score(item, k, "select").error_type in FAM.error_types
    # every version 1 name has a version 2 counterpart of the family
    for old, new in G.V1_NAMES.items():
        assert new in FAM.error_types or new in FAM.variant_operators, old
        assert "_" not in new


def test_v1_record_renders_with_its_old_hues():
    item = Item.from_record(V1_RECORD)
    st = V1_RECORD["stimulus"]
    text = FAM.render_text(item, "generate")
    assert G.format_grid(st["test"]) in text and "Example 2, after:" in text
    view = FAM.render_structured(item, "select")
    assert view["probe"] == st["test"]
    assert view["examples"][0] == {
        "before": st["train"][0]["input"],
        "after": st["train"][0]["output"],
    }
    solved = make_solver("grids-ref").solve(view, "select")
    assert FAM.score(item, solved.answer, "select").correct
    for mode in ("generate", "select"):
        sc = FAM.scene(item, mode)
        assert scene_problems(sc) == []
        grids = _grids_of(sc)
        probe = next(g for g in grids if g.role == "probe")
        assert [list(r) for r in probe.cells] == st["test"]  # the old indices, unchanged
        assert len({g.cell for g in grids}) == 1
        for old, colour in enumerate(probe.palette):
            assert colour == G.PALETTE[G.V1_TO_V2[old]]
            assert _hue_category(colour) == _hue_category(G.V1_PALETTE[old]), old
        assert probe.hatches[0] is None and all(probe.hatches[1:])
        assert render_picture(item, mode).startswith(b"\x89PNG")
    # the answer paints at the item's cell size in its old colours
    ans = FAM.answer_scene(item, "generate", item.answer)
    x0, y0, x1, y1 = FAM.scene(item, "generate").answer_box
    assert (ans.width, ans.height) == pytest.approx((x1 - x0, y1 - y0))


def test_new_palette_shares_no_hue_category_with_version_1():
    cats_old = [_hue_category(c) for c in G.V1_PALETTE]
    cats_new = [_hue_category(c) for c in G.PALETTE]
    assert all(a != b for a, b in zip(cats_old, cats_new, strict=True)), (cats_old, cats_new)
    # the mapping is a permutation that keeps each old colour's category
    assert sorted(G.V1_TO_V2) == list(range(10))
    assert [cats_new[j] for j in G.V1_TO_V2] == cats_old


def test_variants_of_a_v1_item_and_old_operator_names():
    item = Item.from_record(V1_RECORD)
    _, rng = item_rng(5, "vary-v1")
    var = FAM.vary(item, "permute_colours", rng)  # a version 1 name still works
    assert var.family_version == FAM.version == "2"
    assert var.variant_operator == "permute-colours"
    assert "examples" in var.stimulus and "train" not in var.stimulus
    assert FAM.check(var) == []


def test_v1_operation_names_read_as_current_operations():
    from twofold.study.families.grids.legacy import V1_OPS, native
    from twofold.study.families.grids.operations import OPS

    st = dict(V1_RECORD["stimulus"]) | {"program": [["flip_lr"], ["keep_smallest"], ["rot90"]]}
    assert native(st)["program"] == [["flip-lr"], ["keep-smallest"], ["rot90"]]
    assert V1_RECORD["stimulus"]["program"] == [["gravity", "right"], ["recolour", 3, 4]]
    for old, new in V1_OPS.items():
        assert new in OPS and old not in OPS and "_" not in new
    # every operation a new item can carry is named in one style
    assert all("_" not in name for name in OPS)
