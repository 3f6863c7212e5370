"""A minimal test-only item family ("toy") and solvers for it.

Items ask for the sum of two small numbers, in generate mode (type the sum) or select mode (pick
it among numeric choices). It is used by the machine runner tests so they do not depend on the
real families. Importing this module does not register the family (registry-wide tests of other
modules must not see it): tests call :func:`use_toy` with pytest's ``monkeypatch``, which removes
it again after the test.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from twofold.experiments.solvers import Answer
from twofold.study import families
from twofold.study.exceptions import ResponseError
from twofold.study.families import Family, ParamSpec, Rejected
from twofold.study.item import Item


class ToyFamily(Family):
    name = "toy"
    prefix = "toy"
    version = "1"
    modes = ("generate", "select")
    params = (ParamSpec("high", "int", 20, "largest addend", low=2, high=1000),)
    factors = ("high",)
    distractor_schemes = {"near": "the answer plus or minus small offsets"}
    error_types = {"off_by_one": "one away from the sum", "other": "any other wrong response"}
    default_choices = 4
    answer_format = "an integer"

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
        high = int(params["high"])
        a, b = (int(x) for x in rng.integers(1, high + 1, size=2))
        if a == b:
            raise Rejected("equal addends")
        answer = a + b
        choices = None
        if "select" in modes:
            offsets = [o for o in (-2, -1, 1, 2, 3, -3) if answer + o > 0][: n_choices - 1]
            opts = [answer] + [answer + o for o in offsets]
            perm = rng.permutation(len(opts))
            choices = [opts[i] for i in perm]
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors={"high": high},
            modes=list(modes),
            stimulus={"a": a, "b": b},
            answer=answer,
            choices=choices,
            distractor_scheme=distractor_scheme,
            seed=seed,
        )

    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        raise Rejected("no operators")

    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        if mode == "select":
            return super().normalize(item, response, mode)
        if isinstance(response, str) and re.fullmatch(r"\s*-?\d+\s*", response):
            response = int(response)
        if isinstance(response, bool) or not isinstance(response, int):
            raise ResponseError(
                f"item {item.id}: field 'response': got {response!r}; accepted: an integer.",
                field="response",
            )
        return response

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        value = item.choices[response - 1] if mode == "select" else response
        return "off_by_one" if abs(value - item.answer) == 1 else "other"

    def sample_error(self, item: Item, mode: str, rng: np.random.Generator) -> tuple[Any, str]:
        if mode == "select":
            wrong = [k for k in range(1, len(item.choices) + 1) if k != item.answer_choice]
            k = int(rng.choice(wrong))
            return k, self.classify_error(item, k, mode)
        return item.answer + 1, "off_by_one"

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        if mode == "select":
            return super().parse_text(item, text, mode)
        hits = re.findall(r"(?<!\d)-?\d+(?!\d)", text)
        if not hits:
            raise ResponseError(f"item {item.id}: no integer found in reply.", field="response")
        return int(hits[-1])

    def render_text(self, item: Item, mode: str) -> str:
        a, b = item.stimulus["a"], item.stimulus["b"]
        text = f"What is {a} + {b}?"
        if mode == "select":
            opts = "\n".join(f"{k}. {c}" for k, c in enumerate(item.choices, start=1))
            return f"{text}\nChoices:\n{opts}\nReply with the number of your choice."
        return f"{text}\nReply with an integer."

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        view: dict[str, Any] = {"a": item.stimulus["a"], "b": item.stimulus["b"]}
        if mode == "select":
            view["choices"] = list(item.choices)
        return view


TOY = ToyFamily()


def use_toy(monkeypatch: Any = None) -> ToyFamily:
    """Register the toy family; with ``monkeypatch``, only until the test ends."""
    if monkeypatch is None:
        return families.register(TOY)
    monkeypatch.setitem(families.FAMILIES._entries, TOY.name, TOY)
    return TOY


TOY_SPEC = {"seed": 3, "families": {"toy": {"n": 12, "modes": ["generate", "select"]}}}


def solve_structured(view: Mapping[str, Any], mode: str) -> Answer:
    """Solve a toy item from its structured view (a plain function, for ``python:`` specs)."""
    total = view["a"] + view["b"]
    if mode == "select":
        return Answer(list(view["choices"]).index(total) + 1, effort=1.0, effort_unit="sums")
    return Answer(total, effort=1.0, effort_unit="sums")


def solve_text(text: str) -> str:
    """Answer a toy text prompt the way a chatty model would (free text)."""
    m = re.search(r"What is (\d+) \+ (\d+)\?", text)
    if m is None:
        return "I cannot tell."
    total = int(m.group(1)) + int(m.group(2))
    if "Choices:" in text:
        nums = re.findall(r"^(\d+)\. (\d+)$", text, flags=re.M)
        for k, c in nums:
            if int(c) == total:
                return f"Let me think. {m.group(1)} plus {m.group(2)} is {total}, option **{k}**."
    return f"Adding {m.group(1)} and {m.group(2)}... The answer is {total}."


class ToySolver:
    """An object solver with options (for ``python:`` specs naming a class)."""

    medium = "structured"

    def __init__(self, *, seed: int = 0, wrong_every: int = 0):
        self.seed = seed
        self.wrong_every = wrong_every
        self.calls = 0

    def solve(self, view: Any, mode: str) -> Answer:
        self.calls += 1
        ans = solve_structured(view, mode)
        if self.wrong_every and self.calls % self.wrong_every == 0 and mode == "generate":
            return Answer(ans.answer + 1, effort=2.0, effort_unit="sums")
        return ans


def null_solve(view: Any, mode: str) -> int:
    """A solver doing nothing (for overhead measurements): always answers 1."""
    return 1


def make_study(root: Any, solvers: str = "", *, n: int = 12, name: str = "toystudy") -> Any:
    """Write a toy study.toml (with ``solvers``, TOML text) under ``root``; return the Study."""
    from pathlib import Path

    from twofold.study import load_study

    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(
        f"""[study]
