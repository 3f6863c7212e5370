"""The scene model: geometry helpers, layout checks, and the picture painter's read-back."""

from __future__ import annotations

import math

import pytest
from matplotlib.figure import Figure
from twofold.study.render import paint_scene
from twofold.study.scene import (
    MIN_TEXT,
    Grid,
    Line,
    Scene,
    Shape,
    Slot,
    Text,
    circle,
    dash,
    hatch_segments,
    polygon,
    rect,
    scene_problems,
    text_width,
    wrap,
)


def _length(points: tuple[tuple[float, float], ...]) -> float:
    return sum(math.dist(points[k], points[k + 1]) for k in range(0, len(points) - 1, 2))


@pytest.mark.parametrize(("on", "off"), [(6.0, 3.0), (2.5, 1.5), (10.0, 10.0)])
def test_dashes_cover_their_share_of_the_outline(on: float, off: float) -> None:
    square = rect(0, 0, 100, 100)  # perimeter 400
    pairs = dash(square, on, off)
    assert len(pairs) % 2 == 0
    share = _length(pairs) / 400
    assert share == pytest.approx(on / (on + off), abs=on / 400 + 1e-9)
    # every dash lies on the outline and is at most `on` long
    for k in range(0, len(pairs), 2):
        assert math.dist(pairs[k], pairs[k + 1]) <= on + 1e-6
        for x, y in pairs[k : k + 2]:
            assert min(abs(x), abs(x - 100), abs(y), abs(y - 100)) < 1e-6


def test_dashes_carry_over_corners() -> None:
    # a dash that starts 2 units before a corner continues 4 units after it
    pairs = dash(((0, 0), (8, 0), (8, 8)), 6.0, 0.0001, closed=False)
    assert _length(pairs) == pytest.approx(16.0, abs=1e-3)


@pytest.mark.parametrize(
    "pattern", ["rising", "falling", "level", "upright", "crossed", "dots", "ring", "bar"]
)
def test_hatches_stay_inside_their_cell(pattern: str) -> None:
    segs = hatch_segments(pattern, 10, 20, 30)
    assert segs and len(segs) % 2 == 0
    for x, y in segs:
        assert 10 + 0.1 * 30 <= x <= 40 - 0.1 * 30
        assert 20 + 0.1 * 30 <= y <= 50 - 0.1 * 30


def test_hatch_patterns_differ() -> None:
    names = ["rising", "falling", "level", "upright", "crossed", "dots", "ring", "bar"]
    shapes = {hatch_segments(n, 0, 0, 1) for n in names}
    assert len(shapes) == len(names)
    with pytest.raises(ValueError, match="unknown hatch pattern"):
        hatch_segments("zigzag", 0, 0, 1)


def test_polygon_turns_anticlockwise_and_circle_has_radius() -> None:
    (x, y), *_ = polygon([(1.0, 0.0)], 5, 5, 2, rotation=90)
    assert (x, y) == pytest.approx((5, 7))
    pts = circle(3, 4, 10, n=36)
    assert len(pts) == 36
    assert all(math.dist(p, (3, 4)) == pytest.approx(10, abs=1e-3) for p in pts)


def test_wrap_respects_the_width() -> None:
    text = "word " * 80 + "\n\nsecond paragraph " * 3
    out = wrap(text, 20, 400)
    for line in out.split("\n"):
        assert text_width(line, 20) <= 400 + 1e-9
    assert "\n\n" in out  # the paragraph break is kept


def test_scene_problems_names_each_fault() -> None:
    ok = Scene(
        200,
        100,
        (
            Shape(rect(10, 10, 40, 40), fill="#808080"),
            Text(150, 50, "ok", 20),
            Grid(60, 90, ((0, 1), (1, 0)), 14, ("#ffffff", "#000000")),
        ),
        slots=(Slot("choice:1", 25, 25, 30, 30),),
    )
    assert scene_problems(ok) == []
    bad = Scene(
        200,
        100,
        (
            Shape(rect(180, 10, 240, 40)),  # leaves on the right
            Text(100, 50, "tiny", MIN_TEXT - 4),
            Text(100, 52, "on top", 20),
            Grid(10, 90, ((0,),), 8, ("#ffffff",)),
            Shape(rect(10, 10, 15, 15), role="object"),
        ),
        slots=(Slot("choice:1", 195, 50, 30, 30),),
    )
    got = "\n".join(scene_problems(bad, min_object=18))
    assert "leaves the scene" in got
    assert "'tiny' is" in got
    assert "overlap" in got
    assert "grid cells are 8.0" in got
    assert "an object is 5.0 across" in got
    assert "slot choice:1 leaves" in got


def test_picture_painter_draws_exactly_the_scene() -> None:
    # the records are read back from matplotlib's artists, in scene units
    sq = polygon([(-1, -1), (1, -1), (1, 1), (-1, 1)], 50, 50, 20, rotation=30)
    scene = Scene(
        300,
        150,
        (
            Shape(sq, fill="#336699", edge="#111111", edge_width=2),
            Line(dash(rect(100, 20, 160, 80), 5, 3), "#222222", 1.5, segments=True),
            Text(220, 75, "set A", 24, colour="#aa3300", bold=True),
            Grid(
                230,
                60,
                ((0, 1), (2, 0)),
                20,
                ("#ffffff", "#ff0000", "#00ff00"),
                hatches=(None, "rising", "ring"),
            ),
        ),
    )
    fig = Figure(figsize=(6, 3), dpi=100)
    drawn = paint_scene(scene, fig)
    shapes = [d for d in drawn if d["kind"] == "shape"]
    lines = [d for d in drawn if d["kind"] == "line"]
    texts = [d for d in drawn if d["kind"] == "text"]
    assert len(shapes) == 1 + 4  # the square and four grid cells
    assert shapes[0]["points"] == pytest.approx(list(sq))
    assert shapes[0]["fill"] == "#336699" and shapes[0]["edge"] == "#111111"
    assert [s["fill"] for s in shapes[1:]] == ["#ffffff", "#ff0000", "#00ff00", "#ffffff"]
    assert len(lines) == 1 + 2  # the dashes and the hatches of two cells
    assert lines[0]["points"] == pytest.approx(list(scene.elements[1].points))
    assert texts == [
        {
            "kind": "text",
            "text": "set A",
            "xy": (220.0, 75.0),
            "size": pytest.approx(24),
            "colour": "#aa3300",
        }
    ]
    # the text really is 24 units high: its glyph box, in pixels, over the scale (2 px/unit)
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    t = fig.axes[0].texts[0]
    h_px = t.get_window_extent(renderer=canvas.get_renderer()).height
    assert 24 * 2 * 0.9 <= h_px <= 24 * 2 * 1.5


def test_a_family_without_a_scene_is_drawn_from_its_text(monkeypatch: pytest.MonkeyPatch) -> None:
    import io

    import numpy as np
    from _toyfamily import use_toy
    from PIL import Image
    from twofold.study.render import render_picture

    fam = use_toy(monkeypatch)
    item = fam.generate(
        {"high": 20},
        np.random.default_rng(3),
        seed=3,
        modes=("generate",),
        distractor_scheme=None,
        n_choices=4,
    )
    png = render_picture(item, item.modes[0])
    w, h = Image.open(io.BytesIO(png)).size
    scene = fam.scene(item, item.modes[0])
    assert max(w, h) == 800
    assert w / h == pytest.approx(scene.width / scene.height, rel=0.01)
    texts = [e for e in scene.elements if isinstance(e, Text)]
    assert fam.render_text(item, "generate").split()[0] in texts[0].text
    assert scene.response is not None and scene.response.kind == "type"
