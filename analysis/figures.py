"""Comparison figures: people and machines side by side, legible in colour and in greyscale.

Every function takes the analysis tables exactly as :func:`twofold.analysis.run.analyze_study`
writes them (columns listed in its docstring), returns a matplotlib Figure (or the Axes it drew on
when ``ax`` is given), never calls ``plt.show()``, and puts a one-line caption stating the method
and N under the plot. :func:`save_figure` writes SVG, PDF and 300-dpi PNG.

Text is at least :data:`MIN_FONT_PT` points and figures are at most :data:`MAX_WIDTH_IN` inches
wide, so the report shows them at 100 % without shrinking the text; legends sit outside the data.
Humans are always drawn in near-black with filled circles and solid lines; each machine group
gets its own colour *and* marker *and* line style, so figures survive greyscale printing.
Estimates that are not valid (a fit that did not converge, a slope that is not identified, an
undefined correlation, an effect under separation) are not drawn; the caption says which and why.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, TypeVar

import matplotlib as mpl
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

__all__ = [
    "MAX_WIDTH_IN",
    "MIN_FONT_PT",
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
    "usable_items",
    "verdict_summary",
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
#: smallest text in any figure (points, at the figure's own size)
MIN_FONT_PT = 9.0
#: widest figure (inches): the report's text column at 96 px per inch
MAX_WIDTH_IN = 10.0
#: an item slope above this, or a difficulty SE above it, marks the item as not identified
UNIDENTIFIED = 10.0
_STYLE: dict[str, Any] = {
    "font.size": 9.5,
    "axes.titlesize": 10.5,
    "axes.labelsize": 9.5,
    "xtick.labelsize": 9,
    "ytick.labelsize": 9,
    "legend.fontsize": 9,
    "figure.titlesize": 10.5,
    "svg.fonttype": "none",
    "pdf.fonttype": 42,
}

F = TypeVar("F", bound=Callable[..., Any])


def _styled(func: F) -> F:
    """Draw inside our style (text sizes) so that every new text artist picks it up."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        with mpl.rc_context(_STYLE):  # type: ignore[arg-type]
            return func(*args, **kwargs)

    return wrapper  # type: ignore[return-value]


def group_style(group: str, machines: Sequence[str]) -> dict[str, Any]:
    """Colour, marker and line style of a respondent group (``"human"`` or a machine name)."""
    if group == HUMAN:
        return {"color": "#1b1b1b", "marker": "o", "linestyle": "-"}
    k = list(machines).index(group) % len(PALETTE) if group in machines else 0
    return {"color": PALETTE[k], "marker": _MARKERS[k], "linestyle": _LINES[k]}


def _machines(groups: Any) -> list[str]:
    return sorted({str(g) for g in groups if str(g) != HUMAN})


def _caption(fig: Figure, text: str) -> None:
    fig.supxlabel(text, fontsize=MIN_FONT_PT, color="#444444", style="italic", wrap=True)


def _target(
    ax: Axes | None, *, width: float = 6.4, height: float = 4.2
) -> tuple[Figure | None, Axes]:
    """A new figure and its axes when ``ax`` is None, else no figure and the given axes."""
    if ax is not None:
        return None, ax
    fig = Figure(figsize=(width, height), layout="constrained")
    return fig, fig.subplots()


def _finish(fig: Figure | None, ax: Axes, caption: str) -> Figure | Axes:
    """Caption and return the new figure, or return the caller's axes untouched."""
    if fig is None:
        return ax
    _caption(fig, caption)
    return fig


def _legend_outside(fig: Figure, handles: list[Any] | None = None, **kw: Any) -> None:
    """One legend for the figure, to the right of every panel (never over data)."""
    if handles is None:
        seen: dict[str, Any] = {}
        for ax in fig.axes:
            for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
                seen.setdefault(lab, h)
        labels, handles = list(seen), list(seen.values())
    else:
        labels = [h.get_label() for h in handles]
    if handles:
        fig.legend(handles, labels, loc="outside right upper", frameon=False, **kw)


