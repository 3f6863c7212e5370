"""Tests of the ``strings`` family: grammar, generation, validity, variants, scoring, rendering."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from twofold.study import generate_bank, load_bank, parse_spec, write_bank
from twofold.study.exceptions import ResponseError
from twofold.study.families import Rejected, get_family
from twofold.study.families.strings import (
    ALPHABETS,
    RULES,
    apply_program,
    consistent_programs,
    description_length,
    literal_edit,
)
from twofold.study.families.strings.search import _Analysis
from twofold.study.generate import item_rng
from twofold.study.item import validate_record
from twofold.study.render import render, render_picture

FAM = get_family("strings")
LETTERS = ALPHABETS["letters"]

PARAMS = st.fixed_dictionaries(
    {
        "rule": st.sampled_from(["any", *RULES]),
        "length": st.integers(3, 7),
        "grouping": st.sampled_from(["none", "pairs", "mixed"]),
        "direction": st.sampled_from(["up", "down"]),
        "wrap": st.booleans(),
        "alphabet": st.sampled_from(list(ALPHABETS)),
    }
)
MODES = st.sampled_from([("generate",), ("select",), ("generate", "select")])
FAST = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def enc(text: str, symbols: str = LETTERS) -> tuple[int, ...]:
    return tuple(symbols.index(c) for c in text)


def dec(seq, symbols: str = LETTERS) -> str:
    return "".join(symbols[v] for v in seq)


def make(params, seed, modes=("generate",), scheme="near-miss", n_choices=4):
    """The first valid item for ``params`` from ``seed`` (retrying like the bank does)."""
    for attempt in range(50):
        s, rng = item_rng(seed, "test", attempt)
        try:
            return FAM.generate(
                params,
                rng,
                seed=s,
                modes=list(modes),
                distractor_scheme=scheme if "select" in modes else None,
                n_choices=n_choices,
            )
        except Rejected:
            continue
    assume(False)  # an impossible combination of levels (counted as a rejection by the bank)
    raise AssertionError(f"no item for {params}")


# -- the grammar ------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("rule", "target", "expected"),
    [
        ("succ-last", "fgh", "fgi"),
        ("succ-last", "ffgghh", "ffggii"),
        ("pred-first", "aefg", "zefg"),  # circular order
        ("shift-all", "yyzz", "zzaa"),  # wraps at the end
        ("double-last", "fgh", "fghh"),
        ("extend", "kji", "kjih"),
        ("extend", "yyzz", "yyzzaa"),
        ("drop-first", "ffgghh", "gghh"),
        ("swap-ends", "pqrs", "sqrp"),
        ("reverse", "fggh", "hggf"),
    ],
)
def test_rules_apply_as_documented(rule, target, expected):
    assert dec(apply_program(RULES[rule], enc(target), 26)) == expected


def test_symbol_level_differs_from_group_level_on_groups():
    prog = RULES["succ-last"]
    sym = ("map", "symbol", ("last",), ("shift", 1))
    assert dec(apply_program(prog, enc("ffgg"), 26)) == "ffhh"
    assert dec(apply_program(sym, enc("ffgg"), 26)) == "ffgh"


def test_consistent_programs_include_the_rule_and_the_literal_readings():
    progs = consistent_programs(enc("fgh"), enc("fgi"), 26)
    assert RULES["succ-last"] in progs
    assert ("map", "group", ("last",), ("set", 8)) in progs  # "the last becomes i"
    assert ("map", "group", ("value", 7), ("shift", 1)) in progs  # "every h moves on"
    assert ("map", "group", ("first",), ("shift", 1)) not in progs
    # every listed description really turns the source into the change
    for prog in progs:
        assert apply_program(prog, enc("fgh"), 26) == enc("fgi")


def test_shortest_description_is_the_intended_one():
    progs = consistent_programs(enc("fgh"), enc("fgi"), 26)
    best = min(progs, key=lambda p: description_length(p, 26))
    assert best == RULES["succ-last"]
    # a literal symbol costs 1 + log2(alphabet size) bits
    lit = ("map", "group", ("last",), ("set", 8))
    assert description_length(lit, 26) == pytest.approx(1 + 0 + 1 + 1 + np.log2(26))


def test_analysis_rejects_a_reading_that_is_not_the_simplest():
    # intended "the third group moves on" on a longer target; "the last moves on" is shorter
    intended = ("map", "group", ("pos", 3), ("shift", 1))
    an = _Analysis(intended, enc("fgh"), enc("fgi"), enc("pqrs"), 26, LETTERS)
    assert dec(an.answer) == "pqss"
    assert {dec(r[2]) for r in an.simpler} == {"pqrt"}
    an2 = _Analysis(RULES["succ-last"], enc("fgh"), enc("fgi"), enc("pqrs"), 26, LETTERS)
    assert an2.simpler == []


def test_analysis_records_the_symbol_level_alternative_with_a_label():
    an = _Analysis(RULES["succ-last"], enc("fggh"), enc("fggi"), enc("ppqrr"), 26, LETTERS)
    assert dec(an.answer) == "ppqss"
    labels = {dec(k): v for k, v in an.accepted.items()}
    assert set(labels) == {"ppqrs"}
    assert labels["ppqrs"].startswith("symbol-level")


@pytest.mark.parametrize(
    ("src", "chg", "tgt", "expected"),
    [
        ("defg", "defh", "qrst", "qrsh"),
        ("defg", "zefg", "qrst", "zrst"),
        ("defg", "defgh", "qrst", "qrsth"),
        ("defg", "gfed", "qrst", "gfed"),
    ],
)
def test_literal_edit_copies_symbols_at_the_same_place(src, chg, tgt, expected):
    assert dec(literal_edit(enc(src), enc(chg), enc(tgt))) == expected


# -- generation -------------------------------------------------------------------------------
@FAST
@given(params=PARAMS, seed=st.integers(0, 2**32), modes=MODES)
def test_generation_is_deterministic_and_schema_valid(params, seed, modes):
    a = make(params, seed, modes)
    b = make(params, seed, modes)
    assert a.to_json() == b.to_json()
    validate_record(json.loads(a.to_json()))
    assert a.id.startswith("str-")
    assert set(FAM.factors) <= set(a.factors)
    assert len(FAM.factors) >= 4


@FAST
@given(params=PARAMS, seed=st.integers(0, 2**32))
def test_answer_follows_the_generating_rule(params, seed):
    item = make(params, seed)
    st_ = item.stimulus
    symbols = st_["symbols"]
    n = len(symbols)
    prog = RULES[item.factors["rule"]]
    assert apply_program(prog, enc(st_["source"], symbols), n) == enc(st_["changed"], symbols)
    assert dec(apply_program(prog, enc(st_["target"], symbols), n), symbols) == item.answer
    assert item.answer != st_["target"]
    assert FAM.check(item) == []
    if params["rule"] != "any":
        assert item.factors["rule"] == params["rule"]


@FAST
@given(params=PARAMS, seed=st.integers(0, 2**32))
def test_accepted_answers_are_other_short_readings_and_score_correct(params, seed):
    item = make(params, seed)
    answers = [a["answer"] for a in item.accepted]
    assert item.answer not in answers
    assert len(set(answers)) == len(answers)
    assert item.factors["n_readings"] == 1 + len(answers)
    for acc in item.accepted:
        assert acc["label"].split(":")[0] in {
            "symbol-level",
            "group-level",
            "counted-from-start",
            "counted-from-end",
            "other-rule",
        }
        score = FAM.score(item, acc["answer"], "generate")
        assert score.correct and score.error_type is None and score.label == acc["label"]
    assert FAM.score(item, item.answer, "generate").label == "intended"


def test_check_finds_a_tampered_answer():
    item = make({}, 3)
    bad = item.replace(prefix="str", answer=item.stimulus["target"])
    assert "answer is not the rule applied to the target" in FAM.check(bad)


def test_wrap_factor_places_the_target_at_the_end_of_the_order():
    for seed in range(10):
        item = make({"rule": "succ-last", "wrap": True}, seed)
        assert item.stimulus["target"][-1] == "z"
        assert item.answer[-1] == "a"
        plain = make({"rule": "succ-last", "wrap": False}, seed)
        assert plain.stimulus["target"][-1] != "z"


def test_generator_rejects_impossible_levels_with_a_reason():
    # ten groups of digits cannot give a target distinct from the source without wrapping
    reasons = set()
    for i in range(10):
        _, rng = item_rng(1, "imp", i)
        with pytest.raises(Rejected) as err:
            FAM.generate(
                {"length": 10, "alphabet": "digits"},
                rng,
                seed=i,
                modes=["generate"],
                distractor_scheme=None,
                n_choices=4,
            )
        reasons.add(err.value.reason)
    assert reasons <= {
        "source does not fit the symbol order",
        "no target position with the requested wrap",
    }


# -- select mode ------------------------------------------------------------------------------
@FAST
@given(
    params=PARAMS,
    seed=st.integers(0, 2**32),
    scheme=st.sampled_from(list(FAM.distractor_schemes)),
    k=st.integers(2, 8),
)
def test_choices_hold_the_answer_once_and_no_accepted_answer(params, seed, scheme, k):
    item = make(params, seed, ("select",), scheme, k)
    assert len(item.choices) == k
    assert item.choices.count(item.answer) == 1
    assert len(set(item.choices)) == k
    assert not {a["answer"] for a in item.accepted} & set(item.choices)
    assert item.distractor_scheme == scheme
    assert FAM.score(item, item.answer_choice, "select").correct


def test_near_miss_distractors_come_from_named_error_types():
    types = []
    for seed in range(30):
        item = make({}, seed, ("select",), "near-miss", 4)
        for k in range(1, 5):
            if k != item.answer_choice:
                types.append(FAM.score(item, k, "select").error_type)
    assert set(types) >= {"literal", "no-change", "wrong-position"}
    assert types.count("other") < len(types) / 4


def test_default_choices_is_four():
    assert FAM.default_choices == 4
    spec = parse_spec({"seed": 1, "families": {"strings": {"n": 2, "modes": ["select"]}}})
    assert spec.families[0].n_choices == 4


# -- variants ---------------------------------------------------------------------------------
@FAST
@given(
    params=PARAMS,
    seed=st.integers(0, 2**32),
    op=st.sampled_from(list(FAM.variant_operators)),
)
def test_variants_keep_the_rule_and_recompute_the_answer(params, seed, op):
    item = make(params, seed, ("generate", "select"))
    _, rng = item_rng(seed, "vary", op)
    try:
        var = FAM.vary(item, op, rng)
    except Rejected:
        return
    assert var.variant_of == item.id and var.variant_operator == op
    assert var.id != item.id
    assert var.factors["rule"] == item.factors["rule"]
    assert var.factors["grouping"] == item.factors["grouping"]
    assert var.factors["wrap"] == item.factors["wrap"]
    assert FAM.check(var) == []
    validate_record(json.loads(var.to_json()))
    if op == "other-alphabet":
        assert var.factors["alphabet"] != item.factors["alphabet"]
    elif op == "reverse-direction":
        assert var.factors["direction"] != item.factors["direction"]
    elif op == "longer":
        assert var.factors["length"] > item.factors["length"]
    else:
        assert var.stimulus["symbols"] == item.stimulus["symbols"]


def test_variant_operators_usually_succeed():
    made = 0
    for seed in range(10):
        item = make({}, seed)
        for op in FAM.variant_operators:
            _, rng = item_rng(seed, op)
            try:
                FAM.vary(item, op, rng)
                made += 1
            except Rejected:
                pass
    assert made >= 36


# -- scoring and errors -----------------------------------------------------------------------
@FAST
@given(params=PARAMS, seed=st.integers(0, 2**32), modes=MODES)
def test_classifier_never_calls_a_correct_answer_an_error(params, seed, modes):
    item = make(params, seed, modes)
    for mode in item.modes:
        right = item.answer_choice if mode == "select" else item.answer
        sc = FAM.score(item, right, mode)
        assert sc.correct and sc.error_type is None


@FAST
@given(params=PARAMS, seed=st.integers(0, 2**32), modes=MODES, rseed=st.integers(0, 1000))
def test_sample_error_is_wrong_with_the_stated_type(params, seed, modes, rseed):
    item = make(params, seed, modes)
    for mode in item.modes:
        wrong, etype = FAM.sample_error(item, mode, np.random.default_rng(rseed))
        sc = FAM.score(item, wrong, mode)
        assert not sc.correct
        assert sc.error_type == etype
        assert etype in FAM.error_types


def test_error_types_on_a_known_item():
    item = make({"rule": "succ-last"}, 0)
    t = item.stimulus["target"]
    nxt = LETTERS[(LETTERS.index(t[-1]) + 1) % 26]
    prv = LETTERS[(LETTERS.index(t[-1]) - 1) % 26]
    assert item.answer == t[:-1] + nxt
    changed_last = item.stimulus["changed"][-1]

    def etype(resp):
        return FAM.score(item, resp, "generate").error_type

    assert etype(t) == "no-change"
    assert etype(t[:-1] + changed_last) == "literal"
    first = LETTERS[(LETTERS.index(t[0]) + 1) % 26]
    assert etype(first + t[1:]) == "wrong-position"
    assert etype(t[:-1] + prv) == "wrong-direction"
    assert etype("q" * 7) == "other"


def test_error_types_for_groups():
    item = make({"rule": "shift-all", "grouping": "pairs"}, 1)
    t, a = item.stimulus["target"], item.answer

    def etype(resp):
        return FAM.score(item, resp, "generate").error_type

    assert etype(a[:2] + t[2:]) == "partial"  # only the first pair moved on
    item2 = make({"rule": "succ-last", "grouping": "pairs"}, 1)
    t2 = item2.stimulus["target"]
    nxt = LETTERS[(LETTERS.index(t2[-1]) + 1) % 26]
    assert FAM.score(item2, t2[:-1] + nxt, "generate").error_type == "wrong-grouping"


def test_error_types_are_documented():
    assert len(FAM.error_types) >= 5 and "other" in FAM.error_types
    assert all(v.strip() for v in FAM.error_types.values())


# -- responses --------------------------------------------------------------------------------
def _abc_item():
    for seed in range(100):
        item = make({"rule": "succ-last"}, seed)
        if not item.accepted:
            return item
    raise AssertionError("no item")


@pytest.mark.parametrize(
    "template",
    [
        "{a}",
        "Answer: {a}",
        "answer: {A}",
        "The answer is {a}.",
        "I think {t} becomes {a}, because the last letter moves on.\nAnswer: {a}",
        "```\n{a}\n```",
        "Let me think. The source changes its last symbol. So **{a}**.",
        'The changed string is "{a}".',
        "{t} -> {a}",
        "Answer: {spaced}",
        "Final answer: `{a}`",
        "**Answer:** {a}",
        "Answer: **{a}**",
        "I'll answer: the string becomes {a}",
        "answer = '{a}'",
        "Reasoning... the last symbol moves one step on.\n\nAnswer:\n{a}",
    ],
)
def test_parse_text_reads_messy_replies(template):
    item = _abc_item()
    a, t = item.answer, item.stimulus["target"]
    text = template.format(a=a, A=a.upper(), t=t, spaced=" ".join(a))
    assert FAM.parse_text(item, text, "generate") == a


def test_parse_text_reads_glyph_replies():
    item = make({"alphabet": "glyphs", "rule": "succ-last"}, 2)
    a = item.answer
    assert FAM.parse_text(item, "Answer: " + " ".join(a), "generate") == a
    assert FAM.parse_text(item, f"It becomes {a} I believe", "generate") == a


def test_parse_text_select_and_failures():
    item = make({}, 4, ("select",))
    assert FAM.parse_text(item, "I pick option 3.\nAnswer: 2", "select") == 2
    gen = _abc_item()
    with pytest.raises(ResponseError, match="no string of symbols"):
        FAM.parse_text(gen, "I cannot tell 123!", "generate")


def test_normalize_accepts_spacing_and_case_and_rejects_foreign_symbols():
    item = _abc_item()
    a = item.answer
    assert FAM.score(item, " ".join(a.upper()), "generate").correct
    assert FAM.score(item, list(a), "generate").correct
    with pytest.raises(ResponseError, match="field 'response'"):
        FAM.score(item, a + "7", "generate")
    with pytest.raises(ResponseError, match="field 'response'"):
        FAM.score(item, 12, "generate")


# -- rendering --------------------------------------------------------------------------------
@FAST
@given(params=PARAMS, seed=st.integers(0, 2**32), modes=MODES)
def test_views_are_deterministic_and_answer_free(params, seed, modes):
    item = make(params, seed, modes)
    other = item.replace(prefix="str", answer="zz" if item.answer != "zz" else "yy", accepted=[])
    for mode in item.modes:
        text = render(item, "text", mode)
        view = render(item, "structured", mode)
        assert text == render(item, "text", mode)
        assert json.dumps(view) == json.dumps(render(item, "structured", mode))
        # neither view depends on the answer or the accepted answers
        assert text == render(other, "text", mode)
        view2 = render(other, "structured", mode)
        view2.pop("item"), view.pop("item")
        assert view == view2
        assert "answer" not in view and "accepted" not in view and "rule" not in json.dumps(view)
        assert " ".join(item.stimulus["symbols"]) in text  # the order is shown
        assert view["symbol_order"] == list(item.stimulus["symbols"])
        if mode == "select":
            assert view["choices"] == list(item.choices)
            assert re.search(r"Answer: <number>", text)
        else:
            assert re.search(r"Answer: <string>", text)


def test_pictures_are_deterministic_pngs():
    for modes in (("generate",), ("select",)):
        item = make({"alphabet": "glyphs", "grouping": "mixed", "length": 6}, 1, modes)
        png = render_picture(item)
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
        assert png == render_picture(item)
        svg = render_picture(item, fmt="svg")
        assert svg == render_picture(item, fmt="svg")


# -- banks ------------------------------------------------------------------------------------
def test_bank_generates_writes_and_loads(tmp_path):
    spec = parse_spec(
        {
            "seed": 11,
            "families": {
                "strings": {
                    "n": 24,
                    "modes": ["generate", "select"],
                    "design": "crossed",
                    "params": {"grouping": ["none", "mixed"], "wrap": [False, True]},
                    "variants": {"operators": list(FAM.variant_operators), "per_item": 1},
                }
            },
        }
    )
    bank = generate_bank(spec)
    again_bank = generate_bank(spec)
    assert bank.hash == again_bank.hash
    written = write_bank(bank, tmp_path / "bank")
    loaded = load_bank(tmp_path / "bank")
    assert loaded.hash == written.hash
    parents = [it for it in loaded if it.variant_of is None]
    assert len(parents) == 24
    assert sum(it.variant_of is not None for it in loaded) >= 20
    assert {it.factors["grouping"] for it in parents} == {"none", "mixed"}
    for it in loaded:
        assert FAM.check(it) == []


def test_every_glyph_is_in_the_fonts_of_pictures_and_screens():
    # a glyph missing from a font shows as an empty box to the respondent
    import os

    import matplotlib
    from fontTools.ttLib import TTFont
    from twofold.study.families.strings import ALPHABETS

    folder = os.path.join(os.path.dirname(matplotlib.__file__), "mpl-data", "fonts", "ttf")
    for name in ("DejaVuSans.ttf", "DejaVuSansMono.ttf"):
        cmap = TTFont(os.path.join(folder, name)).getBestCmap()
        missing = [g for g in ALPHABETS["glyphs"] if ord(g) not in cmap]
        assert missing == [], (name, missing)


# -- scenes -----------------------------------------------------------------------------------
SCENE_PARAMS = st.fixed_dictionaries(
    {
        "rule": st.sampled_from(["any", *RULES]),
        "length": st.integers(3, 10),
        "grouping": st.sampled_from(["none", "pairs", "mixed"]),
        "direction": st.sampled_from(["up", "down"]),
        "wrap": st.booleans(),
        "alphabet": st.sampled_from(list(ALPHABETS)),
    }
)


def _rows_of_cells(scene, role="cell"):
    """The cells of a scene grouped by row (same bottom edge), each row sorted left to right."""
    rows: dict[float, list] = {}
    for el in scene.of_role(role):
        x0, y0, x1, y1 = el.bbox()
        rows.setdefault(round(y0, 3), []).append((x0, x1))
    return [sorted(r) for r in rows.values()]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(params=SCENE_PARAMS, seed=st.integers(0, 2**32), n_choices=st.integers(2, 8))
def test_scenes_fit_and_strings_are_evenly_spaced(params, seed, n_choices):
    from twofold.study.scene import MIN_TEXT, Text, scene_problems

    item = make(params, seed, ("generate", "select"), n_choices=n_choices)
    for mode in item.modes:
        sc = FAM.scene(item, mode)
        assert scene_problems(sc) == []
        assert sc == FAM.scene(item, mode)
        # every string is a run of equal cells that touch: one cell per symbol, evenly spaced;
        # two strings on one row (the example's, two choices) stand well apart
        for row in _rows_of_cells(sc) + _rows_of_cells(sc, "key"):
            widths = {round(x1 - x0, 6) for x0, x1 in row}
            assert len(widths) == 1
            gaps = [b[0] - a[1] for a, b in zip(row, row[1:], strict=False)]
            assert all(abs(g) < 1e-6 or g >= min(widths) for g in gaps)
        symbols = [el for el in sc.elements if isinstance(el, Text) and el.role == "symbol"]
        assert all(el.font == "mono" and el.size >= MIN_TEXT for el in symbols)
        key = "".join(el.text for el in symbols[: len(item.stimulus["symbols"])])
        assert key == item.stimulus["symbols"]  # the order is shown, first, as a key strip
        shown = "".join(el.text for el in symbols)
        assert item.stimulus["source"] + item.stimulus["changed"] in shown
        if mode == "generate":
            assert sc.response.kind == "type" and sc.answer_box is not None
            # exactly the example and the new string are shown, nothing more (not the answer)
            st_ = item.stimulus
            assert shown[len(key) :] == st_["source"] + st_["changed"] + st_["target"]
        else:
            assert sc.response.kind == "choose"
            assert [s.key for s in sc.slots] == [f"choice:{k + 1}" for k in range(n_choices)]


def test_choices_of_9_to_17_symbols_fit_with_their_numbers_outside_the_boxes():
    from twofold.study.scene import scene_problems

    seen = set()
    for length in (9, 12, 17):
        for grouping, n in (("none", length), ("pairs", length // 2)):
            if n < 3 or (grouping == "none" and n > 10):
                continue
            item = make({"length": n, "grouping": grouping}, length, ("select",), n_choices=8)
            sc = FAM.scene(item, "select")
            assert scene_problems(sc) == []
            badges = sc.of_role("badge")
            assert [b.text for b in badges] == [str(k) for k in range(1, 9)]
            for k, badge in enumerate(badges, start=1):
                bx0, by0, bx1, by1 = badge.bbox()
                sx0, sy0, sx1, sy1 = sc.slot(f"choice:{k}").bbox()
                assert bx1 <= sx0 and sy0 <= (by0 + by1) / 2 <= sy1  # left of its box, level
            # every choice's cells lie inside its box, and boxes do not overlap
            boxes = [sc.slot(f"choice:{k}").bbox() for k in range(1, 9)]
            for a in range(8):
                for b in range(a + 1, 8):
                    A, B = boxes[a], boxes[b]
                    assert A[2] <= B[0] or B[2] <= A[0] or A[3] <= B[1] or B[3] <= A[1]
            seen.add(max(len(c) for c in item.choices))
    assert max(seen) >= 15 and min(seen) <= 10


def test_typed_answers_offer_keys_only_for_untypeable_orders():
    for alphabet, keys in (("letters", []), ("digits", []), ("glyphs", list(ALPHABETS["glyphs"]))):
        item = make({"alphabet": alphabet}, 4)
        sc = FAM.scene(item, "generate")
        assert sc.response.kind == "type"
        assert list(sc.response.options["symbols"]) == keys


def test_answer_scene_draws_any_string_in_the_cells_of_the_stimulus():
    item = make({"length": 4}, 6, ("generate", "select"))
    sc = FAM.scene(item, "generate")
    cell = sc.of_role("cell")[0].bbox()
    side = cell[2] - cell[0]
    for answer in (item.answer, "pq", item.stimulus["target"] + "p"):
        ans = FAM.answer_scene(item, "generate", answer)
        assert ans.width == pytest.approx(len(answer) * side) and ans.height == pytest.approx(side)
        assert "".join(el.text for el in ans.of_role("symbol")) == answer
    x0, y0, x1, y1 = sc.answer_box
    assert y1 - y0 == pytest.approx(side)
    ans = FAM.answer_scene(item, "select", 2)
    assert "".join(el.text for el in ans.of_role("symbol")) == item.choices[1]
    assert [b.text for b in ans.of_role("badge")] == ["2"]


# an item written by version 2 (the last version with a matplotlib drawing), saved as generated
V2_RECORD = {
    "accepted": [],
    "answer": "qqrrssuu",
    "choices": ["rrrrsstt", "qqsssstt", "qqrrssuu", "qqrrtttt"],
    "distractor_scheme": "near-miss",
    "factors": {
        "alphabet": "letters",
        "direction": "up",
        "grouping": "pairs",
        "length": 4,
        "n_readings": 1,
        "n_symbols": 8,
        "rule": "succ-last",
        "wrap": False,
    },
    "family": "strings",
    "family_version": "2",
    "id": "str-34c2f363c1ed",
    "modes": ["generate", "select"],
    "params": {
        "alphabet": "letters",
        "direction": "up",
        "grouping": "pairs",
        "length": 4,
        "rule": "any",
        "wrap": False,
    },
    "seed": 30,
    "stimulus": {
        "alphabet": "letters",
        "changed": "ffgghhjj",
        "circular": True,
        "source": "ffgghhii",
        "symbols": "abcdefghijklmnopqrstuvwxyz",
        "target": "qqrrsstt",
    },
    "variant_of": None,
    "variant_operator": None,
}


def test_version_2_records_load_score_and_render(tmp_path):
    from twofold.study.bank import Bank
    from twofold.study.item import Item
    from twofold.study.scene import scene_problems

    assert FAM.version == "3"
    item = Item.from_record(V2_RECORD)
    assert item.id == V2_RECORD["id"] and item.family_version == "2"
    FAM.validate_item(item, deep=True)
    assert FAM.score(item, "qqrrssuu", "generate").correct
    assert FAM.score(item, 3, "select").correct
    assert FAM.score(item, "qqrrsstt", "generate").error_type == "no-change"
    for mode in item.modes:
        assert scene_problems(FAM.scene(item, mode)) == []
        assert render_picture(item, mode).startswith(b"\x89PNG")
    bank = Bank.from_items([item], seed=1, created="2026-01-01T00:00:00+00:00")
    write_bank(bank, tmp_path / "old")
    loaded = load_bank(tmp_path / "old")
    assert loaded.hash == bank.hash and next(iter(loaded)).to_record() == V2_RECORD


# -- the example bank -------------------------------------------------------------------------
def _textbook_looking(text: str) -> bool:
    """Strings that read as well-known textbook letter-string problems (common practice: the
    handful of strings every introduction uses, and letter runs that start at either end of the
    alphabet)."""
    famous = {"abc", "abd", "ijk", "ijl", "xyz", "mrrjjj", "iijjkk", "mno", "nop", "rst"}
    if text in famous:
        return True
    return set(text) <= set(LETTERS) and text[0] in "az"


def test_textbook_check_is_not_vacuous():
    assert _textbook_looking("xyz") and _textbook_looking("aabbcc") and _textbook_looking("zyx")
    assert not _textbook_looking("pqrs") and not _textbook_looking("0123")


def test_the_example_bank_has_no_textbook_strings():
    import pathlib
    import tomllib

    root = pathlib.Path(__file__).resolve().parents[1]
    raw = tomllib.loads((root / "example_study" / "generate.toml").read_text())
    raw["families"] = {"strings": raw["families"]["strings"]}  # the other families do not matter
    bank = generate_bank(parse_spec(raw))
    assert len(bank) == 40
    flagged = [
        (it.stimulus["source"], it.stimulus["changed"], it.stimulus["target"])
        for it in bank
        if any(_textbook_looking(it.stimulus[k]) for k in ("source", "changed", "target"))
    ]
    assert flagged == []
