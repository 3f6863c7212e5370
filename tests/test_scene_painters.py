"""The two painters of a scene agree: matplotlib (pictures) and PsychoPy (participant screens).

For generated items of every family and mode, and for the default text scene (the toy family),
the records each painter reads back from what it drew (kinds, counts, colours, texts, points,
text sizes, all in scene units) must match: a person and a picture-reading machine see the same
stimulus. The PsychoPy side runs in a subprocess under Xvfb (see ``_display.screen_job``).
"""

from __future__ import annotations

import math

import pytest
from _display import screen_job, x_display  # noqa: F401 - a fixture
from _toyfamily import use_toy
from matplotlib.figure import Figure
from twofold.study import generate_bank, get_family, parse_spec
from twofold.study.families import known_families
from twofold.study.render import paint_scene

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")

SPECS = [
    {"seed": 5, "families": {f: {"n": 2, "modes": ["select", "generate"]}}}
    for f in ("strings", "matrices", "contrast", "grids")
]
TOY = {"seed": 3, "families": {"toy": {"n": 2, "modes": ["generate", "select"]}}}


def _close(a: tuple[float, ...] | list[float], b: tuple[float, ...] | list[float]) -> bool:
    return all(abs(x - y) <= 0.5 for x, y in zip(a, b, strict=True))


def compare(ref: list[dict], got: list[dict]) -> list[str]:
    """Differences between two painters' records (empty when they agree)."""
    out = []
    if [r["kind"] for r in ref] != [g["kind"] for g in got]:
        return [f"kinds differ: {len(ref)} vs {len(got)} records"]
    for k, (r, g) in enumerate(zip(ref, got, strict=True)):
        for key in ("fill", "edge", "colour", "text"):
            if r.get(key) != g.get(key):
                out.append(f"record {k} ({r['kind']}): {key} {r.get(key)!r} vs {g.get(key)!r}")
        if "points" in r:
            if len(r["points"]) != len(g["points"]):
                out.append(f"record {k}: {len(r['points'])} vs {len(g['points'])} points")
            elif not all(_close(p, q) for p, q in zip(r["points"], g["points"], strict=True)):
                out.append(f"record {k}: points differ by more than 0.5 units")
        if "xy" in r:
            if not _close(r["xy"], g["xy"]):
                out.append(f"record {k}: text at {r['xy']} vs {g['xy']}")
            if not math.isclose(r["size"], g["size"], rel_tol=0.02):
                out.append(f"record {k}: text size {r['size']} vs {g['size']}")
    return out


def matplotlib_records(item, mode) -> list[dict]:
    fig = Figure(figsize=(9.6, 5.6), dpi=100)
    return paint_scene(get_family(item.family).scene(item, mode), fig)


def test_compare_sees_a_difference():
    """The comparison can fail: a moved point, a changed colour, a missing record."""
    item = generate_bank(parse_spec(SPECS[3])).items[0]
    ref = matplotlib_records(item, "select")
    moved = [dict(r) for r in ref]
    k = next(j for j, r in enumerate(moved) if r["kind"] == "shape")
    moved[k]["points"] = [(x + 0.8, y) for x, y in moved[k]["points"]]
    assert compare(ref, moved) and compare(ref, ref) == []
    recoloured = [dict(r) for r in ref]
    recoloured[k]["fill"] = "#000001"
    assert compare(ref, recoloured)
    assert compare(ref, ref[:-1])


def test_every_family_and_the_default_scene_paint_the_same_on_screen(
    x_display,  # noqa: F811 - the fixture
    tmp_path,
    monkeypatch,
):
    use_toy(monkeypatch)
    assert {"strings", "matrices", "contrast", "grids"} <= set(known_families())
    items = [it for spec in [*SPECS, TOY] for it in generate_bank(parse_spec(spec)).items]
    got = screen_job(x_display, tmp_path, {"task": "records", "specs": [*SPECS, TOY], "toy": True})
    assert len(got) == sum(len(it.modes) for it in items)
    by_id = {it.id: it for it in items}
    kinds = set()
    problems = []
    for rec in got:
        item = by_id[rec["item"]]
        ref = matplotlib_records(item, rec["mode"])
        assert ref, f"{item.id} drew nothing"
        kinds |= {r["kind"] for r in ref}
        for p in compare(ref, rec["records"]):
            problems.append(f"{item.id} {rec['mode']}: {p}")
    assert problems == []
    assert kinds == {"shape", "line", "text"}  # every primitive kind was compared
