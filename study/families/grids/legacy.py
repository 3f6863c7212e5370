"""Reading version 1 ``grids`` items: an in-memory adapter, so old banks load, score, classify
and render unchanged on disk (their hash stays the same).

Version 1 stored ``{"train": [{"input", "output"}], "test", "program"}``, painted colour indices
with its own palette (:data:`V1_PALETTE`) and named error types, variant operators and the
operations of the hidden rule in snake_case. Version 2 stores
``{"examples": [{"before", "after"}], "probe", "program"}`` and uses
:data:`twofold.study.colour.GRID_PALETTE`. An old item keeps its indices (its answer and the
responses logged for it stay valid); only the colours it is painted with are looked up through
:data:`V1_TO_V2`, which sends each old index to the new colour of the same hue category.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from ...colour import GRID_HATCHES, GRID_INKS, GRID_LABELS, GRID_NAMES, GRID_PALETTE
from ...item import Item

#: the palette of version 1 (index 0 the background), kept as a record of what old items showed
V1_PALETTE: tuple[str, ...] = (
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
#: old index -> index of the version 2 colour of the same hue category (off-white -> white,
#: ink blue -> navy, pumpkin -> orange, pale sky -> sky, mulberry -> violet, straw -> yellow,
#: pine teal -> teal, pewter -> grey, walnut -> brown, blossom -> pink)
V1_TO_V2: tuple[int, ...] = (9, 5, 1, 4, 8, 6, 2, 0, 3, 7)
#: version 1 names of error types and variant operators -> version 2 names
V1_NAMES: dict[str, str] = {
    "identity_copy": "copy-of-probe",
    "partial": "part-of-rule",
    "wrong_size": "wrong-size",
    "wrong_colours": "wrong-colours",
    "wrong_content": "wrong-cells",
    "other": "other",
    "permute_colours": "permute-colours",
    "rotate_flip": "turn-or-mirror",
    "translate_content": "move-content",
    "resize_canvas": "grow-canvas",
}
#: version 1 names of the hidden rule's operations -> version 2 names
V1_OPS: dict[str, str] = {
    "flip_lr": "flip-lr",
    "flip_ud": "flip-ud",
    "keep_largest": "keep-largest",
    "keep_smallest": "keep-smallest",
    "count_row": "count-row",
}


def is_v1(item: Item) -> bool:
    """Whether ``item`` was made by version 1 of the family (the old field layout)."""
    return "train" in item.stimulus and "examples" not in item.stimulus


def native(stimulus: Mapping[str, Any]) -> dict[str, Any]:
    """The stimulus in the version 2 layout (a new dict for version 1 records; the record is
    left as it is)."""
    if "examples" in stimulus:
        return dict(stimulus)
    return {
        "examples": [{"before": p["input"], "after": p["output"]} for p in stimulus["train"]],
        "probe": stimulus["test"],
        "program": [[V1_OPS.get(op[0], op[0]), *op[1:]] for op in stimulus["program"]],
    }


def current_name(name: str) -> str:
    """The version 2 name of an error type or variant operator (version 1 names accepted)."""
    return V1_NAMES.get(name, name)


def colours_of(item: Item) -> dict[str, tuple[Any, ...]]:
    """The colours ``item``'s indices are painted with: ``palette``, ``hatches``, ``inks``
    (hatch and label colour), ``labels`` and ``names``, one entry per index 0-9."""
    if not is_v1(item):
        return {
            "palette": GRID_PALETTE,
            "hatches": GRID_HATCHES,
            "inks": GRID_INKS,
            "labels": GRID_LABELS,
            "names": GRID_NAMES,
        }
    m = V1_TO_V2
    hatches: list[str | None] = [GRID_HATCHES[j] for j in m]
    labels = [GRID_LABELS[j] for j in m]
    names = [GRID_NAMES[j] for j in m]
    # the old background (now painted white) is empty: no hatch, the empty label; the old grey
    # (painted with the new empty grey) takes the white's hatch and a label of its own
    grey = m.index(0)
    hatches[grey], hatches[0] = GRID_HATCHES[m[0]], None
    labels[grey], labels[0] = "G", GRID_LABELS[0]
    names[grey], names[0] = "grey", "empty"
    return {
        "palette": tuple(GRID_PALETTE[j] for j in m),
        "hatches": tuple(hatches),
        "inks": tuple(GRID_INKS[j] for j in m),
        "labels": tuple(labels),
        "names": tuple(names),
    }
