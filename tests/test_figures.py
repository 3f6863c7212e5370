"""Figures: each part's figure draws from the part's real tables; text >= 9 pt; SVG, PDF, PNG."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from _simdata import make_study, tally_registered
from matplotlib.figure import Figure
from matplotlib.text import Text
from PIL import Image
from twofold.analysis import _parts
from twofold.analysis import figures as F
from twofold.analysis.run import analyze_study

MACHINES = ["lean", "full", "shortcut"]
WITH_FIGURE = [p.name for p in _parts.PARTS if p.figure is not None]


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    """Every part's real output on a small simulated study."""
    with tally_registered():
        root = tmp_path_factory.mktemp("figs")
        toy = make_study(root, n_parents=8, n_humans=8)
        return analyze_study(toy, n_boot=50)


def _texts(fig: Figure) -> list[Text]:
    return [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip()]


@pytest.mark.parametrize("name", WITH_FIGURE)
def test_each_part_figure_takes_its_tables_unchanged(run, name, tmp_path):
    part = _parts.part(name)
    assert run.summary["parts"][name]["status"] == "ok", run.summary["parts"][name]
    tables = {t: run.tables[t] for t in part.tables if t in run.tables}
    before = {k: v.copy() for k, v in tables.items()}
    fig = part.figure(tables)
    assert isinstance(fig, Figure)
    for k, v in tables.items():  # the figure did not change its input
        pd.testing.assert_frame_equal(v, before[k])
    assert fig._supxlabel is not None and fig._supxlabel.get_text()  # the caption line
    fig.canvas.draw()  # lay out, as saving does
    small = [(t.get_text()[:30], t.get_fontsize()) for t in _texts(fig)]
    assert all(size >= F.MIN_FONT_PT for _, size in small), small
    assert fig.get_figwidth() <= F.MAX_WIDTH_IN
    svg, pdf, png = F.save_figure(fig, tmp_path / name)
    assert svg.read_text("utf-8").lstrip().startswith("<?xml")
    assert pdf.read_bytes()[:5] == b"%PDF-"
    with Image.open(png) as im:
        assert round(im.info.get("dpi", (0, 0))[0]) == 300
        assert abs(im.size[0] / 300 - fig.get_figwidth()) < 0.05


def test_every_figure_function_belongs_to_a_part_or_the_verdict():
    public = {n for n in F.__all__ if callable(getattr(F, n)) and n.islower()}
    helpers = {"group_style", "save_figure", "usable_items", "verdict_summary"}
    drawn = {"difficulty_profiles", "item_curves", "error_type_composition", "error_consistency",
             "robustness", "factor_effects", "effort_vs_time"}  # fmt: skip
    assert public - helpers == drawn
    assert len(WITH_FIGURE) == len(drawn)


def test_verdict_summary_draws_the_verdict_table(run):
    fig = F.verdict_summary(run.tables["verdict"])
    assert isinstance(fig, Figure)
    titles = {ax.get_title() for ax in fig.axes}
    assert "same hard items" in titles


def test_legends_sit_outside_every_panel(run):
    fig = _parts.part("agreement").figure(run.tables)
    fig.canvas.draw()
    legends = fig.legends
    assert legends, "one figure-level legend"
    box = legends[0].get_window_extent()
    for ax in fig.axes:
        assert not box.overlaps(ax.get_window_extent())


def test_items_not_identified_are_left_out_of_the_curves_and_named():
    items = pd.DataFrame(
        {"item": ["ok1", "ok2", "wild"], "a": [1.0, 1.2, 119.0], "b": [-0.5, 0.4, 23.6],
         "b_se": [0.3, 0.4, 149.0]}
    )  # fmt: skip
    assert F.usable_items(items).tolist() == [True, True, False]
    fit = pd.DataFrame({"model": ["1pl"], "converged": [True]})
    fig = F.item_curves(items, fit=fit)
    labels = [ln.get_label() for ln in fig.axes[0].lines]
    assert not any(lab.startswith("wild") for lab in labels)
    caption = fig._supxlabel.get_text()
    assert caption.startswith("1PL") and "not identified" in caption and "evenly spaced" in caption
    stalled = F.item_curves(items, fit=pd.DataFrame({"model": ["2pl"], "converged": [False]}))
    assert len(stalled.axes[0].lines) == 0 and "did not converge" in stalled._supxlabel.get_text()


def test_undefined_correlation_is_named_not_drawn_as_a_number():
    diff = pd.DataFrame({"item": list("abcd"), "family": "f", "difficulty": [0.0, 1, 2, 3]})
    err = pd.DataFrame({"group": "m", "item": list("abcd"), "family": "f", "error_rate": 0.0})
    agr = pd.DataFrame(
        [{"group": "m", "family": "f", "statistic": "spearman", "interval": "bca",
          "estimate": np.nan, "ci_low": np.nan, "ci_high": np.nan}]
    )  # fmt: skip
    fig = F.difficulty_profiles(diff, err, agr)
    title = fig.axes[0].get_title(loc="left")
    assert "undefined" in title and "nan" not in title


def test_groups_differ_by_marker_and_line_style_not_colour_alone():
    styles = [F.group_style(g, MACHINES) for g in ["human", *MACHINES]]
    assert len({s["marker"] for s in styles}) == len(styles)
    assert len({str(s["linestyle"]) for s in styles}) == len(styles)


def test_axes_variants_draw_into_a_given_axes():
    fig = Figure()
    ax = fig.subplots()
    out = F.robustness(
        pd.DataFrame({"group": ["human"], "acc_parent": [0.8], "acc_isomorph": [0.7]}), ax=ax
    )
    assert out is ax and len(ax.lines) == 3
