"""The family interface: what every item family provides, and the shared default behaviour.

A family is one module that subclasses :class:`Family` and registers an instance with
:func:`twofold.study.families.register`. Everything else (banks, audits, renderers, solvers,
runners, analysis) reaches a family only through this interface, so adding a family is adding a
module.
"""

from __future__ import annotations

import abc
import dataclasses
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any, ClassVar, Literal

import numpy as np

from ..checks import fail
from ..exceptions import ResponseError, SpecError
from ..item import Item, canonical_json

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

    from ..scene import Scene

__all__ = ["Family", "ParamSpec", "Rejected", "Score"]


class Rejected(Exception):  # noqa: N818 - a control-flow signal, not an error for users
    """Raised by a generator or variant operator when a candidate item is invalid.

    The bank generator catches it, counts ``reason`` and tries again with a fresh seed.
    """

    def __init__(self, reason: str):
        super().__init__(reason)
        self.reason = reason


@dataclasses.dataclass(frozen=True)
class ParamSpec:
    """One generator parameter, as a generation spec may set it.

    Attributes
    ----------
    name : str
        Parameter name as written in the spec.
    kind : {"int", "float", "choice", "bool", "multi"}
        ``int``/``float`` take numbers in ``[low, high]``; ``choice`` takes one of ``options``;
        ``bool`` takes true/false; ``multi`` takes a non-empty list drawn from ``options`` (the list
        is the value itself, not levels).
    default : Any
        Value used when the spec does not set the parameter.
    doc : str
        One line saying what the parameter controls.
    """

    name: str
    kind: Literal["int", "float", "choice", "bool", "multi"]
    default: Any
    doc: str
    low: float | None = None
    high: float | None = None
    options: tuple[Any, ...] = ()

    def accepted(self) -> str:
        if self.kind == "int":
            return f"an integer from {self.low:g} to {self.high:g} (or a list of such levels)"
        if self.kind == "float":
            return f"a number from {self.low:g} to {self.high:g} (or a list of such levels)"
        if self.kind == "bool":
            return "true or false (or a list of both)"
        opts = ", ".join(map(str, self.options))
        if self.kind == "multi":
            return f"a non-empty list of: {opts}"
        return f"one of {opts} (or a list of such levels)"

    def check_value(self, value: Any, *, where: str) -> Any:
        """Check one value (not a list of levels) and return it."""
        ok = False
        if self.kind == "int":
            ok = isinstance(value, int) and not isinstance(value, bool)
            ok = ok and self.low <= value <= self.high  # type: ignore[operator]
        elif self.kind == "float":
            ok = isinstance(value, int | float) and not isinstance(value, bool)
            ok = ok and self.low <= value <= self.high  # type: ignore[operator]
        elif self.kind == "bool":
            ok = isinstance(value, bool)
        elif self.kind == "choice":
            ok = value in self.options
        elif self.kind == "multi":
            ok = (
                isinstance(value, list)
                and len(value) > 0
                and all(v in self.options for v in value)
                and len(set(map(str, value))) == len(value)
            )
        if not ok:
            raise fail(self.name, value, self.accepted(), where=where, error=SpecError)
        return value

    def levels(self, raw: Any, *, where: str) -> list[Any]:
        """Interpret a spec entry as a list of levels and check each.

        A scalar is one level; a list is the levels; a table ``{min=, max=}`` is every integer
        in the range (``int`` parameters only). For ``multi`` parameters a list is one value.
        """
        if self.kind == "multi":
            return [
                self.check_value(list(raw) if isinstance(raw, list | tuple) else raw, where=where)
            ]
        if isinstance(raw, Mapping):
            if self.kind != "int" or set(raw) != {"min", "max"}:
                raise fail(
                    self.name,
                    dict(raw),
                    "a range table {min=, max=} for integer parameters; " + self.accepted(),
                    where=where,
                    error=SpecError,
                )
            lo, hi = raw["min"], raw["max"]
            self.check_value(lo, where=where)
            self.check_value(hi, where=where)
            if lo > hi:
                raise fail(
                    self.name, dict(raw), "a range with min <= max", where=where, error=SpecError
                )
            return list(range(lo, hi + 1))
        if isinstance(raw, list | tuple):
            if not raw:
                raise fail(
                    self.name, raw, "a non-empty list of levels", where=where, error=SpecError
                )
            return [self.check_value(v, where=where) for v in raw]
        return [self.check_value(raw, where=where)]