def save_figure(fig: Figure, stem: str | Path) -> tuple[Path, Path, Path]:
    """Write ``fig`` as ``<stem>.svg``, ``<stem>.pdf`` and ``<stem>.png`` (300 dpi)."""
    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    svg, pdf, png = stem.with_suffix(".svg"), stem.with_suffix(".pdf"), stem.with_suffix(".png")
    with mpl.rc_context(_STYLE):  # type: ignore[arg-type]
        fig.savefig(svg, format="svg", metadata={"Date": None})
        fig.savefig(pdf, format="pdf", metadata={"CreationDate": None, "ModDate": None})
        fig.savefig(png, format="png", dpi=300, metadata={"Software": None})
    return svg, pdf, png


def _facet_grid(
    n: int, *, per_row: int = 2, size: float = 3.4, extra: float = 1.8
) -> tuple[Figure, list[Axes]]:
    ncols = min(per_row, max(n, 1))
    nrows = math.ceil(max(n, 1) / ncols)
    width = min(size * ncols + extra, MAX_WIDTH_IN)
    fig = Figure(figsize=(width, size * nrows + 0.8), layout="constrained")
    axes = fig.subplots(nrows, ncols, squeeze=False).ravel().tolist()
    for ax in axes[n:]:
        ax.set_visible(False)
    return fig, axes[:n]


def _fmt(v: float) -> str:
    return "n/a" if v is None or not np.isfinite(v) else f"{v:.2f}"


