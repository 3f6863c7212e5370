"""Pictures of ``contrast`` items: labelled set bands of panels of simple objects."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

from ...item import Item
from .._base import Family

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure
from .evaluation import _obj_dict
from .notation import INSIDE, VALUES

# ------------------------------------------------------------------------------------------------
# The family
# ------------------------------------------------------------------------------------------------

_FILL = {0: "#f3efe4", 1: "#8d94a6", 2: "#24263a"}  # light, mid, dark (lightness steps)
_SET_COLOUR = {"A": "#2f6db3", "B": "#c2711c", "T": "#4a4a4a"}  # blue / orange / grey frames


def _hosts_first(objs: list[list[int]]) -> list[list[int]]:
    """The panel with un-nested objects listed before nested ones (so drawers meet every
    container before what it holds); container indices are renumbered."""
    if all(o[INSIDE] < 0 for o in objs):
        return objs
    order = [k for k, o in enumerate(objs) if o[INSIDE] < 0]
    order += [k for k, o in enumerate(objs) if o[INSIDE] >= 0]
    new = {old: k for k, old in enumerate(order)}
    out = []
    for k in order:
        o = list(objs[k])
        if o[INSIDE] >= 0:
            o[INSIDE] = new[o[INSIDE]]
        out.append(o)
    return out


class ContrastDrawing(Family):
    """Pictures of contrast items (a part of :class:`ContrastFamily`)."""

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        from matplotlib import patches

        st = item.stimulus
        groups = [("A", st["sets"]["A"]), ("B", st["sets"]["B"]), ("T", st["test"])]
        n_set = max(len(st["sets"]["A"]), len(st["sets"]["B"]))
        cols_set = 2 if n_set <= 8 else 3
        rows_set = -(-n_set // cols_set)
        n_t = len(st["test"])
        cols_t = min(n_t, 2 * cols_set + 1)
        rows_t = -(-n_t // cols_t)
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_axis_off()
        top_h = 0.62 if rows_t == 1 else 0.5
        cell = min(0.45 / cols_set, (top_h - 0.06) / rows_set)
        ax.text(
            0.25,
            0.975,
            "Set A",
            ha="center",
            va="top",
            fontsize=11,
            weight="bold",
            color=_SET_COLOUR["A"],
        )
        ax.text(
            0.75,
            0.975,
            "Set B",
            ha="center",
            va="top",
            fontsize=11,
            weight="bold",
            color=_SET_COLOUR["B"],
        )
        boxes = []
        for gi, (name, pnls) in enumerate(groups[:2]):
            x0 = 0.03 + 0.5 * gi
            for k in range(len(pnls)):
                r, c = divmod(k, cols_set)
                boxes.append((name, k, x0 + c * cell, 0.93 - (r + 1) * cell, cell))
        y_test = 0.93 - rows_set * cell - 0.06
        ax.text(
            0.5,
            y_test + 0.035,
            "Test panels: A or B?",
            ha="center",
            va="center",
            fontsize=11,
            weight="bold",
            color=_SET_COLOUR["T"],
        )
        t_cell = min(0.94 / cols_t, (y_test - 0.02) / rows_t)
        for k in range(n_t):
            r, c = divmod(k, cols_t)
            x0 = 0.5 - cols_t * t_cell / 2 + c * t_cell
            boxes.append(("T", k, x0, y_test - (r + 1) * t_cell, t_cell))
        for name, k, x, y, s in boxes:
            pnls = dict(groups)[name]
            self._draw_panel(ax, patches, pnls[k], x, y, s, f"{name}{k + 1}", _SET_COLOUR[name])

    def _draw_panel(
        self,
        ax: Any,
        patches: Any,
        objs: Sequence[Mapping[str, Any]],
        x: float,
        y: float,
        s: float,
        label: str,
        colour: str,
    ) -> None:
        pad = s * 0.06
        w = s - 2 * pad
        ax.add_patch(
            patches.Rectangle(
                (x + pad, y + pad),
                w,
                w,
                fill=False,
                lw=1.4,
                edgecolor=colour,
                linestyle="-" if label[0] != "B" else (0, (4, 1.5)),
            )
        )
        ax.text(
            x + pad + w * 0.03,
            y + pad + w * 0.97,
            label,
            fontsize=6,
            va="top",
            ha="left",
            color=colour,
        )
        c = w / 3
        scale = {"small": 0.2, "medium": 0.3, "large": 0.42}
        dicts = [_obj_dict(x) for x in objs]
        # containers first, so that nested objects are drawn on top of them
        for o in sorted(dicts, key=lambda d: d["inside"] is not None):
            ci, ri = VALUES["col"].index(o["col"]), VALUES["row"].index(o["row"])
            cx = x + pad + (ci + 0.5) * c
            cy = y + pad + (2 - ri + 0.5) * c
            rad = scale[o["size"]] * c
            if o["inside"] is not None:
                host = dicts[o["inside"]]
                rad = min(rad, scale[host["size"]] * c * 0.45)
            self._shape(ax, patches, o, cx, cy, rad)

    def _shape(
        self, ax: Any, patches: Any, o: Mapping[str, Any], cx: float, cy: float, r: float
    ) -> None:
        import math

        ang = math.radians(45 if o["tilt"] == "tilted" else 0)
        shape = o["shape"]
        pts: list[tuple[float, float]]
        if shape == "square":
            pts = [(-0.8, -0.8), (0.8, -0.8), (0.8, 0.8), (-0.8, 0.8)]
        elif shape == "triangle":
            pts = [(-1, -0.8), (1, -0.8), (0, 1)]
        elif shape == "cross":
            t = 0.35
            pts = [
                (-t, 1),
                (t, 1),
                (t, t),
                (1, t),
                (1, -t),
                (t, -t),
                (t, -1),
                (-t, -1),
                (-t, -t),
                (-1, -t),
                (-1, t),
                (-t, t),
            ]
        else:  # dome: a half disc on a flat base
            pts = [
                (math.cos(math.pi * k / 16), math.sin(math.pi * k / 16) * 1.0 - 0.4)
                for k in range(17)
            ]
        rot = [
            (px * math.cos(ang) - py * math.sin(ang), px * math.sin(ang) + py * math.cos(ang))
            for px, py in pts
        ]
        xy = [(cx + px * r, cy + py * r) for px, py in rot]
        fill = _FILL[VALUES["shade"].index(o["shade"])]
        if o["edge"] == "dashed":
            # a dashed outline set slightly outside the shape reads on light and dark fills alike
            ax.add_patch(patches.Polygon(xy, closed=True, facecolor=fill, edgecolor="none"))
            halo = [(cx + px * r * 1.22, cy + py * r * 1.22) for px, py in rot]
            ax.add_patch(
                patches.Polygon(
                    halo,
                    closed=True,
                    fill=False,
                    edgecolor="#111111",
                    lw=1.0,
                    linestyle=(0, (2.5, 1.5)),
                )
            )
        else:
            ax.add_patch(
                patches.Polygon(xy, closed=True, facecolor=fill, edgecolor="#111111", lw=1.1)
            )
