"""Every participant screen fits: at 1024x768, 1280x1024 and 1920x1080, for every family and
mode (and the stated-rule state of contrast), nothing leaves the window, no text overlaps
another text or a button other than its own, text is at least 18 px high, matrix objects at
least 18 px across, grid cells at least 12 px. Boxes come from the drawn stimuli
(``Screen.boxes()``: real glyph extents from ``TextStim.boundingBox``), checked once when the
screen is built and once in its fullest state (every label given and a rule typed, every
attribute picked with its preview, a long typed answer, the answer grid at its largest size).

Includes strings items whose choices hold 9-17 symbols and the largest grids item the generator
allows. One subprocess under Xvfb opens one window per size (see ``_display.screen_job``).
"""

from __future__ import annotations

import pytest
from _display import screen_job, x_display  # noqa: F401 - a fixture
from _toyfamily import use_toy
from twofold.study import get_family

SIZES = [[1024, 768], [1280, 1024], [1920, 1080]]
MIN_TEXT, MIN_OBJECT, MIN_CELL = 18.0, 18.0, 12.0


def _specs() -> list[dict]:
    grids_max = next(p.high for p in get_family("grids").params if p.name == "size")
    both = ["select", "generate"]
    return [
        {"seed": 7, "families": {"strings": {"n": 1, "modes": both}}},
        # long strings: 8 pairs (16-17 symbols) and 10 single symbols per string
        {"seed": 7, "families": {"strings": {"n": 1, "modes": both,
                                             "params": {"length": 8, "grouping": "pairs"}}}},
        {"seed": 8, "families": {"strings": {"n": 1, "modes": both, "params": {"length": 10}}}},
        {"seed": 8, "families": {"strings": {"n": 1, "modes": both,
                                             "params": {"alphabet": "glyphs", "length": 6}}}},
        {"seed": 7, "families": {"matrices": {"n": 1, "modes": both}}},
        {"seed": 7, "families": {"contrast": {"n": 1, "modes": both}}},
        {"seed": 7, "families": {"grids": {"n": 1, "modes": both,
                                           "params": {"size": grids_max}}}},
        {"seed": 3, "families": {"toy": {"n": 1, "modes": both}}},
    ]  # fmt: skip


def _overlap(a, b, tol: float = 1.0) -> bool:
    return a[0] < b[2] - tol and b[0] < a[2] - tol and a[1] < b[3] - tol and b[1] < a[3] - tol


def problems(entry: dict, boxes: list) -> list[str]:
    """What is wrong with one screen's boxes (window pixels, origin top left)."""
    w, h = entry["size"]
    out = []
    texts = [b for b in boxes if b[5] is not None]
    buttons = [b for b in boxes if b[0].startswith(("button:", "swatch:"))]
    for name, x0, y0, x1, y1, letter in boxes:
        if x0 < -0.5 or y0 < -0.5 or x1 > w + 0.5 or y1 > h + 0.5:
            out.append(f"{name!r} leaves the window: {[round(v) for v in (x0, y0, x1, y1)]}")
        if letter is not None and letter < MIN_TEXT - 0.01:
            out.append(f"text {name!r} is {letter:.1f} px high")
        if name == "cell" and min(x1 - x0, y1 - y0) < MIN_CELL - 0.01:
            out.append(f"grid cells are {x1 - x0:.1f} px")
        if entry["family"] == "matrices" and name == "shape:object":
            if min(x1 - x0, y1 - y0) < MIN_OBJECT - 0.01:
                out.append(f"an object is {min(x1 - x0, y1 - y0):.1f} px across")
    for k, a in enumerate(texts):
        for b in texts[k + 1 :]:
            if _overlap(a[1:5], b[1:5]):
                out.append(f"texts {a[0]!r} and {b[0]!r} overlap")
        for btn in buttons:
            own = btn[0].split(":", 1)[1]
            if a[0] in (f"label@{own}", f"swatch-label@{own}"):
                continue
            if _overlap(a[1:5], btn[1:5]):
                out.append(f"text {a[0]!r} overlaps {btn[0]!r}")
    for k, a in enumerate(buttons):
        for b in buttons[k + 1 :]:
            if _overlap(a[1:5], b[1:5], tol=0.0):
                out.append(f"{a[0]!r} and {b[0]!r} overlap")
    return out


