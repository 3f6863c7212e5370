"""Comparison figures: people and machines side by side, legible in colour and in greyscale.

Every function takes tidy tables (columns listed in its docstring), returns a matplotlib Figure
(or the Axes it drew on when ``ax`` is given), never calls ``plt.show()``, and puts a one-line
caption stating the method and N under the plot. :func:`save_figure` writes SVG and 300-dpi PNG.

Humans are always drawn in near-black with filled circles and solid lines; each machine group
gets its own colour *and* marker *and* line style, so figures survive greyscale printing.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

__all__ = [
    "PALETTE",
    "difficulty_profiles",
    "effort_vs_time",
    "error_consistency",
    "error_type_composition",
    "factor_effects",
    "group_style",
    "item_curves",
    "robustness",
    "save_figure",
]

#: Our palette: chosen for separation under the common colour-vision deficiencies (blue/orange
#: contrast first, then purple and bluish green), with near-black for people.
PALETTE = ("#0a5c8c", "#d9822b", "#7b4f9e", "#2a9d7c", "#b8475a", "#6b7a1f")
_MARKERS = ("s", "^", "D", "v", "P", "X")
_LINES = ("--", ":", "-.", (0, (5, 1, 1, 1)), (0, (3, 2)), (0, (1, 1)))
_HATCHES = ("", "//", "..", "xx", "\\\\", "oo", "--", "++")
HUMAN = "human"
#: human difficulties beyond this (logits) are drawn at the panel edge
DIFFICULTY_CLIP = 6.0


def group_style(group: str, machines: Sequence[str]) -> dict[str, Any]:
    """Colour, marker and line style of a respondent group (``"human"`` or a machine name)."""
    if group == HUMAN:
        return {"color": "#1b1b1b", "marker": "o", "linestyle": "-"}
    k = list(machines).index(group) % len(PALETTE) if group in machines else 0
    return {"color": PALETTE[k], "marker": _MARKERS[k], "linestyle": _LINES[k]}


def _machines(groups: Any) -> list[str]:
    return sorted({str(g) for g in groups if str(g) != HUMAN})


def _new(nrows: int = 1, ncols: int = 1, *, width: float = 6.4, height: float = 4.2) -> Figure:
    fig = Figure(figsize=(width, height), layout="constrained")
    fig.subplots(nrows, ncols, squeeze=False)
    return fig


def _caption(fig: Figure, text: str) -> None:
    fig.supxlabel(text, fontsize=8, color="#444444", style="italic")


def _target(
    ax: Axes | None, *, width: float = 6.4, height: float = 4.2
) -> tuple[Figure | None, Axes]:
    """A new figure and its axes when ``ax`` is None, else no figure and the given axes."""
    if ax is not None:
        return None, ax
    fig = _new(width=width, height=height)
    return fig, fig.axes[0]


def _finish(fig: Figure | None, ax: Axes, caption: str) -> Figure | Axes:
    """Caption and return the new figure, or return the caller's axes untouched."""
    if fig is None:
        return ax
    _caption(fig, caption)
    return fig


def save_figure(fig: Figure, stem: str | Path) -> tuple[Path, Path]:
    """Write ``fig`` as ``<stem>.svg`` and ``<stem>.png`` (300 dpi); return both paths."""
    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    svg, png = stem.with_suffix(".svg"), stem.with_suffix(".png")
    fig.savefig(svg, format="svg", metadata={"Date": None})
    fig.savefig(png, format="png", dpi=300, metadata={"Software": None})
    return svg, png


def _facet_grid(n: int, *, per_row: int = 2, size: float = 3.4) -> tuple[Figure, list[Axes]]:
    ncols = min(per_row, max(n, 1))
    nrows = math.ceil(max(n, 1) / ncols)
    fig = Figure(figsize=(size * ncols + 0.6, size * nrows + 0.5), layout="constrained")
    axes = fig.subplots(nrows, ncols, squeeze=False).ravel().tolist()
    for ax in axes[n:]:
        ax.set_visible(False)
    return fig, axes[:n]


