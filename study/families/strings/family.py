"""The ``strings`` family class: parameters, generation, variants, scoring and rendering as
text."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ...exceptions import ResponseError
from ...item import Item
from .._base import Family, ParamSpec, Rejected
from .errors import _is_partial, _partials, _sample_edits
from .grammar import ALPHABETS, RULES, Program, _runs, _selectors, _units, apply_program, is_literal
from .scene import StringsScene
from .search import _Analysis, consistent_programs, literal_edit
from .text import _clean, _decode, _encode, _parse_reply

# -- the family -------------------------------------------------------------------------------
_ERROR_TYPES = {
    "no-change": "copied the target unchanged",
    "literal": "applied the change literally: the same symbols at the same place, or the same "
    "symbol value replaced, instead of the relation (successor, run, position)",
    "wrong-grouping": "applied the rule to single symbols where it concerns groups of repeated "
    "symbols, or the other way round",
    "wrong-position": "applied the right change at another position (first instead of last...)",
    "wrong-direction": "moved the other way along the symbol order (predecessor for successor)",
    "partial": "applied the change to only part of what it concerns",
    "other": "any other wrong response",
}


class StringsFamily(StringsScene, Family):
    """Symbol-string analogies with recorded alternative readings (see the module docstring)."""

    name = "strings"
    prefix = "str"
    reference_solver = "strings-ref"
    typical_rt_ms = 7000.0
    version = "3"
    modes = ("generate", "select")
    params = (
        ParamSpec(
            "rule",
            "choice",
            "any",
            "the intended change; 'any' draws one per item",
            options=("any", *RULES),
        ),
        ParamSpec("length", "int", 3, "number of groups in the source and target", low=3, high=10),
        ParamSpec(
            "grouping",
            "choice",
            "none",
            "none: single symbols; pairs: every symbol doubled; mixed: runs of 1-3",
            options=("none", "pairs", "mixed"),
        ),
        ParamSpec(
            "direction",
            "choice",
            "up",
            "whether the strings run forwards or backwards along the symbol order",
            options=("up", "down"),
        ),
        ParamSpec(
            "wrap", "bool", False, "whether the target or its change passes the end of the order"
        ),
        ParamSpec(
            "alphabet",
            "choice",
            "letters",
            "symbol order: letters, digits, or an invented glyph order shown on screen",
            options=tuple(ALPHABETS),
        ),
    )
    factors = (
        "rule",
        "length",
        "n_symbols",
        "grouping",
        "direction",
        "wrap",
        "alphabet",
        "n_readings",
    )
    distractor_schemes = {
        "near-miss": "wrong answers from related rules (literal copy, wrong position, wrong "
        "grouping, wrong direction, partial change, no change), topped up with one-symbol edits",
        "one-edit": "the answer with one symbol replaced, inserted or removed",
    }
    variant_operators = {
        "other-alphabet": "same rule, grouping and direction on another symbol order",
        "reverse-direction": "strings run the other way along the symbol order; same rule",
        "longer": "one or two more groups in source and target; same rule",
        "relocate": "same structure started at other places of the same symbol order",
    }
    error_types = _ERROR_TYPES
    default_choices = 4
    answer_format = (
        "the changed target string: symbols from the given order, written without spaces"
    )

    def __init__(self) -> None:
        self._cache: dict[str, dict[str, Any]] = {}

    # -- generation -------------------------------------------------------------------------
    @staticmethod
    def _sizes(grouping: str, length: int, rng: np.random.Generator) -> list[int]:
        if grouping == "none":
            return [1] * length
        if grouping == "pairs":
            return [2] * length
        while True:
            sizes = [int(x) for x in rng.integers(1, 4, size=length)]
            if len(set(sizes)) > 1:
                return sizes

    @staticmethod
    def _run(start: int, sizes: Sequence[int], d: int) -> tuple[int, ...]:
        out: list[int] = []
        for i, c in enumerate(sizes):
            out.extend([start + d * i] * c)
        return tuple(out)

    def _build(
        self,
        *,
        rule: str,
        src_sizes: Sequence[int],
        tgt_sizes: Sequence[int],
        direction: str,
        wrap: bool,
        alphabet: str,
        rng: np.random.Generator,
    ) -> dict[str, Any]:
        symbols = ALPHABETS[alphabet]
        n = len(symbols)
        prog = RULES[rule]
        d = 1 if direction == "up" else -1
        # Descriptions without literals commute with moving the start, so one raw application
        # from start 0 tells, for every start, whether the string and its change stay in range.
        raw_s = self._run(0, src_sizes, d)
        out_s = apply_program(prog, raw_s, None)
        if out_s is None:
            raise Rejected("rule does not apply to the source")
        lo = min(min(raw_s), min(out_s))
        hi = max(max(raw_s), max(out_s))
        if hi - lo >= n:
            raise Rejected("source does not fit the symbol order")
        s0 = -lo + int(rng.integers(n - (hi - lo)))
        src = tuple(v + s0 for v in raw_s)
        chg = tuple(v + s0 for v in out_s)
        raw_t = self._run(0, tgt_sizes, d)
        out_t = apply_program(prog, raw_t, None)
        if out_t is None:
            raise Rejected("rule does not apply to the target")
        t_lo, t_hi = min(raw_t), max(raw_t)
        a_lo, a_hi = min(out_t), max(out_t)
        crossing, inside, plain = [], [], []
        for t0 in range(n):
            t_in = t0 + t_lo >= 0 and t0 + t_hi < n
            a_in = t0 + a_lo >= 0 and t0 + a_hi < n
            if t_in and a_in:
                plain.append(t0)
            elif t_in:
                crossing.append(t0)
            else:
                inside.append(t0)
        pool = (crossing or inside) if wrap else plain
        while True:
            if not pool:
                raise Rejected("no target position with the requested wrap")
            t0 = pool.pop(int(rng.integers(len(pool))))
            tgt = tuple((v + t0) % n for v in raw_t)
            if tgt != src and tgt != chg:
                break
        an = _Analysis(prog, src, chg, tgt, n, symbols)
        if an.answer is None or an.answer == tgt:
            raise Rejected("no visible change on the target")
        if an.simpler:
            raise Rejected("simpler reading")
        return {
            "symbols": symbols,
            "src": src,
            "chg": chg,
            "tgt": tgt,
            "analysis": an,
        }

    def _make_item(
        self,
        *,
        built: dict[str, Any],
        rule: str,
        params: Mapping[str, Any],
        alphabet: str,
        grouping: str,
        direction: str,
        wrap: bool,
        length: int,
        rng: np.random.Generator,
        seed: int,
        modes: Sequence[str],
        distractor_scheme: str | None,
        n_choices: int,
        variant_of: str | None = None,
        variant_operator: str | None = None,
    ) -> Item:
        symbols = built["symbols"]
        an: _Analysis = built["analysis"]
        if an.answer is None:  # the analysis of a valid item always has an answer
            raise Rejected("no answer")
        answer = _decode(an.answer, symbols)
        accepted = [
            {"answer": _decode(out, symbols), "label": label} for out, label in an.accepted.items()
        ]
        stimulus = {
            "alphabet": alphabet,
            "symbols": symbols,
            "circular": True,
            "source": _decode(built["src"], symbols),
            "changed": _decode(built["chg"], symbols),
            "target": _decode(built["tgt"], symbols),
        }
        factors = {
            "rule": rule,
            "length": length,
            "n_symbols": len(built["tgt"]),
            "grouping": grouping,
            "direction": direction,
            "wrap": wrap,
            "alphabet": alphabet,
            "n_readings": 1 + len(accepted),
        }
        choices = None
        scheme = None
        if "select" in modes:
            scheme = distractor_scheme or next(iter(self.distractor_schemes))
            choices = self._choices(
                stimulus, answer, accepted, rule, scheme, n_choices, rng, an.outputs
            )
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors=factors,
            modes=list(modes),
            stimulus=stimulus,
            answer=answer,
            accepted=accepted,
            choices=choices,
            distractor_scheme=scheme,
            variant_of=variant_of,
            variant_operator=variant_operator,
            seed=seed,
        )

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
        p = {**self.default_params(), **params}
        rule = p["rule"]
        if rule == "any":
            names = list(RULES)
            rule = names[int(rng.integers(len(names)))]
        length = int(p["length"])
        src_sizes = self._sizes(p["grouping"], length, rng)
        tgt_sizes = self._sizes(p["grouping"], length, rng)
        built = self._build(
            rule=rule,
            src_sizes=src_sizes,
            tgt_sizes=tgt_sizes,
            direction=p["direction"],
            wrap=bool(p["wrap"]),
            alphabet=p["alphabet"],
            rng=rng,
        )
        return self._make_item(
            built=built,
            rule=rule,
            params=p,
            alphabet=p["alphabet"],
            grouping=p["grouping"],
            direction=p["direction"],
            wrap=bool(p["wrap"]),
            length=length,
            rng=rng,
            seed=seed,
            modes=modes,
            distractor_scheme=distractor_scheme,
            n_choices=n_choices,
        )

    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        if operator not in self.variant_operators:
            raise Rejected(f"unknown operator {operator}")
        f = item.factors
        st = item.stimulus
        symbols = st["symbols"]
        rule = f["rule"]
        src_sizes = [c for _, c in _runs(_encode(st["source"], symbols))]
        tgt_sizes = [c for _, c in _runs(_encode(st["target"], symbols))]
        alphabet, direction = f["alphabet"], f["direction"]
        if operator == "other-alphabet":
            others = [a for a in ALPHABETS if a != alphabet]
            alphabet = others[int(rng.integers(len(others)))]
        elif operator == "reverse-direction":
            direction = "down" if direction == "up" else "up"
        elif operator == "longer":
            extra = int(rng.integers(1, 3))
            if len(src_sizes) + extra > 10:  # the parameter's upper bound
                raise Rejected("too long")
            grouping = f["grouping"]
            more_s = self._sizes(grouping, extra + 1, rng)[:extra]
            more_t = self._sizes(grouping, extra + 1, rng)[:extra]
            src_sizes = src_sizes + more_s
            tgt_sizes = tgt_sizes + more_t
        built = None
        for _ in range(8):
            try:
                built = self._build(
                    rule=rule,
                    src_sizes=src_sizes,
                    tgt_sizes=tgt_sizes,
                    direction=direction,
                    wrap=bool(f["wrap"]),
                    alphabet=alphabet,
                    rng=rng,
                )
            except Rejected:
                continue
            if operator == "relocate" and (
                _decode(built["src"], symbols) == st["source"]
                and _decode(built["tgt"], symbols) == st["target"]
            ):
                built = None
                continue
            break
        if built is None:
            raise Rejected(f"{operator}: no valid isomorph")
        params = dict(item.params)
        params.update(alphabet=alphabet, direction=direction, length=len(src_sizes))
        n_choices = len(item.choices) if item.choices is not None else self.default_choices
        return self._make_item(
            built=built,
            rule=rule,
            params=params,
            alphabet=alphabet,
            grouping=f["grouping"],
            direction=direction,
            wrap=bool(f["wrap"]),
            length=len(src_sizes),
            rng=rng,
            seed=item.seed,
            modes=item.modes,
            distractor_scheme=item.distractor_scheme,
            n_choices=n_choices,
            variant_of=item.id,
            variant_operator=operator,
        )

    # -- related rules and distractors --------------------------------------------------------
    def _related(
        self,
        stimulus: Mapping[str, Any],
        rule: str,
        readings: Sequence[tuple[float, Program, Any]] | None = None,
    ) -> dict[str, list[str]]:
        """Outputs of rules related to the intended one, per error type (in classifier order)."""
        symbols = stimulus["symbols"]
        n = len(symbols)
        src = _encode(stimulus["source"], symbols)
        chg = _encode(stimulus["changed"], symbols)
        tgt = _encode(stimulus["target"], symbols)
        prog = RULES[rule]
        ans = apply_program(prog, tgt, n)
        rel: dict[str, list[tuple[int, ...]]] = {k: [] for k in _ERROR_TYPES if k != "other"}
        rel["no-change"].append(tgt)
        rel["literal"].append(literal_edit(src, chg, tgt))
        if readings is None:
            readings = [
                (0.0, p, apply_program(p, tgt, n)) for p in consistent_programs(src, chg, n)
            ]
        for _, p, out in readings:
            if is_literal(p) and out is not None:
                rel["literal"].append(out)
        if prog[0] != "reverse":
            other = "symbol" if prog[1] == "group" else "group"
            swapped = (prog[0], other, *prog[2:])
            out = apply_program(swapped, tgt, n)
            if out is not None:
                rel["wrong-grouping"].append(out)
        if prog[0] in ("map", "double", "delete") and prog[2][0] in ("first", "last"):
            nu = len(_units(tgt, prog[1]))
            for sel in _selectors(nu, [], with_values=False):
                if sel != prog[2] and sel[0] != "all":
                    out = apply_program((prog[0], prog[1], sel, *prog[3:]), tgt, n)
                    if out is not None:
                        rel["wrong-position"].append(out)
        if prog[0] == "map" and prog[3][0] == "shift":
            out = apply_program(prog[:3] + (("shift", -prog[3][1]),), tgt, n)
            rel["wrong-direction"].append(out)  # type: ignore[arg-type]
        if prog[0] == "append" and prog[2][0] == "next":
            out = apply_program((prog[0], prog[1], ("prev",)), tgt, n)
            if out is not None:
                rel["wrong-direction"].append(out)
        if rule == "reverse":
            out = apply_program(("swap", "group"), tgt, n)
            if out is not None:
                rel["partial"].append(out)
        if ans is not None:
            rel["partial"].extend(_partials(tgt, ans))
        return {k: [_decode(s, symbols) for s in v if s] for k, v in rel.items()}

    def _info(self, item: Item) -> dict[str, Any]:
        info = self._cache.get(item.id)
        if info is None:
            if len(self._cache) > 4096:
                self._cache.clear()
            related = self._related(item.stimulus, item.factors["rule"])
            info = {"related": related}
            self._cache[item.id] = info
        return info

    def _choices(
        self,
        stimulus: Mapping[str, Any],
        answer: str,
        accepted: Sequence[Mapping[str, Any]],
        rule: str,
        scheme: str,
        n_choices: int,
        rng: np.random.Generator,
        readings: Sequence[tuple[float, Program, Any]] | None = None,
    ) -> list[str]:
        symbols = stimulus["symbols"]
        taken = {answer} | {a["answer"] for a in accepted}
        picked: list[str] = []
        if scheme == "near-miss":
            related = self._related(stimulus, rule, readings)
            pool: list[str] = []
            for key in (
                "wrong-position",
                "wrong-grouping",
                "literal",
                "wrong-direction",
                "no-change",
                "partial",
            ):
                cands = [c for c in dict.fromkeys(related[key]) if c not in taken]
                if key == "partial" and cands:
                    cands = [cands[int(rng.integers(len(cands)))]]
                pool.extend(cands)
            for c in pool:
                if len(picked) >= n_choices - 1:
                    break
                if c not in picked and c not in taken:
                    picked.append(c)
        need = n_choices - 1 - len(picked)
        if need > 0:
            picked.extend(_sample_edits(answer, symbols, need, taken | set(picked), rng))
        options = [answer, *picked]
        order = rng.permutation(len(options))
        return [options[int(i)] for i in order]

    # -- checks -------------------------------------------------------------------------------
    def check(self, item: Item) -> list[str]:
        problems: list[str] = []
        st = item.stimulus
        rule = item.factors.get("rule")
        if rule not in RULES:
            return [f"factors.rule: unknown rule {rule!r}"]
        symbols = ALPHABETS.get(str(st.get("alphabet")))
        if symbols is None or st.get("symbols") != symbols:
            return ["stimulus.symbols: does not match the named alphabet"]
        try:
            src, chg, tgt = (_encode(st[k], symbols) for k in ("source", "changed", "target"))
        except (KeyError, ValueError):
            return ["stimulus: strings use symbols outside the order"]
        n = len(symbols)
        prog = RULES[rule]
        if apply_program(prog, src, n) != chg:
            problems.append("the rule does not turn source into changed")
        an = _Analysis(prog, src, chg, tgt, n, symbols)
        if an.answer is None or _decode(an.answer, symbols) != item.answer:
            problems.append("answer is not the rule applied to the target")
        if an.simpler:
            problems.append("a simpler reading gives another answer")
        acc = {_decode(o, symbols) for o in an.accepted}
        if acc != {a["answer"] for a in item.accepted}:
            problems.append("accepted answers differ from the readings found")
        if item.choices is not None:
            if sum(c == item.answer for c in item.choices) != 1:
                problems.append("the answer is not among the choices exactly once")
            if len(set(item.choices)) != len(item.choices):
                problems.append("duplicate choices")
        return problems

    # -- responses ----------------------------------------------------------------------------
    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        symbols = item.stimulus["symbols"]
        text = response
        if isinstance(text, list | tuple) and all(isinstance(s, str) for s in text):
            text = "".join(text)
        if isinstance(text, int) and not isinstance(text, bool) and symbols.isdigit():
            text = str(text)
        if not isinstance(text, str):
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a string of "
                f"symbols from the order {symbols}.",
                field="response",
            )
        cleaned = _clean(text, symbols)
        if cleaned is None:
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: a non-empty "
                f"string of symbols from the order {symbols} (spaces and commas are ignored).",
                field="response",
            )
        return cleaned

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        if mode == "select":
            response = item.choices[int(response) - 1]  # type: ignore[index]
        related = self._info(item)["related"]
        for key in (
            "no-change",
            "literal",
            "wrong-grouping",
            "wrong-position",
            "wrong-direction",
            "partial",
        ):
            if response in related[key]:
                return key
        st = item.stimulus
        symbols = st["symbols"]
        try:
            resp = _encode(response, symbols)
        except ValueError:
            return "other"
        if _is_partial(_encode(st["target"], symbols), _encode(item.answer, symbols), resp):
            return "partial"
        return "other"

    def sample_wrong_answer(
        self, item: Item, mode: str, rng: np.random.Generator
    ) -> tuple[Any, str]:
        correct = {item.answer} | {a["answer"] for a in item.accepted}
        related = self._info(item)["related"]
        options: list[tuple[str, str]] = []
        for key, outs in related.items():
            for out in dict.fromkeys(outs):
                if out not in correct and self.classify_error(item, out, mode) == key:
                    options.append((out, key))
                    break
        symbols = item.stimulus["symbols"]
        for _ in range(20):
            length = len(item.answer)
            rand = "".join(symbols[int(i)] for i in rng.integers(len(symbols), size=length))
            if rand not in correct and self.classify_error(item, rand, mode) == "other":
                options.append((rand, "other"))
                break
        if not options:
            raise Rejected("no wrong response found")
        return options[int(rng.integers(len(options)))]

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            return super().parse_text(item, text, mode)
        symbols = item.stimulus["symbols"]
        found = _parse_reply(text, symbols, item.stimulus)
        if found is None:
            raise ResponseError(
                f"item {item.id}: no string of symbols from the order {symbols} found in reply.",
                field="response",
            )
        return found

    # -- rendering ----------------------------------------------------------------------------
    def render_text(self, item: Item, mode: str) -> str:
        st = item.stimulus
        order = " ".join(st["symbols"])
        lines = [
            "Symbol-string analogy.",
            "The symbols come in this order, and the order is circular (after the last symbol "
            "comes the first again):",
            order,
            "",
            f"Example pair: {st['source']} -> {st['changed']}",
            f"New string:   {st['target']} -> ?",
            "",
            "Whatever turns the first string of the example pair into the second also acts on "
            "the new string. Which string does the new string become?",
        ]
        if mode == "select":
            lines += ["", "Choices:"]
            lines += [f"{k}. {c}" for k, c in enumerate(item.choices or (), start=1)]
            lines += [
                "",
                'Answer format: the number of your choice, on its own line as "Answer: <number>".',
            ]
        else:
            lines += [
                "",
                f'Answer format: {self.answer_format}, on its own line as "Answer: <string>".',
            ]
        return "\n".join(lines)

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        st = item.stimulus
        view: dict[str, Any] = {
            "family": self.name,
            "item": item.id,
            "mode": mode,
            "task": "Apply to the target the change that turns the source into the changed string.",
            "alphabet": st["alphabet"],
            "symbol_order": list(st["symbols"]),
            "circular": bool(st["circular"]),
            "source": st["source"],
            "changed": st["changed"],
            "target": st["target"],
            "response_format": self.answer_format if mode == "generate" else "a choice number",
        }
        if mode == "select":
            view["choices"] = list(item.choices or ())
        return view
