"""The ``grids`` family: few-shot colour-grid transformations.

Each item shows two to four demonstration pairs (input grid -> output grid) and a test input; the
answer is the test output grid. Grids are lists of lists of ints 0-9 (0 is the background). The
hidden transformation is a composition (depth 1-3) of operations from our own grammar:

geometric
    ``flip_lr``, ``flip_ud``, ``rot90`` (a quarter turn anticlockwise), ``rot180``, ``rot270``,
    ``transpose``, ``translate(direction)`` (one cell, background fills in)
colour
    ``recolour(a, b)``, ``swap(a, b)``, ``fill(c)`` (background cells enclosed by content)
object (objects are 4-connected groups of non-background cells)
    ``keep_largest``, ``keep_smallest``, ``gravity(direction)`` (every object slides as a rigid
    body until it touches the edge or another object), ``count_row`` (a one-row grid with one cell
    per object, in reading order, in the object's colour)
size
    ``crop`` (to the bounding box of the content), ``scale(k)``, ``tile(rows, cols)``

A program is stored on the item (``stimulus["program"]``, never shown) as a list of
``[name, *args]`` lists. Validity: every demonstration changes, every step of the program changes
at least one demonstration, the test output differs from the test input, and an enumerative search
over all programs of depth 1 and all depth-2 programs (bounded, see :func:`search`) finds no
consistent program that gives another test output, nor a consistent program shorter than the
intended one. The same search engine drives the reference solver ``grids-ref``.
"""

from __future__ import annotations

from .. import register
from .drawing import PALETTE
from .family import GridsFamily
from .operations import KINDS, OPS, apply_op, apply_program, describe_program
from .search import SearchResult, search
from .text import format_grid, parse_grids

__all__ = [
    "GridsFamily",
    "KINDS",
    "OPS",
    "PALETTE",
    "SearchResult",
    "apply_op",
    "apply_program",
    "describe_program",
    "format_grid",
    "parse_grids",
    "search",
]

register(GridsFamily())