def difficulty_profiles(points: pd.DataFrame, stats: pd.DataFrame | None = None) -> Figure:
    """Human item difficulty (x) against each machine's item error rate (y), one panel per family.

    Parameters
    ----------
    points : DataFrame
        Columns ``family``, ``item``, ``group`` (machine name), ``human_difficulty`` (logit or IRT
        b), ``machine_error`` (error rate over the machine's seeds, 0–1).
    stats : DataFrame, optional
        Columns ``family``, ``group``, ``estimate`` (Spearman rho), ``ci_low``, ``ci_high``,
        ``conf_level``; shown in each panel.
    """
    fams = sorted(points["family"].unique())
    machines = _machines(points["group"].unique())
    points = points.copy()
    # extreme IRT difficulties (items nearly everyone got right or wrong) would squash the axis
    clipped = int((points["human_difficulty"].abs() > DIFFICULTY_CLIP).sum())
    points["human_difficulty"] = points["human_difficulty"].clip(-DIFFICULTY_CLIP, DIFFICULTY_CLIP)
    fig, axes = _facet_grid(len(fams))
    for ax, fam in zip(axes, fams, strict=True):
        sub = points[points["family"] == fam]
        lines = []
        for g in machines:
            d = sub[sub["group"] == g].sort_values("human_difficulty")
            if d.empty:
                continue
            st = group_style(g, machines)
            jitter = (np.arange(len(d)) % 5 - 2) * 0.006
            ax.scatter(
                d["human_difficulty"],
                d["machine_error"] + jitter,
                s=18,
                alpha=0.75,
                color=st["color"],
                marker=st["marker"],
                label=g,
                edgecolors="none",
            )
            if stats is not None:
                row = stats[(stats["family"] == fam) & (stats["group"] == g)]
                if not row.empty:
                    r = row.iloc[0]
                    lines.append(
                        f"{g}: ρ = {r['estimate']:.2f} [{r['ci_low']:.2f}, {r['ci_high']:.2f}]"
                    )
        ax.set_title(fam, fontsize=10)
        ax.set_xlabel("human item difficulty (logit)")
        ax.set_ylabel("machine error rate (proportion)")
        ax.set_ylim(-0.05, 1.05)
        if lines:
            ax.text(
                0.02,
                0.98,
                "\n".join(lines),
                transform=ax.transAxes,
                va="top",
                fontsize=7,
                bbox={"facecolor": "white", "alpha": 0.8, "edgecolor": "#cccccc"},
            )
    if axes:
        axes[0].legend(fontsize=7, loc="lower right", frameon=False)
    n_items = points["item"].nunique()
    note = f"; {clipped} point(s) beyond ±{DIFFICULTY_CLIP:g} drawn at the edge" if clipped else ""
    _caption(
        fig,
        f"Spearman rank correlation with bootstrap CI over items; {n_items} items, "
        f"{len(machines)} machine groups{note}.",
    )
    return fig


def item_curves(
    items: pd.DataFrame,
    machines: pd.DataFrame | None = None,
    *,
    ax: Axes | None = None,
    theta: tuple[float, float] = (-4.0, 4.0),
) -> Figure | Axes:
    """2PL item response curves for chosen items, with machine respondents at their ability.

    Parameters
    ----------
    items : DataFrame
        Columns ``item``, ``a``, ``b`` (one row per item to draw, at most ~8 for legibility).
    machines : DataFrame, optional
        Columns ``group`` and ``theta`` (ability on the human scale); drawn as marked verticals.
    """
    fig, ax = _target(ax)
    grid = np.linspace(*theta, 200)
    for k, row in enumerate(items.itertuples(index=False)):
        p = 1 / (1 + np.exp(-row.a * (grid - row.b)))
        ax.plot(
            grid,
            p,
            color="#555555",
            linestyle=_LINES[k % len(_LINES)] if k else "-",
            linewidth=1.2,
            label=f"{row.item} (a={row.a:.2f}, b={row.b:.2f})",
        )
    if machines is not None and not machines.empty:
        names = _machines(machines["group"].unique())
        for row in machines.itertuples(index=False):
            st = group_style(str(row.group), names)
            ax.axvline(row.theta, color=st["color"], linestyle=st["linestyle"], linewidth=1.4)
            ax.plot(
                [row.theta],
                [1.03],
                marker=st["marker"],
                color=st["color"],
                clip_on=False,
                label=f"{row.group} θ = {row.theta:.2f}",
            )
    ax.set_xlabel("ability θ (human scale, logits)")
    ax.set_ylabel("probability correct")
    ax.set_ylim(0, 1.06)
    ax.legend(fontsize=6.5, frameon=False, loc="lower right")
    return _finish(
        fig,
        ax,
        f"2PL item response curves from the human calibration; {len(items)} items; "
        "machines placed at their ability estimate.",
    )


