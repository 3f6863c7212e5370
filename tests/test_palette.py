"""Tests of the shared colour helpers and the grid palette: CIEDE2000 against published pairs,
WCAG contrast, and the palette's distinctness under simulated colour-vision deficiencies."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from twofold.study import colour as C
from twofold.study.scene import HATCHES

# reference: SOURCES.md#ciede2000-sharma — Sharma, Wu & Dalal (2005), Table 1 (from memory)
SHARMA_PAIRS = [
    ((50.0000, 2.6772, -79.7751), (50.0000, 0.0000, -82.7485), 2.0425),
    ((50.0000, 3.1571, -77.2803), (50.0000, 0.0000, -82.7485), 2.8615),
    ((50.0000, 2.8361, -74.0200), (50.0000, 0.0000, -82.7485), 3.4412),
    ((50.0000, -1.3802, -84.2814), (50.0000, 0.0000, -82.7485), 1.0000),
    ((50.0000, -1.1848, -84.8006), (50.0000, 0.0000, -82.7485), 1.0000),
    ((50.0000, -0.9009, -85.5211), (50.0000, 0.0000, -82.7485), 1.0000),
    ((50.0000, 0.0000, 0.0000), (50.0000, -1.0000, 2.0000), 2.3669),
    ((50.0000, -1.0000, 2.0000), (50.0000, 0.0000, 0.0000), 2.3669),
    ((50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0009), 7.1792),
    ((50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0010), 7.1792),
    ((50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0011), 7.2195),
    ((50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0012), 7.2195),
    ((50.0000, -0.0010, 2.4900), (50.0000, 0.0009, -2.4900), 4.8045),
    ((50.0000, -0.0010, 2.4900), (50.0000, 0.0010, -2.4900), 4.8045),
    ((50.0000, -0.0010, 2.4900), (50.0000, 0.0011, -2.4900), 4.7461),
    ((50.0000, 2.5000, 0.0000), (50.0000, 0.0000, -2.5000), 4.3065),
    ((50.0000, 2.5000, 0.0000), (73.0000, 25.0000, -18.0000), 27.1492),
    ((50.0000, 2.5000, 0.0000), (61.0000, -5.0000, 29.0000), 22.8977),
    ((50.0000, 2.5000, 0.0000), (56.0000, -27.0000, -3.0000), 31.9030),
    ((50.0000, 2.5000, 0.0000), (58.0000, 24.0000, 15.0000), 19.4535),
    ((50.0000, 2.5000, 0.0000), (50.0000, 3.1736, 0.5854), 1.0000),
    ((50.0000, 2.5000, 0.0000), (50.0000, 3.2972, 0.0000), 1.0000),
    ((50.0000, 2.5000, 0.0000), (50.0000, 1.8634, 0.5757), 1.0000),
    ((50.0000, 2.5000, 0.0000), (50.0000, 3.2592, 0.3350), 1.0000),
    ((60.2574, -34.0099, 36.2677), (60.4626, -34.1751, 39.4387), 1.2644),
    ((63.0109, -31.0961, -5.8663), (62.8187, -29.7946, -4.0864), 1.2630),
    ((61.2901, 3.7196, -5.3901), (61.4292, 2.2480, -4.9620), 1.8731),
    ((35.0831, -44.1164, 3.7933), (35.0232, -40.0716, 1.5901), 1.8645),
    ((22.7233, 20.0904, -46.6940), (23.0331, 14.9730, -42.5619), 2.0373),
    ((36.4612, 47.8580, 18.3852), (36.2715, 50.5065, 21.2231), 1.4146),
    ((90.8027, -2.0831, 1.4410), (91.1528, -1.6435, 0.0447), 1.4441),
    ((90.9257, -0.5406, -0.9208), (88.6381, -0.8985, -0.7239), 1.5381),
    ((6.7747, -0.2908, -2.4247), (5.8714, -0.0985, -2.2286), 0.6377),
    ((2.0776, 0.0795, -1.1350), (0.9033, -0.0636, -0.5514), 0.9082),
]


@pytest.mark.parametrize("lab1,lab2,expected", SHARMA_PAIRS)
def test_ciede2000_reproduces_the_published_pairs(lab1, lab2, expected):
    # reference: SOURCES.md#ciede2000-sharma — four decimals as printed (from memory)
    assert C.delta_e2000(lab1, lab2) == pytest.approx(expected, abs=5e-5)
    assert C.delta_e2000(lab2, lab1) == pytest.approx(expected, abs=5e-5)


def test_ciede2000_is_zero_for_equal_colours_and_not_cie76():
    lab = (40.0, 20.0, -30.0)
    assert C.delta_e2000(lab, lab) == 0.0
    # pair 17 of the table: CIE76 (Euclidean) gives another value, so the formula is not it
    a, b = (50.0, 2.5, 0.0), (73.0, 25.0, -18.0)
    assert abs(C.delta_e2000(a, b) - float(np.linalg.norm(np.subtract(a, b)))) > 5


@pytest.mark.parametrize("rgb", [(0.2, 0.5, 0.7), (1.0, 1.0, 1.0), (0.9, 0.1, 0.3), (0, 0, 0)])
def test_srgb_to_lab_agrees_with_colorspacious(rgb):
    from colorspacious import cspace_convert

    # reference: SOURCES.md#ciede2000-sharma — colorspacious sRGB1 -> CIELab (live)
    expected = cspace_convert(rgb, "sRGB1", "CIELab")
    assert C.srgb_to_lab(rgb) == pytest.approx(tuple(expected), abs=0.01)


def test_wcag_contrast():
    # reference: SOURCES.md#wcag-contrast — black on white is 21:1, equal colours 1:1
    # (common practice)
    assert C.contrast_ratio("#000000", "#ffffff") == pytest.approx(21.0)
    assert C.contrast_ratio("#777777", "#777777") == pytest.approx(1.0)
    assert C.relative_luminance("#ffffff") == pytest.approx(1.0)
    assert C.relative_luminance("#000000") == 0.0
    # #767676 on white is the usual example of a grey just passing 4.5:1 (common practice)
    assert 4.5 <= C.contrast_ratio("#767676", "#ffffff") < 4.6
    assert C.contrast_ratio("#ffffff", "#767676") == C.contrast_ratio("#767676", "#ffffff")


def _min_delta(kind: str | None) -> tuple[float, tuple[int, int]]:
    if kind is None:
        rgbs = [C.hex_to_rgb(c) for c in C.GRID_PALETTE]
    else:
        rgbs = [C.simulate_cvd(c, kind) for c in C.GRID_PALETTE]
    labs = [C.srgb_to_lab(v) for v in rgbs]
    return min(
        (C.delta_e2000(labs[i], labs[j]), (i, j))
        for i, j in itertools.combinations(range(len(labs)), 2)
    )


# Measured (colorspacious 1.1.2): 13.45 under normal vision and under each simulation.
FLOOR_NORMAL = 12.0
FLOOR_SIMULATED = 12.0


def test_palette_distinct_under_normal_vision():
    d, pair = _min_delta(None)
    assert d >= FLOOR_NORMAL, f"colours {pair} differ by {d:.2f}"


@pytest.mark.parametrize("kind", C.CVD_KINDS)
def test_palette_distinct_under_simulated_deficiencies(kind):
    # reference: SOURCES.md#cvd-simulation — colorspacious at severity 100 (live)
    d, pair = _min_delta(kind)
    assert d >= FLOOR_SIMULATED, f"{kind}: colours {pair} differ by {d:.2f}"


def test_a_deficiency_simulation_changes_colours():
    # the simulation is really applied: a red-green pair collapses for the red-blind
    red, green = "#d03030", "#30a030"
    normal = C.delta_e2000(C.srgb_to_lab(C.hex_to_rgb(red)), C.srgb_to_lab(C.hex_to_rgb(green)))
    prot = C.delta_e2000(
        C.srgb_to_lab(C.simulate_cvd(red, "protanomaly")),
        C.srgb_to_lab(C.simulate_cvd(green, "protanomaly")),
    )
    assert prot < normal / 2
    with pytest.raises(ValueError, match="deficiency"):
        C.simulate_cvd(red, "monochromacy")


def test_every_colour_has_a_hatch_label_and_readable_ink():
    n = len(C.GRID_PALETTE)
    assert len(set(C.GRID_PALETTE)) == n == 10
    assert len(C.GRID_HATCHES) == len(C.GRID_LABELS) == len(C.GRID_INKS) == len(C.GRID_NAMES) == n
    assert C.GRID_HATCHES[0] is None  # the empty cell
    hatches = C.GRID_HATCHES[1:]
    assert all(h in HATCHES for h in hatches) and len(set(hatches)) == n - 1
    assert len(set(C.GRID_LABELS)) == n and all(1 <= len(lb) <= 2 for lb in C.GRID_LABELS)
    assert not any(lb.isdigit() for lb in C.GRID_LABELS)
    for colour, ink in zip(C.GRID_PALETTE, C.GRID_INKS, strict=True):
        assert ink in ("#000000", "#ffffff")
        # reference: SOURCES.md#wcag-contrast — 4.5:1 for normal text (common practice)
        assert C.contrast_ratio(colour, ink) >= 4.5, colour
