"""Render an item in any medium: ``text``, ``structured`` or ``picture`` (PNG or SVG).

All media come from the family's own renderers, so a person and a machine see the same content.
Rendering is deterministic: the same item gives the same bytes.
"""

from __future__ import annotations

import io
from typing import Any, Literal

from .checks import check_choice
from .exceptions import InputError
from .families import get_family
from .item import MODES, Item

__all__ = ["MEDIA", "render", "render_picture"]

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


def render_picture(
    item: Item, mode: str | None = None, *, fmt: Literal["png", "svg"] = "png", size_px: int = 600
) -> bytes:
    """The item drawn by its family, as PNG or SVG bytes (``size_px`` square at 100 dpi)."""
    import matplotlib as mpl
    from matplotlib.figure import Figure  # no pyplot: the user's backend is left alone

    check_choice("fmt", fmt, ("png", "svg"))
    mode = _mode_for(item, mode)
    fig = Figure(figsize=(size_px / 100, size_px / 100), dpi=100)
    get_family(item.family).draw(item, mode, fig)
    buf = io.BytesIO()
    meta: dict[str, Any] = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
    with mpl.rc_context({"svg.hashsalt": "twofold", "svg.fonttype": "path"}):
        fig.savefig(buf, format=fmt, dpi=100, metadata=meta)
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