def error_type_composition(counts: pd.DataFrame) -> Figure:
    """Share of each error type among wrong answers: humans vs each machine, per family.

    Parameters
    ----------
    counts : DataFrame
        Columns ``family``, ``group``, ``error_type``, ``n`` (count of wrong answers).
    """
    fams = sorted(counts["family"].unique())
    fig, axes = _facet_grid(len(fams), size=3.6)
    for ax, fam in zip(axes, fams, strict=True):
        sub = counts[counts["family"] == fam]
        groups = (
            [HUMAN] + _machines(sub["group"].unique())
            if (sub["group"] == HUMAN).any()
            else _machines(sub["group"].unique())
        )
        types = sorted(sub["error_type"].unique())
        table = sub.pivot_table(
            index="group", columns="error_type", values="n", aggfunc="sum", fill_value=0
        ).reindex(index=groups, columns=types, fill_value=0)
        share = table.div(table.sum(axis=1).replace(0, np.nan), axis=0).fillna(0)
        bottom = np.zeros(len(groups))
        for k, t in enumerate(types):
            ax.bar(
                range(len(groups)),
                share[t].to_numpy(),
                bottom=bottom,
                color=PALETTE[k % len(PALETTE)],
                hatch=_HATCHES[k % len(_HATCHES)],
                edgecolor="white",
                linewidth=0.5,
                label=t,
            )
            bottom += share[t].to_numpy()
        ax.set_xticks(
            range(len(groups)), [f"{g}\n(n={int(table.loc[g].sum())})" for g in groups], fontsize=7
        )
        ax.set_ylabel("share of wrong answers")
        ax.set_title(fam, fontsize=10)
        ax.legend(fontsize=6, frameon=False, loc="upper left", bbox_to_anchor=(1, 1))
    _caption(
        fig,
        f"Error types assigned by each family's classifier; {int(counts['n'].sum())} "
        "wrong answers.",
    )
    return fig