@dataclasses.dataclass(frozen=True)
class Score:
    """The verdict on one response.

    Attributes
    ----------
    correct : bool
        Whether the response is the answer or one of the accepted answers.
    error_type : str or None
        The family's error type for a wrong response; ``None`` when correct.
    label : str or None
        ``"intended"`` for the answer, the accepted answer's label, or ``None`` when wrong.
    """

    correct: bool
    error_type: str | None
    label: str | None


class Family(abc.ABC):
    """Base class of an item family.

    Subclasses set the class attributes and implement the abstract methods. Generators receive a
    numpy ``Generator`` seeded per item, so the same parameters and seed give the same item.
    """

    #: family name as used in specs and item records
    name: ClassVar[str]
    #: three lowercase letters heading every item id of the family
    prefix: ClassVar[str]
    #: generator version, stored on every item; bump when the same seed would give another item
    version: ClassVar[str]
    #: response modes the family supports
    modes: ClassVar[tuple[str, ...]] = ("generate",)
    #: generator parameters a spec may set
    params: ClassVar[tuple[ParamSpec, ...]] = ()
    #: names of the difficulty factors stored on every item
    factors: ClassVar[tuple[str, ...]] = ()
    #: distractor schemes for select mode: name -> one-line description
    distractor_schemes: ClassVar[dict[str, str]] = {}
    #: variant operators: name -> one-line description
    variant_operators: ClassVar[dict[str, str]] = {}
    #: error types: name -> one-line description; always includes "other"
    error_types: ClassVar[dict[str, str]] = {"other": "any other wrong response"}
    #: number of choices in select mode unless the spec says otherwise
    default_choices: ClassVar[int] = 8
    #: the form of a generate-mode answer, stated in prompts and export manifests
    answer_format: ClassVar[str] = ""
    #: name of the built-in solver that solves this family's items (``None``: none is built in);
    #: the multi-family ``reference`` solver dispatches to it
    reference_solver: ClassVar[str | None] = None
    #: a person's typical response time on an item of middling difficulty, in milliseconds
    #: (the base of simulated response times)
    typical_rt_ms: ClassVar[float] = 10000.0

    # -- generation ---------------------------------------------------------------------------
    @abc.abstractmethod
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
        """Make one item from fully specified ``params``; raise :class:`Rejected` if invalid.

        Validity checks (answer uniqueness under the family's rule space, ...) run here.
        ``seed`` is stored on the item; ``rng`` is already seeded from it.
        """

    @abc.abstractmethod
    def vary(self, item: Item, operator: str, rng: np.random.Generator) -> Item:
        """Make an isomorph of ``item`` with ``operator``; raise :class:`Rejected` if it cannot.

        The result has ``variant_of=item.id`` and ``variant_operator=operator`` and its answer,
        accepted answers and choices recomputed.
        """

    def check(self, item: Item) -> list[str]:
        """Re-run the validity checks on a stored item; return problems (empty when valid)."""
        return []

    def validate_item(self, item: Item, *, where: str | None = None, deep: bool = False) -> None:
        """Check that a stored item is usable before anything else touches it.

        Runs on every item :func:`~twofold.study.bank.load_bank` reads: the text and structured
        renderings in each of the item's modes, and the scoring of its answer (which must score
        correct) and of one typical wrong response. With ``deep=True`` the family's own
        :meth:`check` (the generator's validity checks, e.g. answer uniqueness by search) runs
        first; that costs milliseconds per item, so loading leaves it to the audit. A family
        whose stimulus needs more (a scene drawn for participants) overrides this and calls
        ``super().validate_item``. Any failure becomes one :class:`ItemError`.
        """
        from ..exceptions import ItemError

        prefix = f"{where}: " if where else ""
        try:
            problems = list(self.check(item)) if deep else []
            for mode in item.modes:
                self.render_text(item, mode)
                self.render_structured(item, mode)
                sc = self.score(item, self.correct_response(item, mode), mode)
                if sc.correct is not True:
                    problems.append(f"its answer does not score correct in {mode} mode")
                try:
                    wrong, _ = self.sample_error(item, mode, np.random.default_rng(item.seed))
                except Rejected:
                    continue
                self.score(item, wrong, mode)
        except Exception as err:  # junk payloads fail deep inside the family code
            reason = f"{type(err).__name__}: {err}"
            problems = [reason if len(reason) <= 120 else reason[:117] + "..."]
        if problems:
            raise ItemError(
                f"{prefix}field 'stimulus': the {self.name} family cannot use item {item.id} "
                f"({problems[0]}); accepted: a record its family renders and scores "
                "(generate the bank again).",
                where=where,
                field="stimulus",
            )

    def default_params(self) -> dict[str, Any]:
        """Every parameter at its default."""
        return {p.name: p.default for p in self.params}

    # -- responses ----------------------------------------------------------------------------
    def normalize(self, item: Item, response: Any, mode: str) -> Any:
        """Bring a response into the canonical form compared with the answer.

        The default accepts a 1-based choice number in select mode and the raw value otherwise.
        Raise :class:`~twofold.study.exceptions.ResponseError` for a malformed response.
        """
        if mode == "select":
            n = len(item.choices or ())
            if isinstance(response, str) and response.strip().isdigit():
                response = int(response.strip())
            if (
                isinstance(response, bool)
                or not isinstance(response, int)
                or not 1 <= response <= n
            ):
                raise ResponseError(
                    f"item {item.id}: field 'response': got {response!r}; accepted: a choice "
                    f"number from 1 to {n}.",
                    field="response",
                )
            return response
        return response

    def correct_response(self, item: Item, mode: str) -> Any:
        """The response that scores correct: the answer's choice number in select mode (when the
        family selects among ``choices``), otherwise the answer itself."""
        if mode == "select" and item.choices is not None and item.answer_choice is not None:
            return item.answer_choice
        return item.answer

    def score(self, item: Item, response: Any, mode: str) -> Score:
        """Score a response: correct, or wrong with an error type."""
        resp = self.normalize(item, response, mode)
        if mode == "select":
            if resp == item.answer_choice:
                return Score(True, None, "intended")
            return Score(False, self.classify_error(item, resp, mode), None)
        key = canonical_json(resp)
        if key == canonical_json(item.answer):
            return Score(True, None, "intended")
        for acc in item.accepted:
            if key == canonical_json(acc["answer"]):
                return Score(True, None, acc["label"])
        return Score(False, self.classify_error(item, resp, mode), None)

    @abc.abstractmethod
    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        """Error type (a key of :attr:`error_types`) of a wrong, normalised response."""

    def sample_error(self, item: Item, mode: str, rng: np.random.Generator) -> tuple[Any, str]:
        """A plausible wrong response and its error type, for simulated respondents.

        The response is in the form :meth:`score` accepts; scoring it must give that error type.
        The default draws a wrong choice (:meth:`sample_wrong_choice`) in select mode when the
        item offers whole-item choices, and asks :meth:`sample_wrong_answer` otherwise.
        """
        if mode == "select" and item.choices is not None:
            return self.sample_wrong_choice(item, rng)
        return self.sample_wrong_answer(item, mode, rng)

    def sample_wrong_choice(self, item: Item, rng: np.random.Generator) -> tuple[int, str]:
        """A wrong choice number drawn uniformly from the item's choices, and its error type."""
        wrong = [k for k in range(1, len(item.choices or ()) + 1) if k != item.answer_choice]
        k = wrong[int(rng.integers(len(wrong)))]
        return k, self.classify_error(item, k, "select")

    def sample_wrong_answer(
        self, item: Item, mode: str, rng: np.random.Generator
    ) -> tuple[Any, str]:
        """A plausible wrong answer where no choices are offered (generate mode), and its type.

        Families override this (or :meth:`sample_error` itself); the default has none to give.
        """
        raise NotImplementedError(f"family {self.name}: no wrong {mode} answers to sample")

    def parse_text(self, item: Item, text: str, mode: str) -> Any:
        """Extract a response from free text (a language model's reply).

        The default handles select mode (the last choice number standing alone in the reply; a
        full stop after it may end the sentence);
        families override it for generate mode. Raise ResponseError when nothing usable is found.
        """
        import re

        if mode == "select":
            n = len(item.choices or ())
            hits = [
                int(m)
                for m in re.findall(r"(?<![\d.])(\d{1,2})(?!\d)(?!\.\d)", text)
                if 1 <= int(m) <= n
            ]
            if hits:
                return hits[-1]
            raise ResponseError(
                f"item {item.id}: no choice number from 1 to {n} found in reply.", field="response"
            )
        raise ResponseError(
            f"item {item.id}: family {self.name} cannot read a {mode} answer from text.",
            field="response",
        )

    # -- rendering ----------------------------------------------------------------------------
    @abc.abstractmethod
    def render_text(self, item: Item, mode: str) -> str:
        """A prompt a language model could answer, stating the expected answer format.

        Never reveals the answer.
        """

    @abc.abstractmethod
    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        """A JSON-ready view for symbolic solvers and for the participant screens.

        Never reveals the answer; includes the choices in select mode.
        """

    def scene(self, item: Item, mode: str) -> Scene:
        """What to draw for ``item`` in ``mode``, as plain primitives (see
        :mod:`twofold.study.scene`): the one description both the picture painter and the
        participant screens paint. Never shows the answer.

        The default shows the family's text prompt, wrapped, with a typed answer (generate) or
        numbered choices (select), so a new family can be shown before it draws anything.
        """
        from ..scene import DESIGN_BOX, Response, Scene, Text, wrap

        w, h = DESIGN_BOX
        size = 20.0
        body = wrap(self.render_text(item, mode), size, w - 40)
        # a long prompt makes a taller scene (a family with its own scene lays out its own)
        h = max(h, 1.5 * size * (body.count("\n") + 1) + 30)
        el = Text(20, h - 10, body, size, anchor="left", valign="top", role="prompt")
        if mode == "select":
            resp = Response("choose", {"n": len(item.choices or ())})
        else:
            resp = Response("type", {})
        return Scene(w, h, (el,), response=resp)

    def answer_scene(self, item: Item, mode: str, answer: Any) -> Scene:
        """``answer`` drawn the way the stimulus draws it (a choice, a grid, a panel, a string),
        for practice feedback and for the builder's live preview. The default writes it out."""
        from ..scene import Scene, Text

        text = str(answer)
        if mode == "select" and item.choices and isinstance(answer, int):
            if 1 <= answer <= len(item.choices):
                text = f"{answer}: {item.choices[answer - 1]}"
        size = 22.0
        width = max(200.0, 0.62 * size * len(text) + 20)
        return Scene(width, 60.0, (Text(width / 2, 30, text, size, role="answer"),))

    def draw(self, item: Item, mode: str, fig: Figure) -> None:
        """Paint the item's :meth:`scene` on an empty matplotlib figure (what pictures show)."""
        from ..render import paint_scene

        paint_scene(self.scene(item, mode), fig)

    def __repr__(self) -> str:
        return f"<family {self.name} v{self.version}>"