@_styled
def difficulty_profiles(
    difficulty: pd.DataFrame,
    error_rates: pd.DataFrame,
    agreement: pd.DataFrame | None = None,
) -> Figure:
    """Human item difficulty (x) against each machine's item error rate (y), one panel per family.

    Parameters
    ----------
    difficulty : DataFrame
        The ``item_difficulty`` table: ``item``, ``family``, ``difficulty`` (IRT b or logit).
    error_rates : DataFrame
        The ``machine_error_rates`` table: ``group``, ``item``, ``error_rate``.
    agreement : DataFrame, optional
        The ``difficulty_agreement`` table; its Spearman BCa rows are quoted in each panel's
        title, and an undefined correlation is named as such.
    """
    points = error_rates.merge(difficulty[["item", "family", "difficulty"]], on="item")
    points = points.drop(columns=[c for c in ("family_x",) if c in points]).rename(
        columns={"family_y": "family"}
    )
    fams = sorted(points["family"].unique())
    machines = _machines(points["group"].unique())
    clipped = int((points["difficulty"].abs() > DIFFICULTY_CLIP).sum())
    points["difficulty"] = points["difficulty"].clip(-DIFFICULTY_CLIP, DIFFICULTY_CLIP)
    stats = None
    if agreement is not None:
        stats = agreement[(agreement["statistic"] == "spearman") & (agreement["interval"] == "bca")]
    fig, axes = _facet_grid(len(fams), size=3.6)
    undefined = 0
    for ax, fam in zip(axes, fams, strict=True):
        sub = points[points["family"] == fam]
        lines = [fam]
        for g in machines:
            d = sub[sub["group"] == g].sort_values("difficulty")
            if d.empty:
                continue
            st = group_style(g, machines)
            jitter = (np.arange(len(d)) % 5 - 2) * 0.006
            ax.scatter(
                d["difficulty"],
                d["error_rate"] + jitter,
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
                    if np.isfinite(r["estimate"]):
                        lines.append(
                            f"{g}: ρ {_fmt(r['estimate'])} [{_fmt(r['ci_low'])}, "
                            f"{_fmt(r['ci_high'])}]"
                        )
                    else:
                        undefined += 1
                        const = d["error_rate"].nunique() <= 1
                        lines.append(f"{g}: ρ undefined ({'constant error' if const else 'n'})")
        ax.set_title("\n".join(lines), fontsize=MIN_FONT_PT, loc="left")
        ax.set_xlabel("human item difficulty (logit)")
        ax.set_ylabel("machine error rate")
        ax.set_ylim(-0.05, 1.05)
    _legend_outside(fig)
    note = f"; {clipped} point(s) beyond ±{DIFFICULTY_CLIP:g} drawn at the edge" if clipped else ""
    if undefined:
        note += f"; {undefined} correlation(s) undefined (no variation), not drawn as numbers"
    _caption(
        fig,
        f"Spearman ρ with BCa bootstrap interval over items; {points['item'].nunique()} items, "
        f"{len(machines)} machine groups{note}.",
    )
    return fig


def usable_items(items: pd.DataFrame) -> pd.Series:
    """Which calibrated items have finite, identified parameters (slope and difficulty SE at
    most :data:`UNIDENTIFIED`, ``|b|`` at most :data:`DIFFICULTY_CLIP`)."""
    b_se = items["b_se"] if "b_se" in items else pd.Series(0.0, index=items.index)
    return (
        items["a"].notna()
        & items["b"].notna()
        & (items["a"] <= UNIDENTIFIED)
        & (b_se.fillna(0) <= UNIDENTIFIED)
        & (items["b"].abs() <= DIFFICULTY_CLIP)
    )


@_styled
def item_curves(
    items: pd.DataFrame,
    abilities: pd.DataFrame | None = None,
    departures: pd.DataFrame | None = None,
    fit: pd.DataFrame | None = None,
    *,
    n_items: int = 5,
    ax: Axes | None = None,
    theta: tuple[float, float] = (-4.0, 4.0),
) -> Figure | Axes:
    """Item response curves of a few items, with machine respondents at their ability.

    Parameters
    ----------
    items : DataFrame
        The ``irt_items`` table: ``item``, ``a``, ``b``, ``b_se``.
    abilities : DataFrame, optional
        The ``irt_abilities`` table; rows with ``kind == "machine"`` and ``pooled`` are drawn as
        marked verticals at ``theta``.
    departures : DataFrame, optional
        The ``irt_departures`` table; when given, the items drawn are the ``n_items`` whose
        machine answers depart most from the human-scale prediction (largest ``|z|``).
    fit : DataFrame, optional
        The ``irt_fit`` table (``model``, ``converged``); a fit that did not converge draws no
        curves.
    n_items : int, default 5
    """
    fig, ax = _target(ax, width=7.6)
    model = str(fit["model"].iloc[0]).upper() if fit is not None and len(fit) else "IRT"
    converged = bool(fit["converged"].iloc[0]) if fit is not None and len(fit) else True
    ok = items[usable_items(items)]
    left_out = len(items) - len(ok)
    if departures is not None and len(departures):
        order = departures.reindex(departures["z"].abs().sort_values(ascending=False).index)
        top = [i for i in dict.fromkeys(order["item"]) if i in set(ok["item"])][:n_items]
        chosen = ok.set_index("item").loc[top].reset_index()
        why = f"the {len(chosen)} items whose machine answers depart most from the prediction"
    else:
        chosen = ok.sort_values("b").iloc[
            np.unique(np.linspace(0, max(len(ok) - 1, 0), min(n_items, len(ok))).astype(int))
        ]
        why = f"{len(chosen)} items evenly spaced in difficulty"
    grid = np.linspace(*theta, 200)
    if converged:
        for k, row in enumerate(chosen.itertuples(index=False)):
            p = 1 / (1 + np.exp(-row.a * (grid - row.b)))
            ax.plot(
                grid,
                p,
                color="#555555",
                linestyle=_LINES[k % len(_LINES)] if k else "-",
                linewidth=1.2,
                label=f"{row.item} (a {row.a:.2f}, b {row.b:.2f})",
            )
    else:
        ax.text(
            0.5,
            0.5,
            "IRT fit did not converge:\ncurves not drawn",
            transform=ax.transAxes,
            ha="center",
            va="center",
        )
    mach = None
    if abilities is not None and len(abilities):
        mach = abilities[(abilities["kind"] == "machine") & abilities["pooled"].astype(bool)]
        names = _machines(mach["solver"].unique())
        for row in mach.itertuples(index=False):
            st = group_style(str(row.solver), names)
            ax.axvline(row.theta, color=st["color"], linestyle=st["linestyle"], linewidth=1.4)
            ax.plot(
                [row.theta],
                [1.03],
                marker=st["marker"],
                color=st["color"],
                clip_on=False,
                label=f"{row.solver} θ {row.theta:.2f}",
            )
    ax.set_xlabel("ability θ (human scale, logits)")
    ax.set_ylabel("probability correct")
    ax.set_ylim(0, 1.06)
    if fig is not None:
        _legend_outside(fig)
    drop = (
        f"; {left_out} item(s) with slope or SE above {UNIDENTIFIED:g} or |b| above "
        f"{DIFFICULTY_CLIP:g} (not identified) left out"
        if left_out
        else ""
    )
    status = "" if converged else " The fit did not converge."
    return _finish(
        fig,
        ax,
        f"{model} item response curves from the human calibration: {why}{drop}; "
        f"machines at their ability estimate.{status}",
    )


@_styled
def error_type_composition(counts: pd.DataFrame) -> Figure:
    """Share of each error type among wrong answers: humans vs each machine, per family.

    Parameters
    ----------
    counts : DataFrame
        The ``error_types`` table: ``family``, ``group``, ``error_type``, ``n``.
    """
    fams = sorted(counts["family"].unique())
    fig, axes = _facet_grid(len(fams), size=3.8, extra=0.4)
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
            range(len(groups)),
            [f"{g}\n(n={int(table.loc[g].sum())})" for g in groups],
            rotation=30,
            ha="right",
        )
        ax.set_ylabel("share of wrong answers")
        ax.set_title(fam)
        ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False, title="error type")
    _caption(
        fig,
        f"Error types assigned by each family's classifier; {int(counts['n'].sum())} "
        "wrong answers; groups with n = 0 made no errors in the family.",
    )
    return fig