name = "{name}"
seed = 1
[bank]
path = "bank"
[bank.spec]
seed = 3
[bank.spec.families.toy]
n = {n}
modes = ["generate", "select"]
"""
        + solvers,
        encoding="utf-8",
    )
    return load_study(root)


class StopAfter:
    """Solves toy items; raises KeyboardInterrupt (a simulated Ctrl-C) on the ``stop``-th call
    counted over all instances since ``StopAfter.calls`` was last reset to 0."""

    medium = "structured"
    calls = 0

    def __init__(self, *, seed: int = 0, stop: int = 5, sleep: float = 0.0):
        self.stop, self.sleep = stop, sleep

    def solve(self, view: Any, mode: str) -> Answer:
        import time

        StopAfter.calls += 1
        if StopAfter.calls == self.stop:
            raise KeyboardInterrupt
        # a pause from the environment slows a run down without changing its configuration
        time.sleep(self.sleep or float(os.environ.get("TWOFOLD_TOY_SLEEP", "0")))
        return solve_structured(view, mode)


class Faulty:
    """Raises on every third call, answers garbage on every fifth, sleeps when asked."""

    medium = "structured"

    def __init__(self, *, seed: int = 0, sleep_every: int = 0, sleep: float = 0.0):
        self.calls, self.sleep_every, self.sleep = 0, sleep_every, sleep

    def solve(self, view: Any, mode: str) -> Any:
        import time

        self.calls += 1
        if self.calls % 3 == 0:
            raise RuntimeError("boom")
        if self.calls % 5 == 0:
            return {"answer": "not a number"}
        if self.sleep_every and self.calls % self.sleep_every == 0:
            time.sleep(self.sleep)
        return solve_structured(view, mode)
