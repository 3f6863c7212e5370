"""The ``grids`` family class: parameters, generation, variants, scoring and rendering as
text."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ...exceptions import ResponseError
from ...item import Item, canonical_json
from .._base import Family, ParamSpec, Rejected
from .errors import _classify, _perturb, _recolour_answer
from .generation import (
    _conjugate_op,
    _growth,
    _near_miss_choices,
    _pad_all,
    _palette,
    _permute_op,
    _required_colours,
    _sample_input,
    _sample_program,
    _translate_all,
    _validity,
)
from .legacy import colours_of, current_name, native
from .operations import _DIHEDRAL, KINDS, MAX_SIDE, OPS, Grid, _label, apply_op, apply_program
from .scene import SIDE_CAP, answer_scene, scene, side_cap
from .text import _CHOICE, _MARK, _arr, _is_grid, _lst, format_grid, parse_grids

if TYPE_CHECKING:  # pragma: no cover
    from ...scene import Scene


# -- the family ---------------------------------------------------------------------------------
class GridsFamily(Family):
    """Few-shot colour-grid transformations from a small grammar of grid operations.

    Parameters (generation spec)
    ----------------------------
    depth : int, 1-3, default 2
        Operations composed.
    kinds : list of {"geometric", "colour", "object", "size"}, default all
        Kinds the operations are drawn from.
    size : int, 3-12, default 8
        Largest side of an input grid; sides are drawn from ``size - 3`` to ``size`` (smaller
        when a scale or tile step would make the output larger than the size cap, see
        :data:`~twofold.study.families.grids.scene.SIDE_CAP`: 12 with up to four examples and
        four choices, less with more choices).
    objects : int, 1-8, default 3
        Objects per input grid vary from ``objects - 1`` to ``objects + 1``.
    demos : int, 2-4, default 3
        Demonstration pairs.
    resize : {"any", "same", "different"}, default "any"
        Whether outputs must keep or must change the input size.

    Notes
    -----
    Factors stored on every item: ``depth``, ``kinds`` (the kinds used, joined by ``+``),
    ``size`` (largest side of the test input), ``n_objects`` (objects in the test input),
    ``n_demos`` and ``size_change`` (some demonstration output differs in shape from its input).
    The stimulus holds ``examples`` (list of ``{"before", "after"}``), ``probe`` and ``program``
    (never shown); grids are lists of rows of colour indices 0-9, 0 the empty cell. Version 1
    items (``train``/``test`` fields, another palette, snake_case names) are read through
    :mod:`~twofold.study.families.grids.legacy`. In select mode the choices come from the
    ``near-miss`` scheme.
    """

    name = "grids"
    prefix = "grd"
    reference_solver = "grids-ref"
    typical_rt_ms = 35000.0
    version = "2"
    modes = ("generate", "select")
    params = (
        ParamSpec("depth", "int", 2, "number of operations composed", 1, 3),
        ParamSpec(
            "kinds",
            "multi",
            list(KINDS),
            "operation kinds the composition draws from",
            options=KINDS,
        ),
        ParamSpec(
            "size", "int", 8, "largest side of an input grid (sides vary below it)", 3, SIDE_CAP
        ),
        ParamSpec("objects", "int", 3, "typical number of objects in an input grid", 1, 8),
        ParamSpec("demos", "int", 3, "number of demonstration pairs", 2, 4),
        ParamSpec(
            "resize",
            "choice",
            "any",
            "whether outputs keep the input size: same, different or any",
            options=("any", "same", "different"),
        ),
    )
    factors = ("depth", "kinds", "size", "n_objects", "n_demos", "size_change")
    distractor_schemes = {
        "near-miss": "outputs of related programs: a prefix of the composition (the first is "
        "the test input itself), one or two operations swapped for siblings, the operations "
        "reversed; padded with a few recoloured cells when these run out; the set is drawn so "
        "that the choices alone favour the answer only at chance"
    }
    variant_operators = {
        "permute-colours": "relabel the colours 1-9 by one permutation across the whole item",
        "turn-or-mirror": "rotate or mirror every grid of the item the same way "
        "(the program is conjugated)",
        "move-content": "move the content of every before grid and the probe to another place "
        "on its canvas (each grid by its own offset; after grids recomputed)",
        "grow-canvas": "add empty rows and columns to every before grid and the probe",
    }
    error_types = {
        "copy-of-probe": "the probe copied unchanged",
        "part-of-rule": "the result of part of the composition (e.g. its first steps)",
        "wrong-size": "a grid of another shape than the answer",
        "wrong-colours": "the right shape and layout of content but other colours",
        "wrong-cells": "the right shape, at least half the cells right, other content",
        "other": "any other wrong response (the right shape, mostly wrong)",
    }
    default_choices = 4
    answer_format = (
        "the answer grid: one row per line, one digit 0-9 per cell (0 = an empty cell), "
        "no spaces or other characters"
    )

    # -- generation ---------------------------------------------------------------------------
    def generate(
        self,
        params: Mapping[str, Any],
        rng: np.random.Generator,
        *,
        seed: int,
        modes: Sequence[str],
        distractor_scheme: str | None,
        n_choices: int,
    ) -> Item:
        p = self._params(params)
        program = _sample_program(p, rng)
        growth = _growth(program)
        cap = side_cap(p["demos"], n_choices if "select" in modes else 0)
        hi = min(p["size"], cap // growth)
        lo = max(3, min(hi, p["size"] - 3))
        if hi < 3:
            raise Rejected("grid too small for growth")
        need = _required_colours(program)
        palette = _palette(rng, need)
        rings = any(op[0] == "fill" for op in program)
        inputs = [
            _sample_input(rng, lo, hi, p["objects"], palette, need, rings)
            for _ in range(p["demos"] + 1)
        ]
        return self._build(
            program,
            inputs[:-1],
            inputs[-1],
            params=p,
            rng=rng,
            seed=seed,
            modes=modes,
            scheme=distractor_scheme,
            n_choices=n_choices,
            cap=cap,
        )

    def _params(self, params: Mapping[str, Any]) -> dict[str, Any]:
        out = self.default_params()
        for spec in self.params:
            if spec.name in params:
                out[spec.name] = spec.check_value(params[spec.name], where="grids params")
        out["kinds"] = [k for k in KINDS if k in out["kinds"]]
        return out

    def _build(
        self,
        program: Sequence[Sequence[Any]],
        demo_inputs: Sequence[Grid],
        test_input: Grid,
        *,
        params: Mapping[str, Any],
        rng: np.random.Generator,
        seed: int,
        modes: Sequence[str],
        scheme: str | None,
        n_choices: int,
        variant_of: str | None = None,
        variant_operator: str | None = None,
        cap: int | None = None,
    ) -> Item:
        program = [list(op) for op in program]
        outs = []
        for x in [*demo_inputs, test_input]:
            y = apply_program(x, program)
            if y is None:
                raise Rejected("program not applicable")
            outs.append(y)
        demo_outputs, answer = outs[:-1], outs[-1]
        change = any(x.shape != y.shape for x, y in zip(demo_inputs, demo_outputs, strict=True))
        if params["resize"] == "same" and (change or answer.shape != test_input.shape):
            raise Rejected("size changes")
        if params["resize"] == "different" and not change:
            raise Rejected("size kept")
        if cap is None:
            cap = side_cap(len(demo_inputs), n_choices if "select" in modes else 0)
        if max(max(g.shape) for g in [*demo_inputs, *demo_outputs, test_input, answer]) > cap:
            raise Rejected("grid larger than the size cap")
        problem = _validity(program, demo_inputs, demo_outputs, test_input, answer)
        if problem:
            raise Rejected(problem)
        stimulus = {
            "examples": [
                {"before": _lst(x), "after": _lst(y)}
                for x, y in zip(demo_inputs, demo_outputs, strict=True)
            ],
            "probe": _lst(test_input),
            "program": program,
        }
        kinds = sorted({OPS[op[0]][0] for op in program}, key=KINDS.index)
        factors = {
            "depth": len(program),
            "kinds": "+".join(kinds),
            "size": int(max(test_input.shape)),
            "n_objects": int(_label(test_input)[1]),
            "n_demos": len(demo_inputs),
            "size_change": bool(change),
        }
        choices = None
        used_scheme = None
        if "select" in modes:
            used_scheme = scheme or "near-miss"
            if used_scheme not in self.distractor_schemes:
                raise Rejected(f"unknown distractor scheme {used_scheme}")
            choices = _near_miss_choices(program, test_input, answer, n_choices, rng, cap)
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors=factors,
            modes=list(modes),
            stimulus=stimulus,
            answer=_lst(answer),
            accepted=[],
            choices=choices,
            distractor_scheme=used_scheme,
            variant_of=variant_of,
            variant_operator=variant_operator,
            seed=seed,
        )

    def check(self, item: Item) -> list[str]:
        problems = []
        st = native(item.stimulus)
        program = st["program"]
        xs = [_arr(p["before"]) for p in st["examples"]]
        ys = [_arr(p["after"]) for p in st["examples"]]
        test = _arr(st["probe"])
        for i, (x, y) in enumerate(zip(xs, ys, strict=True)):
            out = apply_program(x, program)
            if out is None or not np.array_equal(out, y) or out.shape != y.shape:
                problems.append(f"demonstration {i + 1} does not follow the program")
        answer = apply_program(test, program)
        if answer is None or _lst(answer) != item.answer:
            problems.append("the answer does not follow the program")
            return problems
        problem = _validity(program, xs, ys, test, answer)
        if problem:
            problems.append(problem)
        if item.choices is not None and item.answer_choice is None:
            problems.append("the answer is not among the choices")
        if item.choices is not None:
            keys = [canonical_json(c) for c in item.choices]
            if len(set(keys)) != len(keys):
                problems.append("choices repeat")
        return problems

    # -- variants -----------------------------------------------------------------------------
    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        operator = current_name(operator)
        if operator not in self.variant_operators:
            raise Rejected(f"unknown operator {operator}")
        st = native(item.stimulus)
        program = [list(op) for op in st["program"]]
        xs = [_arr(p["before"]) for p in st["examples"]]
        test = _arr(st["probe"])
        grids = [*xs, test]
        if operator == "permute-colours":
            perm = np.concatenate([[0], rng.permutation(9) + 1]).astype(np.int8)
            if (perm == np.arange(10)).all():
                perm[1], perm[2] = perm[2], perm[1]
            grids = [perm[g] for g in grids]
            program = [_permute_op(op, perm) for op in program]
        elif operator == "turn-or-mirror":
            # the mirror images of transpose along the other diagonal are not in the grammar,
            # so take the first map (in random order) under which every step has a counterpart
            for k in rng.permutation(len(_DIHEDRAL)):
                name = _DIHEDRAL[int(k)]
                try:
                    conj = [_conjugate_op(op, name) for op in program]
                except Rejected:
                    continue
                grids = [apply_op(g, (name,)) for g in grids]  # type: ignore[misc]
                program = conj
                break
        elif operator == "move-content":
            grids = _translate_all(grids, rng)
        else:
            n = len(item.choices) if item.choices else 0
            grids = _pad_all(grids, rng, _growth(program), side_cap(len(xs), n))
        scheme = item.distractor_scheme
        return self._build(
            program,
            grids[:-1],
            grids[-1],
            params=item.params,
            rng=rng,
            seed=item.seed,
            modes=item.modes,
            scheme=scheme,
            n_choices=len(item.choices) if item.choices else self.default_choices,
            variant_of=item.id,
            variant_operator=operator,
        )

    # -- responses ----------------------------------------------------------------------------
    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        if isinstance(response, str):
            grids = parse_grids(response)
            if len(grids) != 1:
                raise ResponseError(
                    f"item {item.id}: field 'response': got {len(grids)} grids in the text; "
                    "accepted: one grid, one row per line, one digit per cell.",
                    field="response",
                )
            response = grids[0]
        if isinstance(response, np.ndarray):
            response = response.tolist()
        if isinstance(response, tuple):
            response = [list(r) if isinstance(r, tuple) else r for r in response]
        if not _is_grid(response):
            raise ResponseError(
                f"item {item.id}: field 'response': got {str(response)[:60]!r}; accepted: a "
                f"rectangular list of rows of integers 0-9, at most {MAX_SIDE} by {MAX_SIDE}.",
                field="response",
            )
        return [list(r) for r in response]

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        if mode == "select":
            response = item.choices[response - 1]  # type: ignore[index]
        if canonical_json(response) == canonical_json(item.answer):
            raise ValueError("classify_error called with the correct answer")
        return _classify(item, _arr(response))

    def sample_wrong_answer(
        self, item: Item, mode: str, rng: np.random.Generator
    ) -> tuple[Any, str]:
        answer = _arr(item.answer)
        st = native(item.stimulus)
        test = _arr(st["probe"])
        program = st["program"]
        cands: list[Grid] = [test]
        for j in range(1, len(program)):
            out = apply_program(test, program[:j])
            if out is not None:
                cands.append(out)
        cands.append(_perturb(answer, rng, cells=1))
        cands.append(_recolour_answer(answer, rng))
        h, w = answer.shape
        cands.append(answer[:-1] if h > 1 else np.vstack([answer, answer[:1]]))
        cands.append(rng.integers(0, 10, size=answer.shape).astype(np.int8))
        order = rng.permutation(len(cands))
        for i in order:
            g = cands[i]
            if g is None or (g.shape == answer.shape and np.array_equal(g, answer)):
                continue
            return _lst(g), _classify(item, g)
        raise Rejected("no wrong response")  # pragma: no cover - the test input always differs

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            n = len(item.choices or ())
            named = [int(m) for m in _CHOICE.findall(text) if 1 <= int(m) <= n]
            return named[-1] if named else super().parse_text(item, text, mode)
        marks = list(_MARK.finditer(text))
        grids_after: list[list[list[int]]] = []
        if marks:
            grids_after = parse_grids(text[marks[-1].start() :])
        grids = grids_after or parse_grids(text)
        if not grids:
            raise ResponseError(
                f"item {item.id}: no grid found in reply (expected rows of digits 0-9).",
                field="response",
            )
        return grids[0] if grids_after else grids[-1]

    # -- rendering ----------------------------------------------------------------------------
    def render_text(self, item: Item, mode: str) -> str:
        st = native(item.stimulus)
        lines = [
            "Each worked example shows a grid before and after a hidden change; the change is the "
            "same in every example.",
            "Grids are written one row per line, one digit per cell; each digit is a colour and "
            "0 is an empty cell.",
            "",
        ]
        for i, pair in enumerate(st["examples"], start=1):
            lines += [f"Example {i}, before:", format_grid(pair["before"]), ""]
            lines += [f"Example {i}, after:", format_grid(pair["after"]), ""]
        lines += ["The grid to change:", format_grid(st["probe"]), ""]
        if mode == "select":
            for k, choice in enumerate(item.choices or (), start=1):
                lines += [f"Choice {k}:", format_grid(choice), ""]
            lines.append(
                "Which choice is that grid after the same change? Reply with the choice number "
                "only."
            )
        else:
            lines.append(
                "Write that grid after the same change: one row per line, one digit 0-9 per "
                "cell, no spaces or other characters."
            )
        return "\n".join(lines)

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        st = native(item.stimulus)
        col = colours_of(item)
        view: dict[str, Any] = {
            "examples": [{"before": p["before"], "after": p["after"]} for p in st["examples"]],
            "probe": st["probe"],
            "palette": list(col["palette"]),
            "colour_names": list(col["names"]),
            "empty": 0,
            "response_format": "grid" if mode == "generate" else "choice number",
        }
        if mode == "select":
            view["choices"] = list(item.choices or ())
        return view

    def scene(self, item: Item, mode: str) -> Scene:
        """Examples in a strip across the top, the probe and the answer space below (see
        :mod:`twofold.study.families.grids.scene`)."""
        return scene(item, mode)

    def answer_scene(self, item: Item, mode: str, answer: Any) -> Scene:
        """Any grid (or, in select mode, a choice number) painted at the item's cell size."""
        if mode == "generate":
            answer = self.normalize(item, answer, mode)
        return answer_scene(item, mode, answer)