@_styled
def error_consistency(pairs: pd.DataFrame, *, summary: pd.DataFrame | None = None) -> Figure:
    """Pairwise error consistency: a matrix of group means, the human ceiling beside it.

    Parameters
    ----------
    pairs : DataFrame
        The ``consistency_pairs`` table: ``group_a``, ``group_b``, ``pair_type``
        (``human-human``, ``human-machine``, ``machine-machine``), ``kappa`` (NaN when
        undefined).
    summary : DataFrame, optional
        The ``consistency_summary`` table (``group_a, group_b, pair_type, n_pairs, mean,
        median, q_low, q_high, conf_level``); used for group pairs without rows in ``pairs``
        (by default the human-human pairs, summarised rather than listed).
    """
    fig = Figure(figsize=(9.6, 4.2), layout="constrained")
    ax_m, ax_h = fig.subplots(1, 2, width_ratios=[1.2, 1])
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
        if r.group_a not in labels or r.group_b not in labels:
            continue
        if r.pair_type == "human-human":
            hh_summary = r
        if (r.group_a, r.group_b) in listed:
            continue
        i, j = labels.index(r.group_a), labels.index(r.group_b)
        mat[i, j] = mat[j, i] = r.mean
    im = ax_m.imshow(mat, vmin=-0.2, vmax=1, cmap="cividis")
    ax_m.set_xticks(range(len(labels)), labels, rotation=30, ha="right")
    ax_m.set_yticks(range(len(labels)), labels)
    for i in range(len(labels)):
        for j in range(len(labels)):
            if not np.isnan(mat[i, j]):
                ax_m.text(
                    j,
                    i,
                    f"{mat[i, j]:.2f}",
                    ha="center",
                    va="center",
                    color="white" if mat[i, j] < 0.5 else "black",
                )
    fig.colorbar(im, ax=ax_m, label="mean κ over pairs")
    hh = pairs.loc[pairs["pair_type"] == "human-human", "kappa"].dropna()
    hm = pairs.loc[pairs["pair_type"] == "human-machine"]
    if len(hh):
        ax_h.hist(hh, bins=20, color="#bbbbbb", edgecolor="#555555", label="human–human pairs")
        ax_h.axvline(hh.median(), color="#1b1b1b", linestyle="-", label="human median")
    elif hh_summary is not None and np.isfinite(hh_summary.median):
        ax_h.axvspan(
            hh_summary.q_low,
            hh_summary.q_high,
            color="#bbbbbb",
            alpha=0.6,
            label=f"human–human central {hh_summary.conf_level:.0%}",
        )
        ax_h.axvline(hh_summary.median, color="#1b1b1b", linestyle="-", label="human median")
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
    ax_h.set_ylabel("number of pairs" if len(hh) else "")
    ax_h.set_yticks([] if not len(hh) else ax_h.get_yticks())
    ax_h.legend(loc="upper center", bbox_to_anchor=(0.5, -0.2), frameon=False, ncol=2)
    n_hh = len(hh) if hh_summary is None else hh_summary.n_pairs
    _caption(
        fig,
        f"Trial-level error consistency (Cohen's κ on correct/incorrect, Geirhos et al. 2020) "
        f"on shared items; {n_hh} human–human pairs.",
    )
    return fig


