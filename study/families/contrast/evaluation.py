"""Panels of the ``contrast`` family and the truth of a rule on a panel, one panel at a
time."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from ...exceptions import ResponseError
from .notation import ATOMS, ATTRIBUTES, COL, INSIDE, ROW, SIZE, VALUES, Rule, parse_rule

# ------------------------------------------------------------------------------------------------
# Panels: a panel is a list of objects, an object a list of 8 ints
# [shape, size, shade, edge, tilt, row, col, inside (index of the container or -1)]
# ------------------------------------------------------------------------------------------------


_VALUE_POS = [{v: k for k, v in enumerate(VALUES[a])} for a in ATTRIBUTES]


_CODES: dict[tuple[int, ...], str] = {}


def _obj_code(o: Sequence[int]) -> str:
    """Compact record form of an object: its values in attribute order, then ``in<k>``."""
    key = tuple(o)
    code = _CODES.get(key)
    if code is None:
        code = " ".join([VALUES[a][o[i]] for i, a in enumerate(ATTRIBUTES)])
        if o[INSIDE] >= 0:
            code = f"{code} in{o[INSIDE]}"
        _CODES[key] = code
    return code


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


def _obj_dict(code: str | Mapping[str, Any]) -> dict[str, Any]:
    """An object as a dict (attribute -> value, ``inside`` -> container index or None)."""
    if isinstance(code, Mapping):
        return dict(code)
    toks = code.split()
    rec: dict[str, Any] = dict(zip(ATTRIBUTES, toks[:7], strict=False))
    rec["inside"] = int(toks[7][2:]) if len(toks) > 7 else None
    return rec


def _obj_from_record(rec: str | Mapping[str, Any]) -> list[int]:
    if isinstance(rec, str):
        toks = rec.split()
        try:
            o = [_VALUE_POS[i][t] for i, t in enumerate(toks[:7])]
            if len(o) == 7 and len(toks) <= 8:
                o.append(int(toks[7][2:]) if len(toks) == 8 else -1)
                return o
        except (KeyError, ValueError):
            pass
        raise ResponseError(
            f"field 'object': got {rec!r}; accepted: values in the order "
            + ", ".join(ATTRIBUTES)
            + ", then optionally in<k>.",
            field="object",
        )
    try:
        o = [VALUES[a].index(rec[a]) for a in ATTRIBUTES]
    except (KeyError, ValueError, TypeError):
        raise ResponseError(
            f"field 'object': got {rec!r}; accepted: an object with "
            + ", ".join(f"{a} in {'/'.join(VALUES[a])}" for a in ATTRIBUTES),
            field="object",
        ) from None
    inside = rec.get("inside")
    o.append(-1 if inside is None else int(inside))
    return o


def panels_from_stimulus(stimulus: Mapping[str, Any]) -> tuple[list[list[list[int]]], int, int]:
    """Panels of a stimulus or structured view in the order A..., B..., test...

    Returns the panels (lists of int objects), the panels per set in A, and in B.
    """
    sets = stimulus["sets"]
    panels = [[_obj_from_record(o) for o in p] for p in sets["A"]]
    panels += [[_obj_from_record(o) for o in p] for p in sets["B"]]
    panels += [[_obj_from_record(o) for o in p] for p in stimulus["test"]]
    return panels, len(sets["A"]), len(sets["B"])


def _has(o: Sequence[int], desc: Sequence[int]) -> bool:
    for a in desc:
        at, v = ATOMS[a]
        if o[at] != v:
            return False
    return True


def _rel(rel: str, objs: Sequence[Sequence[int]], i: int, j: int) -> bool:
    oi, oj = objs[i], objs[j]
    if rel == "above":
        return oi[ROW] < oj[ROW]
    if rel == "leftof":
        return oi[COL] < oj[COL]
    if rel == "bigger":
        return oi[SIZE] > oj[SIZE]
    return oi[INSIDE] == j


def _pairs(rule: Rule, objs: Sequence[Sequence[int]]) -> list[tuple[int, int]]:
    _, rel, a, b = rule
    out = []
    for i, oi in enumerate(objs):
        if a is not None and not _has(oi, (a,)):
            continue
        for j, oj in enumerate(objs):
            if i != j and (b is None or _has(oj, (b,))) and _rel(rel, objs, i, j):
                out.append((i, j))
    return out


def _ev(rule: Rule, objs: Sequence[Sequence[int]]) -> bool:
    kind = rule[0]
    if kind == "n":
        return len(objs) == rule[2] if rule[1] == "=" else len(objs) >= rule[2]
    if kind == "q":
        d = rule[2]
        if rule[1] == "every":
            return all(_has(o, d) for o in objs)
        hit = any(_has(o, d) for o in objs)
        return hit if rule[1] == "some" else not hit
    if kind == "#":
        return sum(_has(o, (rule[1],)) for o in objs) == rule[2]
    if kind == "r":
        return _ev_rel(rule, objs)
    if kind == "not":
        return not _ev(rule[1], objs)
    return all(_ev(x, objs) for x in rule[1])


_ORDER_ATTR = {"above": ROW, "leftof": COL, "bigger": SIZE}


def _ev_rel(rule: Rule, objs: Sequence[Sequence[int]]) -> bool:
    """Truth of a relation leaf: some object fitting a stands in the relation to another
    object fitting b. For the strict orders it suffices to compare the extreme values (an
    object never stands in a strict order to itself)."""
    _, rel, a, b = rule
    if not objs:
        return False
    if a is None:
        xs: Sequence[Sequence[int]] = objs
    else:
        aa, av = ATOMS[a]
        xs = [o for o in objs if o[aa] == av]
        if not xs:
            return False
    if b is None:
        ys: Sequence[Sequence[int]] = objs
    else:
        ba, bv = ATOMS[b]
        ys = [o for o in objs if o[ba] == bv]
        if not ys:
            return False
    if rel == "inside":
        n = len(objs)
        for i, o in enumerate(objs):
            c = o[INSIDE]
            if (
                0 <= c < n
                and c != i
                and (a is None or o[aa] == av)
                and (b is None or objs[c][ba] == bv)
            ):
                return True
        return False
    at = _ORDER_ATTR[rel]
    if rel == "bigger":
        return max(o[at] for o in xs) > min(o[at] for o in ys)
    return min(o[at] for o in xs) < max(o[at] for o in ys)


def evaluate_rule(rule: Rule | str, panels: Sequence[Sequence[Sequence[int]]]) -> list[bool]:
    """Truth of ``rule`` (syntax tree or notation) on each panel (lists of int objects)."""
    if isinstance(rule, str):
        rule = parse_rule(rule)
    return [_ev(rule, p) for p in panels]