def test_problems_are_seen():
    """The checks can fail: a text out of the window, overlapping texts, small text."""
    entry = {"size": [100, 100], "family": "matrices"}
    fine = [("text:a", 10, 10, 40, 30, 20.0), ("button:b", 50, 50, 90, 90, None),
            ("label@b", 55, 60, 85, 80, 20.0)]  # fmt: skip
    assert problems(entry, fine) == []
    assert problems(entry, [*fine, ("text:c", 95, 10, 120, 30, 20.0)])
    assert problems(entry, [*fine, ("text:c", 20, 20, 45, 40, 20.0)])
    assert problems(entry, [*fine, ("text:c", 10, 60, 30, 80, 12.0)])
    assert problems(entry, [*fine, ("text:c", 60, 52, 80, 58, 19.0)])  # over another button
    assert problems(entry, [*fine, ("shape:object", 5, 5, 15, 15, None)])


@pytest.fixture(scope="module")
def screens(x_display, tmp_path_factory):  # noqa: F811
    tmp = tmp_path_factory.mktemp("fit")
    return screen_job(x_display, tmp, {"task": "boxes", "specs": _specs(), "toy": True,
                                       "sizes": SIZES})  # fmt: skip


def test_every_screen_fits_at_three_window_sizes(screens, monkeypatch):
    use_toy(monkeypatch)
    seen = {(e["family"], e["mode"], e["rule"], tuple(e["size"])) for e in screens}
    for size in SIZES:
        for fam in ("strings", "matrices", "contrast", "grids", "toy"):
            for mode in ("select", "generate"):
                assert (fam, mode, False, tuple(size)) in seen
        assert ("contrast", "select", True, tuple(size)) in seen
    assert {e["kind"] for e in screens} == {
        "ChooseScreen", "TypeScreen", "LabelScreen", "BuildScreen", "EditorScreen",
    }  # fmt: skip
    bad = []
    for e in screens:
        for state, boxes in zip(("built", "full"), e["boxes"], strict=True):
            assert boxes, e["item"]
            for p in problems(e, boxes):
                where = f"{e['family']} {e['mode']}{' +rule' if e['rule'] else ''}"
                bad.append(f"{where} {e['size'][0]}x{e['size'][1]} ({state}): {p}")
    assert bad == []


def test_long_strings_choices_and_the_largest_grid_were_shown(screens):
    items = {e["item"]: e for e in screens}
    assert any(e["family"] == "grids" and e["kind"] == "EditorScreen" for e in items.values())
    # the full-state editor holds the largest answer grid: its cells are still >= 12 px
    cells = [
        b for e in screens if e["kind"] == "EditorScreen" for b in e["boxes"][1]
        if b[0] == "cell"
    ]  # fmt: skip
    assert cells and min(b[3] - b[1] for b in cells) >= MIN_CELL


def _luminance(colour: str) -> float:
    # reference: WCAG 2.1 relative luminance (sRGB, 0.03928 threshold) -- from memory
    vals = []
    for k in (1, 3, 5):
        v = int(colour[k : k + 2], 16) / 255
        vals.append(v / 12.92 if v <= 0.03928 else ((v + 0.055) / 1.055) ** 2.4)
    return 0.2126 * vals[0] + 0.7152 * vals[1] + 0.0722 * vals[2]