@_styled
def robustness(table: pd.DataFrame, *, ax: Axes | None = None) -> Figure | Axes:
    """Accuracy on parents vs isomorphs per respondent group (a dumbbell per group).

    Parameters
    ----------
    table : DataFrame
        The ``robustness`` table: ``group``, ``family``, ``acc_parent``, ``acc_isomorph``,
        ``n_parent``; the ``family == "all"`` rows are drawn (all rows when there is no
        ``family`` column).
    """
    if "family" in table and (table["family"] == "all").any():
        table = table[table["family"] == "all"]
    fig, ax = _target(ax, width=6.4, height=1.2 + 0.45 * max(len(table), 2))
    machines = _machines(table["group"])
    order = [g for g in [HUMAN, *machines] if g in set(table["group"])]
    for y, g in enumerate(order):
        row = table[table["group"] == g].iloc[0]
        st = group_style(g, machines)
        ax.plot(
            [row["acc_parent"], row["acc_isomorph"]],
            [y, y],
            color=st["color"],
            linestyle=st["linestyle"],
            linewidth=1.5,
        )
        ax.plot(
            row["acc_parent"],
            y,
            marker=st["marker"],
            color=st["color"],
            markerfacecolor="white",
            markersize=8,
        )
        ax.plot(row["acc_isomorph"], y, marker=st["marker"], color=st["color"], markersize=8)
    ax.set_yticks(range(len(order)), order)
    ax.set_xlim(-0.02, 1.02)
    ax.set_xlabel("accuracy (open = parents, filled = isomorphs)")
    ax.invert_yaxis()
    n = int(table["n_parent"].max()) if "n_parent" in table and len(table) else 0
    return _finish(
        fig, ax, f"Accuracy on parent items and their isomorphs; up to {n} parents per group."
    )