def error_consistency(pairs: pd.DataFrame, *, summary: pd.DataFrame | None = None) -> Figure:
    """Pairwise error consistency: machine–machine and machine–human matrix, human ceiling beside.

    Parameters
    ----------
    pairs : DataFrame
        Columns ``group_a``, ``group_b``, ``kind_pair`` (``human-human``, ``human-machine``,
        ``machine-machine``), ``kappa`` (Cohen's kappa on correct/incorrect; NaN when undefined).
        Human rows use ``group = "human"`` with one row per pair of people.
    summary : DataFrame, optional
        Per group pair ``group_a, group_b, pair_type, n_pairs, mean, median, q_low, q_high``
        (``error_consistency_distribution``); used for group pairs without rows in ``pairs``
        (the human-human pairs, which are summarised rather than listed by default): the
        ceiling is then drawn as its median and central quantile band.
    """
    fig = Figure(figsize=(8.2, 3.8), layout="constrained")
    ax_m, ax_h = fig.subplots(1, 2, width_ratios=[1.3, 1])
    machines = _machines(pd.concat([pairs["group_a"], pairs["group_b"]]).unique())
    labels = [HUMAN] + machines
    mat = np.full((len(labels), len(labels)), np.nan)
    for (a, b), d in pairs.groupby(["group_a", "group_b"]):
        if a in labels and b in labels:
            v = float(np.nanmean(d["kappa"])) if d["kappa"].notna().any() else np.nan
            i, j = labels.index(a), labels.index(b)
            mat[i, j] = mat[j, i] = v
    listed = set(zip(pairs["group_a"], pairs["group_b"], strict=True))
    hh_summary = None
    for r in (summary if summary is not None else pd.DataFrame()).itertuples(index=False):
        if (r.group_a, r.group_b) in listed or r.group_a not in labels or r.group_b not in labels:
            continue
        i, j = labels.index(r.group_a), labels.index(r.group_b)
        mat[i, j] = mat[j, i] = r.mean
        if r.pair_type == "human-human":
            hh_summary = r
    im = ax_m.imshow(mat, vmin=-0.2, vmax=1, cmap="cividis")
    ax_m.set_xticks(range(len(labels)), labels, rotation=30, ha="right", fontsize=8)
    ax_m.set_yticks(range(len(labels)), labels, fontsize=8)
    for i in range(len(labels)):
        for j in range(len(labels)):
            if not np.isnan(mat[i, j]):
                ax_m.text(
                    j,
                    i,
                    f"{mat[i, j]:.2f}",
                    ha="center",
                    va="center",
                    fontsize=7,
                    color="white" if mat[i, j] < 0.5 else "black",
                )
    fig.colorbar(im, ax=ax_m, label="error consistency κ (mean over pairs)")
    hh = pairs.loc[pairs["kind_pair"] == "human-human", "kappa"].dropna()
    hm = pairs.loc[pairs["kind_pair"] == "human-machine"]
    if len(hh):
        ax_h.hist(hh, bins=20, color="#bbbbbb", edgecolor="#555555", label="human–human pairs")
        ax_h.axvline(hh.median(), color="#1b1b1b", linestyle="-", label="human median (ceiling)")
    elif hh_summary is not None and np.isfinite(hh_summary.median):
        ax_h.axvspan(
            hh_summary.q_low,
            hh_summary.q_high,
            color="#bbbbbb",
            alpha=0.6,
            label=f"human–human central {hh_summary.conf_level:.0%}",
        )
        ax_h.axvline(
            hh_summary.median, color="#1b1b1b", linestyle="-", label="human median (ceiling)"
        )
    for g in machines:
        d = hm[(hm["group_a"] == g) | (hm["group_b"] == g)]["kappa"].dropna()
        if len(d):
            st = group_style(g, machines)
            ax_h.axvline(
                d.mean(),
                color=st["color"],
                linestyle=st["linestyle"],
                linewidth=1.6,
                label=f"{g}–human mean",
            )
    ax_h.set_xlabel("error consistency κ")
    ax_h.set_ylabel("number of pairs")
    ax_h.legend(fontsize=6.5, frameon=False)
    _caption(
        fig,
        f"Trial-level error consistency (Cohen's κ on correct/incorrect, Geirhos et al. "
        f"2020) on shared items; "
        f"{len(hh) if hh_summary is None else hh_summary.n_pairs} human–human pairs.",
    )
    return fig


def robustness(table: pd.DataFrame, *, ax: Axes | None = None) -> Figure | Axes:
    """Accuracy on parents vs isomorphs per respondent group (a dumbbell per group).

    Parameters
    ----------
    table : DataFrame
        Columns ``group``, ``parent_accuracy``, ``variant_accuracy`` and optionally ``n_pairs``.
    """
    fig, ax = _target(ax, width=5.6, height=0.6 + 0.45 * max(len(table), 2))
    machines = _machines(table["group"])
    order = [g for g in [HUMAN, *machines] if g in set(table["group"])]
    for y, g in enumerate(order):
        row = table[table["group"] == g].iloc[0]
        st = group_style(g, machines)
        ax.plot(
            [row["parent_accuracy"], row["variant_accuracy"]],
            [y, y],
            color=st["color"],
            linestyle=st["linestyle"],
            linewidth=1.5,
        )
        ax.plot(
            row["parent_accuracy"],
            y,
            marker=st["marker"],
            color=st["color"],
            markerfacecolor="white",
            markersize=8,
        )
        ax.plot(row["variant_accuracy"], y, marker=st["marker"], color=st["color"], markersize=8)
    ax.set_yticks(range(len(order)), order)
    ax.set_xlim(-0.02, 1.02)
    ax.set_xlabel("accuracy (proportion correct): open = parents, filled = isomorphs")
    ax.invert_yaxis()
    n = int(table["n_pairs"].max()) if "n_pairs" in table else 0
    return _finish(
        fig, ax, f"Accuracy on parent items and their isomorphs; {n} parent–isomorph pairs."
    )


