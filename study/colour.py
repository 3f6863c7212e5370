"""Colour helpers shared by families and screens: the grid palette, its hatches and swatch
labels, WCAG contrast, CIELAB and the CIEDE2000 colour difference.

No drawing library is imported here. The colour-vision-deficiency simulation
(:func:`simulate_cvd`) needs ``colorspacious`` and imports it when called.

The grid palette
----------------
:data:`GRID_PALETTE` holds ten colours, index 0 the empty cell. Each non-empty colour has its
own hatch (:data:`GRID_HATCHES`, drawn over the fill so colours are told apart without hue) in
the ink (:data:`GRID_INKS`, black or white, whichever contrasts more) that also writes its
swatch label (:data:`GRID_LABELS`). The colours were chosen by a search that maximised the
smallest pairwise CIEDE2000 difference under normal vision and under simulated deuteranomaly,
protanomaly and tritanomaly (severity 100); ``tests/test_palette.py`` asserts the floors and
states the measured values.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = [
    "CVD_KINDS",
    "GRID_HATCHES",
    "GRID_INKS",
    "GRID_LABELS",
    "GRID_NAMES",
    "GRID_PALETTE",
    "contrast_ratio",
    "delta_e2000",
    "hex_to_rgb",
    "ink_for",
    "relative_luminance",
    "simulate_cvd",
    "srgb_to_lab",
]

#: index -> colour; 0 is the empty cell (light grey), 1-9 are the colours a grid is drawn in
GRID_PALETTE: tuple[str, ...] = (
    "#c3c3c3",  # 0 empty: light grey
    "#e05e00",  # 1 orange
    "#217a7a",  # 2 teal
    "#674929",  # 3 brown
    "#78ddff",  # 4 sky
    "#142b7e",  # 5 navy
    "#e9d339",  # 6 yellow
    "#e673bc",  # 7 pink
    "#934fc4",  # 8 violet
    "#ffffff",  # 9 white
)
#: index -> short name (for labels in words, logs and docs)
GRID_NAMES: tuple[str, ...] = (
    "empty",
    "orange",
    "teal",
    "brown",
    "sky",
    "navy",
    "yellow",
    "pink",
    "violet",
    "white",
)
#: index -> swatch label: a letter of our own (the empty cell's is a dot)
GRID_LABELS: tuple[str, ...] = (".", "O", "T", "B", "S", "N", "Y", "P", "V", "W")
#: index -> hatch pattern (see :data:`twofold.study.scene.HATCHES`); the empty cell has none
GRID_HATCHES: tuple[str | None, ...] = (
    None,
    "rising",
    "level",
    "crossed",
    "falling",
    "dots",
    "upright",
    "ring",
    "bar",
    "plus",
)

#: the colour-vision deficiencies the palette is checked under (colorspacious names)
CVD_KINDS: tuple[str, ...] = ("deuteranomaly", "protanomaly", "tritanomaly")


def hex_to_rgb(colour: str) -> tuple[float, float, float]:
    """``#rrggbb`` as sRGB components in [0, 1]."""
    h = colour.lstrip("#")
    if len(h) != 6:
        raise ValueError(f"colour {colour!r} is not #rrggbb")
    return (int(h[0:2], 16) / 255, int(h[2:4], 16) / 255, int(h[4:6], 16) / 255)


def _linear(c: float) -> float:
    # sRGB transfer function as WCAG 2.x states it (0.03928; common practice)
    return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4


def relative_luminance(colour: str) -> float:
    """WCAG 2.x relative luminance of ``#rrggbb`` (0 black, 1 white)."""
    r, g, b = (_linear(v) for v in hex_to_rgb(colour))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast_ratio(a: str, b: str) -> float:
    """WCAG 2.x contrast ratio of two colours, from 1 to 21."""
    la, lb = relative_luminance(a), relative_luminance(b)
    hi, lo = max(la, lb), min(la, lb)
    return (hi + 0.05) / (lo + 0.05)


def ink_for(colour: str) -> str:
    """Black or white, whichever contrasts more with ``colour`` (for labels and hatches)."""
    return (
        "#000000"
        if contrast_ratio(colour, "#000000") >= contrast_ratio(colour, "#ffffff")
        else ("#ffffff")
    )


#: index -> ink of the hatch and swatch label on that colour
GRID_INKS: tuple[str, ...] = tuple(ink_for(c) for c in GRID_PALETTE)


