"""The item record: one puzzle, its answer, its factors and where it came from.

An :class:`Item` is immutable. Its canonical JSON form (sorted keys, no spaces, UTF-8) is what the
item id and the bank hash are computed from, so the same content always gets the same id.
"""

from __future__ import annotations

import copy
import dataclasses
import hashlib
import json
from collections.abc import Mapping
from functools import lru_cache
from importlib import resources
from typing import TYPE_CHECKING, Any

from .checks import fail
from .exceptions import ItemError

if TYPE_CHECKING:  # pragma: no cover
    import jsonschema

__all__ = [
    "MODES",
    "Item",
    "canonical_json",
    "content_id",
    "item_schema",
    "validate_record",
]

#: The response modes: the respondent produces the answer, or picks one of the choices.
MODES = ("generate", "select")

FIELDS = (
    "id",
    "family",
    "family_version",
    "params",
    "factors",
    "modes",
    "stimulus",
    "answer",
    "accepted",
    "choices",
    "distractor_scheme",
    "variant_of",
    "variant_operator",
    "seed",
)


def canonical_json(obj: Any) -> str:
    """Serialise ``obj`` canonically: sorted keys, no whitespace, UTF-8, no NaN.

    Tuples become lists; the result is what hashes are computed over.
    """
    return json.dumps(
        obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )


def content_id(prefix: str, record: Mapping[str, Any]) -> str:
    """Item id: ``<prefix>-<12 hex digits of SHA-256 of the canonical record without 'id'>``.

    The per-item ``seed`` is left out too, so two generators that make the same puzzle make the
    same id (and the audit finds the duplicate).
    """
    body = {k: v for k, v in record.items() if k not in ("id", "seed")}
    digest = hashlib.sha256(canonical_json(body).encode("utf-8")).hexdigest()
    return f"{prefix}-{digest[:12]}"


