"""Figures: every function draws from tidy tables, writes SVG + 300-dpi PNG, survives greyscale."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from matplotlib.figure import Figure
from PIL import Image
from twofold.analysis import figures as F

RNG = np.random.default_rng(5)
MACHINES = ["lean", "full", "shortcut"]


def _points():
    rows = []
    for fam in ["strings", "grids"]:
        for i in range(20):
            d = RNG.normal()
            for g in MACHINES:
                rows.append(
                    {
                        "family": fam,
                        "item": f"{fam[:3]}-{i}",
                        "group": g,
                        "human_difficulty": d,
                        "machine_error": float(RNG.uniform()),
                    }
                )
    return pd.DataFrame(rows)


def _stats():
    return pd.DataFrame(
        [
            {
                "family": f,
                "group": g,
                "estimate": 0.4,
                "ci_low": 0.1,
                "ci_high": 0.6,
                "conf_level": 0.95,
            }
            for f in ["strings", "grids"]
            for g in MACHINES
        ]
    )


CASES = {
    "difficulty_profiles": lambda: F.difficulty_profiles(_points(), _stats()),
    "item_curves": lambda: F.item_curves(
        pd.DataFrame({"item": ["a", "b"], "a": [1.0, 1.5], "b": [-1.0, 0.5]}),
        pd.DataFrame({"group": MACHINES, "theta": [-0.5, 1.0, 0.2]}),
    ),
    "error_type_composition": lambda: F.error_type_composition(
        pd.DataFrame(
            [
                {"family": "strings", "group": g, "error_type": t, "n": int(RNG.integers(1, 9))}
                for g in ["human", *MACHINES]
                for t in ["literal", "no-change", "other"]
            ]
        )
    ),
    "error_consistency": lambda: F.error_consistency(
        pd.DataFrame(
            [
                {
                    "group_a": "human",
                    "group_b": "human",
                    "kind_pair": "human-human",
                    "kappa": float(RNG.normal(0.3, 0.1)),
                }
                for _ in range(30)
            ]
            + [
                {"group_a": g, "group_b": "human", "kind_pair": "human-machine", "kappa": 0.1}
                for g in MACHINES
            ]
            + [{"group_a": "full", "group_b": "lean", "kind_pair": "machine-machine", "kappa": 0.5}]
        )
    ),
    "robustness": lambda: F.robustness(
        pd.DataFrame(
            {
                "group": ["human", *MACHINES],
                "parent_accuracy": [0.8, 0.6, 0.9, 0.5],
                "variant_accuracy": [0.75, 0.4, 0.85, 0.5],
                "n_pairs": [40] * 4,
            }
        )
    ),
    "factor_effects": lambda: F.factor_effects(
        pd.DataFrame(
            [
                {"factor": f, "group": g, "estimate": 0.3, "ci_low": 0.1, "ci_high": 0.5}
                for f in ["length", "depth"]
                for g in ["human", *MACHINES]
            ]
        )
    ),
    "effort_vs_time": lambda: F.effort_vs_time(
        pd.DataFrame(
            [
                {
                    "item": f"i{i}",
                    "group": g,
                    "effort": float(RNG.uniform(1, 500)),
                    "effort_unit": "programs",
                    "human_rt_ms": float(RNG.uniform(2000, 60000)),
                }
                for i in range(15)
                for g in MACHINES
            ]
        )
    ),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_figure_draws_and_saves_svg_and_300dpi_png(name, tmp_path):
    fig = CASES[name]()
    assert isinstance(fig, Figure)
    assert fig._suptitle is not None or fig._supxlabel is not None  # the caption line
    svg, png = F.save_figure(fig, tmp_path / name)
    assert svg.read_text("utf-8").lstrip().startswith("<?xml")
    with Image.open(png) as im:
        dpi = im.info.get("dpi", (0, 0))
        assert round(dpi[0]) == 300
        w, h = im.size
        assert abs(w / 300 - fig.get_figwidth()) < 0.05


def test_figure_functions_are_all_covered():
    public = {n for n in F.__all__ if callable(getattr(F, n))} - {"group_style", "save_figure"}
    assert public == set(CASES)


def test_groups_differ_by_marker_and_line_style_not_colour_alone():
    styles = [F.group_style(g, MACHINES) for g in ["human", *MACHINES]]
    assert len({s["marker"] for s in styles}) == len(styles)
    assert len({str(s["linestyle"]) for s in styles}) == len(styles)


def test_axes_variants_draw_into_a_given_axes():
    fig = Figure()
    ax = fig.subplots()
    out = F.robustness(
        pd.DataFrame({"group": ["human"], "parent_accuracy": [0.8], "variant_accuracy": [0.7]}),
        ax=ax,
    )
    assert out is ax and len(ax.lines) == 3
