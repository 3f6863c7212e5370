"""Pictures of ``grids`` items: the palette, cell hatches and the drawing of demonstration
pairs."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ...item import Item
from .._base import Family

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

#: Our own colour-blind-conscious palette: colour 0 (background) to 9. The colours differ in
#: lightness as well as hue, and every colour also has its own hatch, so cells stay distinguishable
#: without colour vision.
PALETTE: tuple[str, ...] = (
    "#f4f1ea",  # 0 background, warm off-white
    "#1d3557",  # 1 ink blue
    "#e07a1f",  # 2 pumpkin
    "#7fc4e8",  # 3 pale sky
    "#7b2d5b",  # 4 mulberry
    "#f3d34a",  # 5 straw
    "#2a8c7a",  # 6 pine teal
    "#9a9a9a",  # 7 pewter
    "#5a3b1c",  # 8 walnut
    "#e2a0c4",  # 9 blossom
)
_HATCHES: tuple[str, ...] = ("", "", "//", "..", "\\\\", "++", "xx", "--", "||", "oo")

#: Draw digit labels in every cell of pictures (module-level option; ``draw`` reads it).
DIGIT_LABELS = False


# -- drawing ------------------------------------------------------------------------------------
def _draw_grid(
    ax: Any, grid: Sequence[Sequence[int]], labels: bool, title: str, box: tuple[int, int]
) -> None:
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import Rectangle

    g = np.asarray(grid)
    h, w = g.shape
    bh, bw = box
    ax.set_xlim(0, bw)
    ax.set_ylim(bh, 0)
    ax.set_aspect("equal")
    ax.axis("off")
    ox, oy = (bw - w) / 2, (bh - h) / 2
    fs = max(3.0, 70.0 / max(bh, bw))
    # one collection per colour (with that colour's hatch) keeps drawing fast
    for v in np.unique(g).tolist():
        rows, cols = np.nonzero(g == v)
        cells = [Rectangle((ox + c, oy + r), 1, 1) for r, c in zip(rows, cols, strict=True)]
        ax.add_collection(
            PatchCollection(
                cells,
                facecolor=PALETTE[v],
                edgecolor="#6b6b6b",
                linewidth=0.3,
                hatch=_HATCHES[v] or None,
            )
        )
    if labels:
        for r in range(h):
            for c in range(w):
                v = int(g[r, c])
                ax.text(
                    ox + c + 0.5,
                    oy + r + 0.5,
                    str(v),
                    ha="center",
                    va="center",
                    fontsize=fs,
                    color="white" if v in (1, 4, 6, 8) else "black",
                )
    ax.add_patch(Rectangle((ox, oy), w, h, fill=False, edgecolor="black", linewidth=1.0))
    ax.set_title(title, fontsize=7, pad=2)


def _draw(item: Item, mode: str, fig: Figure, *, labels: bool) -> None:
    st = item.stimulus
    rows: list[tuple[tuple[Any, str], tuple[Any, str] | None]] = [
        ((p["input"], f"example {i} in"), (p["output"], f"example {i} out"))
        for i, p in enumerate(st["train"], start=1)
    ]
    rows.append(((st["test"], "test in"), None))
    choices = list(item.choices or ()) if mode == "select" else []
    # one cell size for the whole picture, so sizes can be compared across grids
    every = [st["test"], *choices, *(p[k] for p in st["train"] for k in ("input", "output"))]
    side = (max(len(g) for g in every), max(len(g[0]) for g in every))
    per_row = min(len(choices), 6) if choices else 1
    choice_rows = -(-len(choices) // per_row)
    n_rows = len(rows) + choice_rows
    cell_h = 0.96 / n_rows
    for i, (left, right) in enumerate(rows):
        y = 1 - (i + 1) * cell_h
        ax = fig.add_axes((0.08, y + 0.01, 0.38, cell_h - 0.03))
        _draw_grid(ax, left[0], labels, left[1], side)
        ax2 = fig.add_axes((0.54, y + 0.01, 0.38, cell_h - 0.03))
        if right is None:
            ax2.axis("off")
            ax2.text(0.5, 0.5, "?", ha="center", va="center", fontsize=28)
        else:
            _draw_grid(ax2, right[0], labels, right[1], side)
        fig.text(0.5, y + cell_h / 2, "\u2192", ha="center", va="center", fontsize=16)
    wdt = 0.96 / per_row
    for k, ch in enumerate(choices):
        r, c = divmod(k, per_row)
        y = 1 - (len(rows) + r + 1) * cell_h
        ax = fig.add_axes((0.02 + c * wdt, y + 0.01, wdt - 0.02, cell_h - 0.03))
        _draw_grid(ax, ch, labels, f"choice {k + 1}", side)


class GridsDrawing(Family):
    """Pictures of grids items (a part of :class:`GridsFamily`)."""

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        _draw(item, mode, fig, labels=DIGIT_LABELS)