def _ratio(a: str, b: str) -> float:
    hi, lo = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def test_fast_drag_paints_every_cell_and_swatch_labels_contrast(x_display, tmp_path):  # noqa: F811
    assert round(_ratio("#000000", "#ffffff"), 1) == 21.0  # reference: WCAG 2.1 (from memory)
    spec = {"seed": 7, "families": {"grids": {"n": 2, "modes": ["generate"]}}}
    got = screen_job(x_display, tmp_path, {"task": "drag", "specs": [spec]})
    assert len(got) == 2
    for g in got:
        # one jump from the first to the last cell of the row: every cell between is painted
        assert g["row"] == [g["colour"]] * len(g["row"]) and g["colour"] != g["empty"]
        assert g["after_undo"] == [g["empty"]] * len(g["row"])  # the stroke was one undo step
        for fill, ink in zip(g["fills"], g["inks"], strict=True):
            assert _ratio(fill, ink) >= 4.5, (fill, ink)


# -- the interactions the layouts serve ----------------------------------------------------------
@pytest.fixture(scope="module")
def acted(x_display, tmp_path_factory):  # noqa: F811
    specs = [
        {"seed": 7, "families": {"contrast": {"n": 1, "modes": ["select"]}}},
        {"seed": 7, "families": {"matrices": {"n": 1, "modes": ["generate"]}}},
        {"seed": 8, "families": {"strings": {"n": 1, "modes": ["generate"],
                                             "params": {"alphabet": "glyphs"}}}},
        {"seed": 7, "families": {"grids": {"n": 1, "modes": ["generate"]}}},
    ]  # fmt: skip
    got = screen_job(
        x_display, tmp_path_factory.mktemp("act"), {"task": "interact", "specs": specs}
    )
    return {(g["kind"], g.get("rule")): g for g in got}


def test_labels_wait_for_review_and_can_change(acted):
    for rule in (False, True):
        g = acted[("LabelScreen", rule)]
        assert g["n"] >= 2
        assert g["steps"] == [None] * g["n"]  # the last label does not submit
        assert g["review"] == [True, True]  # a review state with SUBMIT
        assert g["given"][0] == "B"  # changed by a click on the panel and on "Set B"
        value, t, detail = g["final"]
        assert value == "".join(g["given"])
        if rule:
            assert g["early"] is None  # ENTER without a rule does nothing
            assert detail == "rule statement: ab" and t == 21.0  # timed at its last label
        else:
            assert detail is None and t == 30.0


def test_builder_previews_to_scale_and_submits_when_complete(acted):
    g = acted[("BuildScreen", None)]
    assert g["early"] is None
    preview, stimulus = g["scales"]
    assert preview == pytest.approx(stimulus)  # the same pixels per unit as the matrix
    x0, y0, x1, y1 = g["extent"]
    b0, c0, b1, c1 = g["answer_box"]
    assert x0 == pytest.approx(b0, abs=0.5) and x1 == pytest.approx(b1, abs=0.5)
    assert y0 == pytest.approx(c0, abs=0.5) and y1 == pytest.approx(c1, abs=0.5)
    assert g["final"][0] == g["picks"]


def test_symbol_keys_delete_and_done(acted):
    g = acted[("TypeScreen", None)]
    assert g["empty"] is None and g["typed"] == g["want"] and g["final"][0] == g["want"]
    # invented symbols cannot come from a keyboard: the help line does not say they can
    assert not any(s.isascii() for s in g["symbols"])
    assert "type" not in g["help"].lower().replace("types", "")


def test_editor_tools_and_undo(acted):
    g = acted[("EditorScreen", None)]
    start, empty, c = g["start"], g["empty"], g["colour"]
    rows, cols = g["size"]
    assert g["cleared"] == [[empty] * cols for _ in range(rows)]
    assert c not in (empty,) and g["filled"] == [[c] * cols for _ in range(rows)]
    assert g["fill_undone"] == g["cleared"]
    assert g["copied"] == start
    assert g["resized"] == [rows + 1, cols - 1, True]
    assert g["typed_size"] == [3, 4]
    assert g["undone"] == start  # three undo steps back to the copied probe
    assert g["final"][0] == start
