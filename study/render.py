"""Render an item in any medium: ``text``, ``structured`` or ``picture`` (PNG or SVG).

All media come from the family's own renderers, so a person and a machine see the same content.
Pictures paint the family's :class:`~twofold.study.scene.Scene` with matplotlib (imported here
only when a picture is asked for); participant screens paint the same scene with PsychoPy.
Rendering is deterministic: the same item gives the same bytes.
"""

from __future__ import annotations

import io
from typing import Any, Literal

from .checks import check_choice
from .exceptions import InputError
from .families import get_family
from .item import MODES, Item
from .scene import FONTS, Grid, Line, Scene, Shape, Text, hatch_segments

__all__ = ["MEDIA", "paint_scene", "render", "render_picture", "scene_of"]

#: The media an item can be rendered in.
MEDIA = ("text", "picture", "structured")


def _mode_for(item: Item, mode: str | None) -> str:
    if mode is None:
        return item.modes[0]
    check_choice(
        "mode",
        mode,
        [m for m in MODES if m in item.modes],
        error=InputError,
        where=f"item {item.id}",
    )
    return mode


def scene_of(item: Item, mode: str | None = None) -> Scene:
    """The scene the item's family describes for ``mode`` (default: the item's first mode)."""
    return get_family(item.family).scene(item, _mode_for(item, mode))


def paint_scene(scene: Scene, fig: Any) -> list[dict[str, Any]]:
    """Paint ``scene`` on an empty matplotlib figure, filling it (aspect kept, centred).

    Returns what was drawn, one record per primitive in scene units (``kind``, ``points`` or
    ``text``/``xy``/``size``, colours), read back from the artists: tests compare these records
    with what the screen painter drew.
    """
    from matplotlib.colors import to_hex
    from matplotlib.patches import Polygon

    fw, fh = fig.get_size_inches() * fig.dpi
    ax = fig.add_axes((0.0, 0.0, 1.0, 1.0))
    ax.set_axis_off()
    fig.set_facecolor(scene.background)
    sx = min(fw / scene.width, fh / scene.height)  # pixels per scene unit
    pad_x, pad_y = (fw / sx - scene.width) / 2, (fh / sx - scene.height) / 2
    ax.set_xlim(-pad_x, scene.width + pad_x)
    ax.set_ylim(-pad_y, scene.height + pad_y)
    pt = sx * 72.0 / fig.dpi  # points per scene unit
    drawn: list[dict[str, Any]] = []

    def shape(points: Any, fill: str | None, edge: str | None, width: float, z: int) -> None:
        p = Polygon(
            points,
            closed=True,
            facecolor=fill or "none",
            edgecolor=edge or "none",
            linewidth=width * pt if edge else 0.0,
            joinstyle="miter",
            zorder=z,
        )
        ax.add_patch(p)
        drawn.append(
            {
                "kind": "shape",
                "points": [tuple(map(float, v)) for v in p.get_xy()[: len(points)]],
                "fill": None if fill is None else to_hex(p.get_facecolor()),
                "edge": None if edge is None else to_hex(p.get_edgecolor()),
            }
        )

    def lines(points: Any, colour: str, width: float, segments: bool, z: int) -> None:
        from matplotlib.collections import LineCollection

        pts = list(points)
        segs = [pts[k : k + 2] for k in range(0, len(pts) - 1, 2)] if segments else [pts]
        lc = LineCollection(segs, colors=colour, linewidths=width * pt, zorder=z)
        lc.set_capstyle("butt")
        ax.add_collection(lc)
        got = [tuple(map(float, v)) for s in lc.get_segments() for v in s]
        rgba: Any = lc.get_color()[0]
        drawn.append({"kind": "line", "points": got, "colour": to_hex(rgba)})

    for z, el in enumerate(scene.elements, start=1):
        if isinstance(el, Shape):
            shape(el.points, el.fill, el.edge, el.edge_width, z)
        elif isinstance(el, Line):
            lines(el.points, el.colour, el.width, el.segments, z)
        elif isinstance(el, Text):
            t = ax.text(
                el.x,
                el.y,
                el.text,
                fontsize=el.size * pt,
                color=el.colour,
                ha={"left": "left", "centre": "center", "right": "right"}[el.anchor],
                va={"top": "top", "middle": "center_baseline", "bottom": "bottom"}[el.valign],
                fontweight="bold" if el.bold else "normal",
                family=FONTS[el.font],
                linespacing=1.25,
                zorder=z,
            )
            drawn.append(
                {
                    "kind": "text",
                    "text": t.get_text(),
                    "xy": tuple(map(float, t.get_position())),
                    "size": t.get_fontsize() / pt,
                    "colour": to_hex(t.get_color()),
                }
            )
        elif isinstance(el, Grid):
            rows, cols = el.shape
            for r in range(rows):
                for c in range(cols):
                    x0, y0, x1, y1 = el.cell_box(r, c)
                    v = el.cells[r][c]
                    shape(((x0, y0), (x1, y0), (x1, y1), (x0, y1)), el.palette[v], el.line, 1.0, z)
                    pattern = el.hatches[v] if v < len(el.hatches) else None
                    if pattern:
                        lines(hatch_segments(pattern, x0, y0, el.cell), el.mark_of(v), 1.2, True, z)
        else:  # pragma: no cover - the Scene type admits nothing else
            raise TypeError(f"cannot paint {type(el).__name__}")
    return drawn


def render_picture(
    item: Item, mode: str | None = None, *, fmt: Literal["png", "svg"] = "png", size_px: int = 800
) -> bytes:
    """The item's scene painted as PNG or SVG bytes, ``size_px`` on its longer side (100 dpi)."""
    import matplotlib as mpl
    from matplotlib.figure import Figure  # no pyplot: the user's backend is left alone

    check_choice("fmt", fmt, ("png", "svg"))
    mode = _mode_for(item, mode)
    fam = get_family(item.family)
    scene = fam.scene(item, mode)
    long = max(scene.width, scene.height)
    w, h = size_px * scene.width / long, size_px * scene.height / long
    fig = Figure(figsize=(round(w) / 100, round(h) / 100), dpi=100)
    fam.draw(item, mode, fig)
    buf = io.BytesIO()
    meta: dict[str, Any] = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
    with mpl.rc_context({"svg.hashsalt": "twofold", "svg.fonttype": "path"}):
        fig.savefig(buf, format=fmt, dpi=100, metadata=meta, facecolor=scene.background)
    return buf.getvalue()


def render(item: Item, medium: str = "text", mode: str | None = None) -> Any:
    """Render ``item`` for ``mode`` (default: its first mode) in ``medium``.

    Returns
    -------
    str for ``text``, dict for ``structured``, PNG bytes for ``picture``.
    """
    check_choice("medium", medium, MEDIA)
    fam = get_family(item.family)
    mode = _mode_for(item, mode)
    if medium == "text":
        return fam.render_text(item, mode)
    if medium == "structured":
        view = fam.render_structured(item, mode)
        view.setdefault("item", item.id)
        view.setdefault("family", item.family)
        view.setdefault("mode", mode)
        return view
    return render_picture(item, mode, fmt="png")