@_styled
def factor_effects(table: pd.DataFrame) -> Figure:
    """Difficulty-factor effects with intervals, humans and each machine side by side.

    Parameters
    ----------
    table : DataFrame
        The ``factor_effects`` table: ``family``, ``factor``, ``group``, ``quantity`` (the
        ``effect`` rows are drawn), ``estimate`` (log-odds of an error per unit of the factor),
        ``ci_low``, ``ci_high``, ``conf_level``, ``note``. Rows with a note (separation: a group
        with no errors or no successes) or no finite interval are not drawn; the caption counts
        them.
    """
    eff = table[table["quantity"] == "effect"] if "quantity" in table else table
    note = eff["note"].fillna("").astype(str) if "note" in eff else pd.Series("", eff.index)
    valid = eff["ci_low"].notna() & eff["ci_high"].notna() & (note == "")
    dropped = int((~valid).sum())
    eff = eff[valid]
    fams = sorted(eff["family"].unique()) if len(eff) else ["(none)"]
    machines = _machines(eff["group"].unique())
    groups = [g for g in [HUMAN, *machines] if g in set(eff["group"])]
    per = [eff[eff["family"] == f] for f in fams]
    tallest = max([d["factor"].nunique() for d in per] + [1])
    ncols = min(2, len(fams))
    nrows = math.ceil(len(fams) / ncols)
    fig = Figure(
        figsize=(min(4.2 * ncols + 1.6, MAX_WIDTH_IN), nrows * (1.2 + 0.28 * tallest)),
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
            d = sub[sub["group"] == g].drop_duplicates("factor").set_index("factor")
            d = d.reindex(factors)
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
        ax.set_yticks(range(len(factors)), factors)
        ax.invert_yaxis()
        ax.set_title(fam)
        ax.set_xlabel("Δ log-odds of an error")
    _legend_outside(fig)
    level = f"{eff['conf_level'].iloc[0]:.0%}" if "conf_level" in eff and len(eff) else "95 %"
    _caption(
        fig,
        f"Logistic mixed model per family, crossed random effects for respondents and items; "
        f"{level} intervals; per unit of a numeric factor or against its first level"
        + (
            f"; {dropped} estimate(s) with separation or no interval not drawn." if dropped else "."
        ),
    )
    return fig


@_styled
def effort_vs_time(points: pd.DataFrame) -> Figure:
    """Machine effort per item against human median response time, one panel per effort unit.

    Parameters
    ----------
    points : DataFrame
        The ``effort_items`` table: ``item``, ``group`` (machine), ``effort`` (mean effort on
        the item), ``effort_unit``, ``human_rt_ms`` (median human response time on the item).
    """
    units = sorted(points["effort_unit"].fillna("effort").astype(str).unique()) or ["effort"]
    fig, axes = _facet_grid(len(units), size=3.8)
    machines = _machines(points["group"].unique())
    for ax, unit in zip(axes, units, strict=True):
        sub = points[points["effort_unit"].fillna("effort").astype(str) == unit]
        for g in machines:
            d = sub[(sub["group"] == g) & (sub["effort"] > 0) & (sub["human_rt_ms"] > 0)]
            if d.empty:
                continue
            st = group_style(g, machines)
            ax.scatter(
                d["human_rt_ms"] / 1000,
                d["effort"],
                color=st["color"],
                marker=st["marker"],
                s=16,
                alpha=0.75,
                label=g,
                edgecolors="none",
            )
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("human median response time (s)")
        ax.set_ylabel(f"machine effort ({unit})")
    _legend_outside(fig)
    _caption(
        fig,
        f"Per-item machine effort vs human response time (log–log), one panel per effort unit; "
        f"{points['item'].nunique()} items.",
    )
    return fig


_ANSWER_MARK = {"yes": "o", "partly": "s", "no": "X", "cannot tell": "D", "undefined": "."}


@_styled
def verdict_summary(verdict: pd.DataFrame) -> Figure:
    """The verdict at a glance: each machine's statistic and interval against people's band.

    Parameters
    ----------
    verdict : DataFrame
        The ``verdict`` table (:func:`twofold.analysis.verdict.build_verdict`); the rows with
        ``family == "all"`` and an interval are drawn, one panel per question, the human
        reference region shaded.
    """
    v = verdict[(verdict["family"] == "all") & verdict["ci_low"].notna()]
    questions = list(dict.fromkeys(v["question"])) or ["(no verdict)"]
    machines = _machines(verdict["group"].unique())
    fig = Figure(figsize=(min(3.0 * len(questions) + 1.8, MAX_WIDTH_IN), 3.0), layout="constrained")
    axes = fig.subplots(1, len(questions), squeeze=False)[0]
    xlabel = {
        "same hard items": "Spearman ρ with people",
        "same errors": "mean κ with people",
        "same fragility": "isomorph cost − people's",
    }
    for ax, q in zip(axes, questions, strict=True):
        sub = v[v["question"] == q]
        for y, g in enumerate(machines):
            r = sub[sub["group"] == g]
            if r.empty:
                continue
            r0 = r.iloc[0]
            st = group_style(g, machines)
            ax.errorbar(
                [r0["estimate"]],
                [y],
                xerr=[[r0["estimate"] - r0["ci_low"]], [r0["ci_high"] - r0["estimate"]]],
                fmt=_ANSWER_MARK.get(str(r0["answer"]), "o"),
                color=st["color"],
                capsize=3,
                markersize=6,
            )
        if len(sub):
            lo, hi = sub["ref_low"].iloc[0], sub["ref_high"].iloc[0]
            if np.isfinite(lo) and np.isfinite(hi):
                ax.axvspan(lo, hi, color="#cccccc", alpha=0.6, label="people's band")
        ax.axvline(0, color="#888888", linewidth=0.8)
        ax.set_yticks(range(len(machines)), machines)
        ax.set_ylim(len(machines) - 0.5, -0.5)
        ax.set_title(q)
        ax.set_xlabel(xlabel.get(q, "estimate"))
    _caption(
        fig,
        "Each machine's estimate with its interval (all families); grey: the human reference "
        "region that reads 'like people'.",
    )
    return fig