def srgb_to_lab(rgb: Sequence[float]) -> tuple[float, float, float]:
    """sRGB components in [0, 1] to CIELAB (D65 white, 2-degree observer)."""
    r, g, b = (((c + 0.055) / 1.055) ** 2.4 if c > 0.04045 else c / 12.92 for c in rgb)
    # sRGB to XYZ (IEC 61966-2-1 matrix), relative to the D65 white
    x = (0.4124 * r + 0.3576 * g + 0.1805 * b) / 0.95047
    y = 0.2126 * r + 0.7152 * g + 0.0722 * b
    z = (0.0193 * r + 0.1192 * g + 0.9505 * b) / 1.08883

    def f(t: float) -> float:
        return t ** (1 / 3) if t > (6 / 29) ** 3 else t / (3 * (6 / 29) ** 2) + 4 / 29

    fx, fy, fz = f(x), f(y), f(z)
    return (116 * fy - 16, 500 * (fx - fy), 200 * (fy - fz))


def delta_e2000(
    lab1: Sequence[float], lab2: Sequence[float], kl: float = 1.0, kc: float = 1.0, kh: float = 1.0
) -> float:
    """The CIEDE2000 colour difference of two CIELAB colours.

    Follows the formula as written out step by step in Sharma, Wu & Dalal (2005), "The CIEDE2000
    color-difference formula: implementation notes, supplementary test data, and mathematical
    observations", Color Research & Application 30(1), equations 1-20; their Table 1 test pairs
    check it (``tests/test_palette.py``).
    """
    l1, a1, b1 = lab1
    l2, a2, b2 = lab2
    c1, c2 = math.hypot(a1, b1), math.hypot(a2, b2)
    cbar = (c1 + c2) / 2
    g = 0.5 * (1 - math.sqrt(cbar**7 / (cbar**7 + 25.0**7)))
    a1p, a2p = (1 + g) * a1, (1 + g) * a2
    c1p, c2p = math.hypot(a1p, b1), math.hypot(a2p, b2)

    def hue(b: float, ap: float) -> float:
        if b == 0 and ap == 0:
            return 0.0
        return math.degrees(math.atan2(b, ap)) % 360

    h1p, h2p = hue(b1, a1p), hue(b2, a2p)
    dlp = l2 - l1
    dcp = c2p - c1p
    if c1p * c2p == 0:
        dhp = 0.0
    else:
        dhp = h2p - h1p
        if dhp > 180:
            dhp -= 360
        elif dhp < -180:
            dhp += 360
    dhh = 2 * math.sqrt(c1p * c2p) * math.sin(math.radians(dhp) / 2)
    lbar = (l1 + l2) / 2
    cbarp = (c1p + c2p) / 2
    if c1p * c2p == 0:
        hbarp = h1p + h2p
    elif abs(h1p - h2p) <= 180:
        hbarp = (h1p + h2p) / 2
    elif h1p + h2p < 360:
        hbarp = (h1p + h2p + 360) / 2
    else:
        hbarp = (h1p + h2p - 360) / 2
    t = (
        1
        - 0.17 * math.cos(math.radians(hbarp - 30))
        + 0.24 * math.cos(math.radians(2 * hbarp))
        + 0.32 * math.cos(math.radians(3 * hbarp + 6))
        - 0.20 * math.cos(math.radians(4 * hbarp - 63))
    )
    dtheta = 30 * math.exp(-(((hbarp - 275) / 25) ** 2))
    rc = 2 * math.sqrt(cbarp**7 / (cbarp**7 + 25.0**7))
    sl = 1 + 0.015 * (lbar - 50) ** 2 / math.sqrt(20 + (lbar - 50) ** 2)
    sc = 1 + 0.045 * cbarp
    sh = 1 + 0.015 * cbarp * t
    rt = -math.sin(math.radians(2 * dtheta)) * rc
    return math.sqrt(
        (dlp / (kl * sl)) ** 2
        + (dcp / (kc * sc)) ** 2
        + (dhh / (kh * sh)) ** 2
        + rt * (dcp / (kc * sc)) * (dhh / (kh * sh))
    )


def simulate_cvd(colour: str, kind: str, severity: float = 100.0) -> tuple[float, float, float]:
    """``colour`` as seen with colour-vision deficiency ``kind`` (one of :data:`CVD_KINDS`), as
    sRGB components clipped to [0, 1]; the simulation is colorspacious's (Machado et al. 2009
    model, which colorspacious cites)."""
    from colorspacious import cspace_convert

    if kind not in CVD_KINDS:
        raise ValueError(f"unknown deficiency {kind!r}; known: {', '.join(CVD_KINDS)}")
    space = {"name": "sRGB1+CVD", "cvd_type": kind, "severity": severity}
    out = cspace_convert(hex_to_rgb(colour), space, "sRGB1")
    return tuple(min(1.0, max(0.0, float(v))) for v in out)  # type: ignore[return-value]
