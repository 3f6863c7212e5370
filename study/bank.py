"""Banks: versioned sets of items stored as a folder (``items.jsonl`` + ``bank.json``).

Loading validates every record against the item schema and the family registry and recomputes the
bank hash; writing goes to a temporary folder renamed into place, so a failed write leaves nothing.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import hashlib
import json
import os
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Any

from ._io import atomic_folder, read_json_lines
from ._version import twofold_version
from .checks import fail, parse_json
from .exceptions import BankError, ItemError
from .families import get_family
from .item import Item, content_id

__all__ = ["BANK_FORMAT", "Bank", "bank_hash", "load_bank", "write_bank"]

BANK_FORMAT = "twofold-bank/1"
ITEMS_FILE = "items.jsonl"
META_FILE = "bank.json"


def _validated_marker(content_hash: str, versions: dict[str, str]) -> Path:
    """Where a bank whose items passed every family check is remembered.

    ``$TWOFOLD_CACHE_DIR``, else ``$XDG_CACHE_HOME/twofold``, else ``~/.cache/twofold``; the
    name joins the items' content hash with the family versions and the twofold version.
    """
    base = os.environ.get("TWOFOLD_CACHE_DIR")
    if not base:
        xdg = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
        base = os.path.join(xdg, "twofold")
    key = json.dumps([content_hash, sorted(versions.items()), twofold_version()])
    digest = hashlib.sha256(key.encode()).hexdigest()[:32]
    return Path(base) / "checked-banks" / digest


def _touch(marker: Path) -> None:
    try:
        marker.parent.mkdir(parents=True, exist_ok=True)
        marker.touch()
    except OSError:  # a read-only home only costs the checks next time
        pass


def bank_hash(items: Iterable[Item]) -> str:
    """SHA-256 (hex) over the canonical records, one per line, sorted by item id.

    Order-independent: the same set of items always has the same hash.
    """
    h = hashlib.sha256()
    for line in sorted(it.to_json() for it in items):
        h.update(line.encode("utf-8"))
        h.update(b"\n")
    return h.hexdigest()


@dataclasses.dataclass(frozen=True)
class Bank:
    """A versioned set of items and its metadata.

    Attributes
    ----------
    items : tuple of Item
        In file order.
    meta : dict
        The content of ``bank.json`` (``bank_hash``, ``families``, ``spec``, ``seed``...).
    path : Path or None
        The folder the bank was loaded from or written to.
    """

    items: tuple[Item, ...]
    meta: dict[str, Any]
    path: Path | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "_index", {it.id: it for it in self.items})

    @property
    def hash(self) -> str:
        """The bank hash (see :func:`bank_hash`)."""
        return str(self.meta["bank_hash"])

    def __len__(self) -> int:
        return len(self.items)

    def __iter__(self) -> Iterator[Item]:
        return iter(self.items)

    def __contains__(self, item_id: object) -> bool:
        return item_id in self._index  # type: ignore[attr-defined]

    def __getitem__(self, item_id: str) -> Item:
        try:
            return self._index[item_id]  # type: ignore[attr-defined,no-any-return]
        except KeyError:
            raise fail(
                "item",
                item_id,
                f"an item id of this bank ({len(self)} items, e.g. "
                f"{self.items[0].id if self.items else 'none'})",
                error=BankError,
            ) from None

    def families(self) -> list[str]:
        """Families present, sorted."""
        return sorted({it.family for it in self.items})

    @classmethod
    def from_items(
        cls,
        items: Iterable[Item],
        *,
        spec: dict[str, Any] | None = None,
        seed: int | None = None,
        generation: dict[str, Any] | None = None,
        created: str | None = None,
    ) -> Bank:
        """Build a bank (with fresh metadata) from items."""
        items = tuple(items)
        fams: dict[str, dict[str, Any]] = {}
        for it in items:
            f = fams.setdefault(it.family, {"version": it.family_version, "n_items": 0})
            f["n_items"] += 1
        if created is None:
            epoch = os.environ.get("SOURCE_DATE_EPOCH")
            now = (
                _dt.datetime.fromtimestamp(int(epoch), _dt.UTC)
                if epoch
                else _dt.datetime.now(_dt.UTC)
            )
            created = now.replace(microsecond=0).isoformat()
        meta = {
            "format": BANK_FORMAT,
            "bank_hash": bank_hash(items),
            "n_items": len(items),
            "families": dict(sorted(fams.items())),
            "seed": seed,
            "spec": spec or {},
            "generation": generation or {},
            "created": created,
            "twofold_version": twofold_version(),
        }
        return cls(items=items, meta=meta)


def write_bank(bank: Bank, path: str | os.PathLike[str], *, overwrite: bool = False) -> Bank:
    """Write ``bank`` to folder ``path`` atomically and return it with ``path`` set.

    The folder is assembled under a temporary name beside ``path`` and renamed into place; an
    existing folder is replaced only with ``overwrite=True``.
    """
    dest = Path(path)
    if dest.exists() and not overwrite:
        raise BankError(
            f"{dest}: folder exists; choose another output folder or pass overwrite.",
            where=str(dest),
        )
    with atomic_folder(dest) as tmp:
        with open(tmp / ITEMS_FILE, "w", encoding="utf-8", newline="\n") as fh:
            for it in bank.items:
                fh.write(it.to_json())
                fh.write("\n")
            fh.flush()
            os.fsync(fh.fileno())
        with open(tmp / META_FILE, "w", encoding="utf-8", newline="\n") as fh:
            json.dump(bank.meta, fh, indent=2, sort_keys=False, ensure_ascii=False)
            fh.write("\n")
            fh.flush()
            os.fsync(fh.fileno())
    return dataclasses.replace(bank, path=dest)


def load_bank(path: str | os.PathLike[str], *, check_families: bool = True) -> Bank:
    """Load and fully validate a bank folder.

    Every line of ``items.jsonl`` is parsed, checked against the item schema and its family, and
    the bank hash is recomputed and compared with ``bank.json``.

    Raises
    ------
    BankError
        Missing files, a tampered hash, duplicate ids.
    ItemError
        A malformed record: ``items.jsonl line 17: field 'family': got 'matrix'; accepted: ...``.
    """
    folder = Path(path)
    if not folder.is_dir():
        raise BankError(
            f"{folder}: not a bank folder (expected a folder holding {ITEMS_FILE} and "
            f"{META_FILE}).",
            where=str(folder),
        )
    meta_path, items_path = folder / META_FILE, folder / ITEMS_FILE
    for p in (meta_path, items_path):
        if not p.is_file():
            raise BankError(
                f"{folder}: {p.name} is missing; a bank folder holds {ITEMS_FILE} and {META_FILE}.",
                where=str(p),
            )
    meta = parse_json(meta_path.read_bytes(), where=META_FILE, error=BankError)
    if not isinstance(meta, dict) or meta.get("format") != BANK_FORMAT:
        got = meta.get("format") if isinstance(meta, dict) else meta
        raise fail("format", got, BANK_FORMAT, where=META_FILE, error=BankError)
    items: list[Item] = []
    checks: list[tuple[Item, str, Any]] = []
    seen: dict[str, int] = {}
    for lineno, where, rec in read_json_lines(items_path, name=ITEMS_FILE, error=ItemError):
        item = Item.from_record(rec, where=where)
        if check_families:
            fam = get_family(item.family, where=where, error=ItemError)
            if content_id(fam.prefix, rec) != item.id:
                raise fail(
                    "id",
                    item.id,
                    f"{content_id(fam.prefix, rec)} (the id is a hash of the record's content)",
                    where=where,
                    error=ItemError,
                )
            checks.append((item, where, fam))
        if item.id in seen:
            raise BankError(
                f"{where}: item id {item.id} already on line {seen[item.id]}.",
                where=where,
                field="id",
            )
        seen[item.id] = lineno
        items.append(item)
    actual = bank_hash(items) if items else ""
    if checks:
        # The family checks (rendering, scoring, the generator's validity checks) cost up to a
        # few ms an item; they are remembered per bank content and family versions, so a bank
        # is checked in full once per machine, and again whenever a byte of an item changes.
        versions = {fam.name: fam.version for _, _, fam in checks}
        marker = _validated_marker(actual, versions)
        if not marker.exists():
            for item, where, fam in checks:
                fam.validate_item(item, where=where, deep=True)
            _touch(marker)
    if not items:
        raise BankError(
            f"{ITEMS_FILE}: field 'items': got 0 items; accepted: a bank of at least one item "
            "(generate it again from its spec).",
            where=ITEMS_FILE,
            field="items",
        )
    if meta.get("bank_hash") != actual:
        raise BankError(
            f"{META_FILE}: field 'bank_hash': got {meta.get('bank_hash')!r}; the items "
            f"hash to {actual!r}. The bank was changed after it was written; "
            "regenerate it or restore the original files.",
            where=META_FILE,
            field="bank_hash",
        )
    return Bank(items=tuple(items), meta=meta, path=folder)