@lru_cache(maxsize=1)
def item_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) that every item record satisfies."""
    text = resources.files("twofold.study").joinpath("schema/item.schema.json").read_text("utf-8")
    return json.loads(text)


@lru_cache(maxsize=1)
def _validator() -> jsonschema.protocols.Validator:
    import jsonschema  # loaded on first validation, not at ``import twofold.study``

    schema = item_schema()
    cls = jsonschema.validators.validator_for(schema)
    return cls(schema)


def _path(error: jsonschema.ValidationError) -> str:
    parts = [str(p) for p in error.absolute_path]
    return ".".join(parts) if parts else "(record)"


def validate_record(record: Any, *, where: str | None = None) -> None:
    """Validate a raw record against the item schema.

    Raises
    ------
    ItemError
        Naming the first offending field (in schema order), what was found and what is accepted.
    """
    if not isinstance(record, dict):
        raise fail("(record)", record, "a JSON object", where=where, error=ItemError)
    errors = sorted(
        _validator().iter_errors(record), key=lambda e: (list(e.absolute_path), e.validator)
    )
    if not errors:
        return
    err = errors[0]
    if err.validator == "required":
        missing = [f for f in FIELDS if f not in record]
        field = missing[0] if missing else _path(err)
        msg = f"field '{field}' is missing; every item record needs: {', '.join(FIELDS)}."
        raise ItemError(f"{where}: {msg}" if where else msg, where=where, field=field)
    if err.validator == "additionalProperties":
        extra = sorted(set(record) - set(FIELDS))
        field = extra[0] if extra else _path(err)
        raise fail(
            field,
            record.get(field),
            "only the fields " + ", ".join(FIELDS),
            where=where,
            error=ItemError,
        )
    field = _path(err)
    schema = err.schema if isinstance(err.schema, dict) else {}
    accepted = schema.get("description") or _accepted_from(err)
    raise fail(field, err.instance, accepted, where=where, error=ItemError)


def _accepted_from(err: jsonschema.ValidationError) -> str:
    v, val = err.validator, err.validator_value
    if v == "type":
        types = val if isinstance(val, list) else [val]
        return "a value of type " + " or ".join(types)
    if v == "enum":
        return "one of " + ", ".join(map(str, val))
    if v == "pattern":
        return f"a string matching {val}"
    if v in ("minimum", "minItems", "minLength"):
        return f"{v} {val}"
    return f"a value satisfying '{v}: {val}'"


@dataclasses.dataclass(frozen=True, eq=True)
class Item:
    """One puzzle.

    Attributes mirror the item record (see ``item.schema.json``). Payload fields (``params``,
    ``stimulus``, ``answer``, ``choices``...) are plain JSON values; treat them as read-only.
    Build items with :meth:`Item.create`, which computes the id, or :meth:`Item.from_record`.
    """

    id: str
    family: str
    family_version: str
    params: dict[str, Any]
    factors: dict[str, Any]
    modes: tuple[str, ...]
    stimulus: dict[str, Any]
    answer: Any
    accepted: tuple[dict[str, Any], ...] = ()
    choices: tuple[Any, ...] | None = None
    distractor_scheme: str | None = None
    variant_of: str | None = None
    variant_operator: str | None = None
    seed: int = 0

    # -- construction -------------------------------------------------------------------------
    @classmethod
    def create(cls, *, prefix: str, **fields: Any) -> Item:
        """Build an item, normalising payloads to plain JSON and computing its content id."""
        record = {f: fields.get(f) for f in FIELDS if f != "id"}
        record["accepted"] = list(fields.get("accepted") or [])
        record["modes"] = list(fields.get("modes") or ["generate"])
        if record["choices"] is not None:
            record["choices"] = list(record["choices"])
        seed = record.pop("seed", 0)
        # one canonical encoding serves both: plain JSON values only, and the content hash
        # (the same text content_id() would hash: the record without id and seed)
        text = canonical_json(record)
        record = json.loads(text)
        record["seed"] = json.loads(canonical_json(0 if seed is None else seed))
        digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
        record["id"] = f"{prefix}-{digest[:12]}"
        return cls._from_own(record)  # fresh from json.loads: nothing shared, no copy needed

    @classmethod
    def from_record(
        cls, record: Mapping[str, Any], *, validate: bool = True, where: str | None = None
    ) -> Item:
        """Build an item from a raw record (as read from ``items.jsonl``)."""
        if validate:
            validate_record(record, where=where)
        return cls._from_own(copy.deepcopy(dict(record)))

    @classmethod
    def _from_own(cls, rec: dict[str, Any]) -> Item:
        """Build from a record dict the item may own (no other reference to its payloads)."""
        choices = rec.get("choices")
        return cls(
            id=rec["id"],
            family=rec["family"],
            family_version=rec["family_version"],
            params=rec["params"],
            factors=rec["factors"],
            modes=tuple(rec["modes"]),
            stimulus=rec["stimulus"],
            answer=rec["answer"],
            accepted=tuple(rec.get("accepted") or ()),
            choices=None if choices is None else tuple(choices),
            distractor_scheme=rec.get("distractor_scheme"),
            variant_of=rec.get("variant_of"),
            variant_operator=rec.get("variant_operator"),
            seed=int(rec.get("seed", 0)),
        )

    # -- serialisation ------------------------------------------------------------------------
    def to_record(self) -> dict[str, Any]:
        """The item as a plain JSON-ready dict in schema field order (deep copy)."""
        return copy.deepcopy(self._record_view())

    def to_json(self) -> str:
        """Canonical JSON of the record (one line of ``items.jsonl``)."""
        return canonical_json(self._record_view())

    def _record_view(self) -> dict[str, Any]:
        # the record sharing this item's payloads: only for read-only use such as serialising
        return {
            "id": self.id,
            "family": self.family,
            "family_version": self.family_version,
            "params": self.params,
            "factors": self.factors,
            "modes": list(self.modes),
            "stimulus": self.stimulus,
            "answer": self.answer,
            "accepted": list(self.accepted),
            "choices": None if self.choices is None else list(self.choices),
            "distractor_scheme": self.distractor_scheme,
            "variant_of": self.variant_of,
            "variant_operator": self.variant_operator,
            "seed": self.seed,
        }

    def replace(self, *, prefix: str, **changes: Any) -> Item:
        """A new item with ``changes`` applied and its id recomputed."""
        rec = self.to_record()
        rec.pop("id")
        rec.update(changes)
        return Item.create(prefix=prefix, **rec)

    # -- conveniences ---------------------------------------------------------------------------
    @property
    def answer_choice(self) -> int | None:
        """1-based number of the choice equal to the answer, or ``None`` without choices."""
        if self.choices is None:
            return None
        target = canonical_json(self.answer)
        for k, choice in enumerate(self.choices, start=1):
            if canonical_json(choice) == target:
                return k
        return None

    def __hash__(self) -> int:  # payloads are dicts; the id already is a content hash
        return hash(self.id)