def factor_effects(table: pd.DataFrame) -> Figure:
    """Difficulty-factor effects with intervals, humans and each machine side by side.

    Parameters
    ----------
    table : DataFrame
        Columns ``factor``, ``group``, ``estimate`` (log-odds of an error per unit of the factor),
        ``ci_low``, ``ci_high``, and optionally ``family`` (one panel per family).
    """
    fams = sorted(table["family"].unique()) if "family" in table else [None]
    machines = _machines(table["group"].unique())
    groups = [g for g in [HUMAN, *machines] if g in set(table["group"])]
    per = [table[table["family"] == f] if f is not None else table for f in fams]
    tallest = max(d["factor"].nunique() for d in per)
    ncols = min(2, len(fams))
    nrows = math.ceil(len(fams) / ncols)
    fig = Figure(
        figsize=(5.2 * ncols + 0.4, nrows * (0.8 + 0.2 * tallest * len(groups) ** 0.5)),
        layout="constrained",
    )
    axes = fig.subplots(nrows, ncols, squeeze=False).ravel().tolist()
    for ax in axes[len(fams) :]:
        ax.set_visible(False)
    step = 0.8 / max(len(groups), 1)
    for ax, fam, sub in zip(axes, fams, per, strict=False):
        factors = list(dict.fromkeys(sub["factor"]))
        for k, g in enumerate(groups):
            st = group_style(g, machines)
            d = sub[sub["group"] == g].set_index("factor").reindex(factors)
            y = np.arange(len(factors)) + (k - (len(groups) - 1) / 2) * step
            ok = d["estimate"].notna().to_numpy()
            ax.errorbar(
                d["estimate"][ok],
                y[ok],
                xerr=[(d["estimate"] - d["ci_low"])[ok], (d["ci_high"] - d["estimate"])[ok]],
                fmt=st["marker"],
                color=st["color"],
                linestyle="none",
                capsize=2,
                markersize=4,
                label=g,
            )
        ax.axvline(0, color="#888888", linewidth=0.8)
        ax.set_yticks(range(len(factors)), factors, fontsize=6.5)
        ax.invert_yaxis()
        if fam is not None:
            ax.set_title(fam, fontsize=10)
        ax.set_xlabel("Δ log-odds of an error (per unit, or vs first level)", fontsize=8)
    axes[0].legend(fontsize=7, frameon=False)
    _caption(
        fig,
        "Logistic mixed model per family with crossed random effects for respondents "
        "and items; 95 % intervals.",
    )
    return fig


def effort_vs_time(points: pd.DataFrame, *, ax: Axes | None = None) -> Figure | Axes:
    """Machine effort per item against human median response time per item (log–log).

    Parameters
    ----------
    points : DataFrame
        Columns ``item``, ``group`` (machine), ``effort`` (mean effort on the item),
        ``effort_unit``, ``human_rt_ms`` (median human response time on the item).
    """
    fig, ax = _target(ax)
    machines = _machines(points["group"].unique())
    for g in machines:
        d = points[(points["group"] == g) & (points["effort"] > 0) & (points["human_rt_ms"] > 0)]
        if d.empty:
            continue
        st = group_style(g, machines)
        unit = ", ".join(sorted(d["effort_unit"].dropna().astype(str).unique())) or "effort"
        ax.scatter(
            d["human_rt_ms"] / 1000,
            d["effort"],
            color=st["color"],
            marker=st["marker"],
            s=16,
            alpha=0.75,
            label=f"{g} ({unit})",
            edgecolors="none",
        )
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("human median response time (s)")
    ax.set_ylabel("machine effort (log scale; unit per solver)")
    ax.legend(fontsize=7, frameon=False)
    return _finish(
        fig,
        ax,
        f"Per-item machine effort vs human response time; {points['item'].nunique()} items.",
    )
