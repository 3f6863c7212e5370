"""The ``grids`` family: few-shot colour-grid transformations.

Each item shows two to four worked examples (a ``before`` grid and its ``after`` grid) and a
probe grid; the answer is the probe after the same change. Grids are lists of rows of colour
indices 0-9 (0 the empty cell; colours, hatches and swatch labels in
:mod:`twofold.study.colour`), at most :data:`SIDE_CAP` on a side so that a whole item fits the
screen at a legible cell size. The hidden change is a composition (depth 1-3) of operations from
our own grammar:

geometric
    ``flip-lr``, ``flip-ud``, ``rot90`` (a quarter turn anticlockwise), ``rot180``, ``rot270``,
    ``transpose``, ``translate(direction)`` (one cell, empty cells fill in)
colour
    ``recolour(a, b)``, ``swap(a, b)``, ``fill(c)`` (empty cells enclosed by content)
object (objects are 4-connected groups of non-empty cells)
    ``keep-largest``, ``keep-smallest``, ``gravity(direction)`` (every object slides as a rigid
    body until it touches the edge or another object), ``count-row`` (a one-row grid with one cell
    per object, in reading order, in the object's colour)
size
    ``crop`` (to the bounding box of the content), ``scale(k)``, ``tile(rows, cols)``

A program is stored on the item (``stimulus["program"]``, never shown) as a list of
``[name, *args]`` lists. Validity: every example changes, every step of the program changes at
least one example, the answer differs from the probe, and an enumerative search over all
programs of depth 1 and all depth-2 programs (bounded, see :func:`search`) finds no consistent
program that gives another answer, nor a consistent program shorter than the intended one. The
same search engine drives the reference solver ``grids-ref``. Version 1 items are read through
:mod:`~twofold.study.families.grids.legacy`.
"""

from __future__ import annotations

from ...colour import GRID_PALETTE as PALETTE
from .. import register
from .family import GridsFamily
from .legacy import V1_NAMES, V1_PALETTE, V1_TO_V2
from .operations import KINDS, OPS, apply_op, apply_program, describe_program
from .scene import SIDE_CAP, side_cap
from .search import SearchResult, search
from .text import format_grid, parse_grids

__all__ = [
    "GridsFamily",
    "KINDS",
    "OPS",
    "PALETTE",
    "SIDE_CAP",
    "SearchResult",
    "V1_NAMES",
    "V1_PALETTE",
    "V1_TO_V2",
    "apply_op",
    "apply_program",
    "describe_program",
    "format_grid",
    "parse_grids",
    "search",
    "side_cap",
]

register(GridsFamily())
