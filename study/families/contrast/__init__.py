"""The ``contrast`` family: two sets of panels split by a hidden rule from a small feature grammar.

Every panel holds 1-6 simple objects on a 3x3 grid of cells. Each object has a shape, a size, a
shade, an edge style, a tilt, a cell (row and column) and may sit inside a larger object. A hidden
rule is true of every panel in set A and false of every panel in set B; the respondent classifies
new test panels (``select``) or states the rule (``generate``).

The rule notation (ours)
------------------------
Values stand for themselves (``dome``, ``large``, ``dark``, ``dashed``, ``tilted``, ``top``,
``left``...); ``attr:value`` is accepted too. A *description* is one value or two values of
different attributes joined by ``+`` (``dome+large``: a large dome).

=======================  ====================================================  ======
form                     meaning                                               length
=======================  ====================================================  ======
``n=3``, ``n>=3``        the panel holds exactly / at least 3 objects          1
``every[D]``             every object fits description D                       ``1+|D|``
``some[D]``, ``no[D]``   at least one / no object fits D                       ``1+|D|``
``#[v]=2``               exactly 2 objects have value v                        2
``above[a,b]``           an object fitting a is above (higher row than) one     ``1+args``
                         fitting b; ``leftof``, ``bigger``, ``inside`` alike;
                         an argument is one value or ``*`` (any object)
``~F``                   F does not hold                                       ``1+|F|``
``F & G``                both hold                                             ``1+|F|+|G|``
=======================  ====================================================  ======

``|D|`` counts values and ``+`` signs (``dome+large`` has length 3), ``*`` counts 0. Parentheses
group. The description length of a rule is the sum of these counts; it orders the hypothesis
space (shorter rules first).

The enumerated rule space (used by the validity check and by the reference solver) holds every
*leaf* (count tests, quantified descriptions, ``#`` tests, relations), every negated leaf, every
conjunction of two such literals and every negated conjunction of two literals. The parser and
evaluator accept any nesting of ``~``, ``&`` and parentheses.

Scoring
-------
``select``: the response is one letter ``A`` or ``B`` per test panel, in order (``"ABBA"`` or a
list). ``generate``: a rule in the notation above; it counts as correct (``"intended"``) when it
is the hidden rule in canonical form, and as correct with label ``"equivalent-rule"`` when it
classifies every training and test panel as the hidden rule does. Free text that does not parse
as a rule (a participant's rule in words) is *not automatically scorable*: :meth:`score` raises
:class:`~twofold.study.exceptions.ResponseError` (field ``response``), so runners log the trial
as ``invalid`` with the verbatim text kept for hand coding, rather than counting it as wrong.

Select mode classifies every test panel, so items carry no whole-item ``choices`` (``None``); their
distractor scheme ``per-panel`` tells the item schema so. The answer is the mapping
``{"rule": <canonical notation>, "labels": <one letter per test panel>}``; :meth:`normalize` also
reads such a mapping for the part belonging to the mode.

Error types
-----------
A wrong label string is compared with the labels given by related rules, in this order (the first
match wins): ``reversed-sets`` (the negated rule), ``over-general`` (a shorter literal true of every
panel the rule admits and of some set-B panel), ``over-specific`` (the rule joined with a literal
true of all set-A panels, when that changes a test label), ``irrelevant-attribute`` (the
best-fitting literals of length <= 3 about attributes the rule does not use, when they misfit at
most a third of the training panels); anything else is ``other``. A wrong rule (generate mode) is
compared by its truth on all panels: its negation, a shorter superset, a subset covering set A, a
rule about unused attributes only, or ``other``.

Layout and versions
-------------------
Items are drawn as one scene (:mod:`~twofold.study.families.contrast.scene`): a labelled band
"Set A" above a labelled band "Set B", the test panels below. Version 2 shows 5 panels per set by
default (``per_set``): one row per band at the design box, with panels large enough for nested
objects; version 1 (6 per set) wrote records in the same format, which load, score and render
unchanged (only the default changed, so no adapter is needed).

Validity
--------
A candidate item is rejected (:class:`~twofold.study.families.Rejected`, counted by the bank) when
another enumerated rule of equal or shorter description length separates the sets but classifies
a test panel differently, and by default (``minimal``) also when a strictly shorter rule separates
the sets. Before rejecting, the generator swaps in up to ``4 + 2 * length`` training panels on
which the hidden rule and a competing rule disagree.
"""

from __future__ import annotations

from .. import register
from .enumeration import Grammar, grammar, leaf_vectors, rule_vector, separating
from .evaluation import evaluate_rule, panels_from_stimulus
from .family import ContrastFamily
from .generation import relevant_attributes
from .notation import (
    ATOM_NAME,
    ATTRIBUTES,
    RELATIONS,
    VALUES,
    describe_rule,
    format_rule,
    parse_rule,
    rule_length,
)

__all__ = [
    "ATOM_NAME",
    "ATTRIBUTES",
    "ContrastFamily",
    "Grammar",
    "RELATIONS",
    "VALUES",
    "describe_rule",
    "evaluate_rule",
    "format_rule",
    "grammar",
    "leaf_vectors",
    "panels_from_stimulus",
    "parse_rule",
    "relevant_attributes",
    "rule_length",
    "rule_vector",
    "separating",
]

register(ContrastFamily())
