"""Pictures of ``strings`` items."""

from __future__ import annotations

from typing import TYPE_CHECKING

from ...item import Item
from .._base import Family

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure


class StringsDrawing(Family):
    """Pictures of strings items (a part of :class:`StringsFamily`)."""

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        from matplotlib.patches import FancyArrowPatch, Rectangle

        ink, fill, accent = "#1f2430", "#f1ece2", "#2a6f97"
        st = item.stimulus
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_xlim(0, 600)
        ax.set_ylim(600, 0)
        ax.axis("off")

        def boxes(text: str, y: float, x0: float, size: float, *, dashed: bool = False) -> float:
            fs = max(6.0, min(20.0, size * 0.55))
            for i, ch in enumerate(text):
                x = x0 + i * size
                ax.add_patch(
                    Rectangle(
                        (x, y),
                        size * 0.92,
                        size * 0.92,
                        facecolor=fill,
                        edgecolor=ink,
                        linewidth=1.0,
                        linestyle="--" if dashed else "-",
                    )
                )
                ax.text(
                    x + size * 0.46,
                    y + size * 0.48,
                    ch,
                    ha="center",
                    va="center",
                    fontsize=fs,
                    color=ink,
                )
            return x0 + len(text) * size

        syms = st["symbols"]
        ax.text(20, 22, "Symbol order (circular)", fontsize=11, color=ink, va="center")
        size = min(34.0, 560.0 / len(syms))
        end = boxes(syms, 38, 20, size)
        ax.add_patch(
            FancyArrowPatch(
                (end - size * 0.5, 44 + size),
                (20 + size * 0.5, 44 + size),
                connectionstyle="arc3,rad=-0.06",
                arrowstyle="->",
                color=accent,
                linewidth=1.2,
                mutation_scale=12,
            )
        )
        longest = max(len(st[k]) for k in ("source", "changed", "target"))
        longest = max(longest, len(item.answer) if mode == "generate" else longest)
        if mode == "select":
            longest = max([longest, *(len(c) for c in item.choices or ())])
        sz = min(40.0, 440.0 / max(longest, 1))
        rows = [("source", st["source"]), ("becomes", st["changed"]), ("target", st["target"])]
        y = 120.0
        for label, text in rows:
            ax.text(20, y + sz * 0.45, label, fontsize=11, color=ink, va="center")
            boxes(text, y, 130, sz)
            y += sz + 18
        ax.text(20, y + sz * 0.45, "becomes", fontsize=11, color=ink, va="center")
        ax.text(
            130 + sz * 0.46,
            y + sz * 0.48,
            "?",
            ha="center",
            va="center",
            fontsize=max(8.0, sz * 0.6),
            color=accent,
            fontweight="bold",
        )
        ax.add_patch(
            Rectangle(
                (130, y),
                sz * 0.92,
                sz * 0.92,
                fill=False,
                edgecolor=accent,
                linestyle="--",
                linewidth=1.2,
            )
        )
        y += sz + 26
        if mode == "select":
            choices = list(item.choices or ())
            room = (590 - y) / max(len(choices), 1)
            csz = min(sz, 440.0 / max(longest, 1), room - 4)
            for k, c in enumerate(choices, start=1):
                ax.text(20, y + csz * 0.45, f"{k}.", fontsize=11, color=ink, va="center")
                boxes(c, y, 130, csz)
                y += csz + 4
