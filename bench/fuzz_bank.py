"""Fuzz the bank loader: random mutations of real item records, loaded as one-item banks.

Each case takes one record of a generated bank (every family), applies one random mutation
(bytes or structure: a field removed, replaced by junk of another type, NaN/Infinity, deep
nesting, bad UTF-8, a cut line...), optionally recomputes the content id and the bank hash (so
the family's own checks are reached, not only the id check), writes a one-item bank and loads it.

Printed counts (targets in brackets):

- uncaught: ``load_bank`` raised something other than a twofold error             [0]
- broken after load: a loaded item failed to render (text, structured) or to score its
  answer and a typical wrong response                                            [0]
- refused / loaded: how many cases ended each way (for scale)

Usage: ``python bench/fuzz_bank.py [--cases 10000] [--seed 1] [--pictures]``
(``--pictures`` also draws every loaded item; slow).
"""

from __future__ import annotations

import argparse
import collections
import copy
import json
import random
import tempfile
import time
import traceback
from pathlib import Path
from typing import Any

from twofold.study import generate_bank, get_family, parse_spec, render
from twofold.study.bank import Bank, load_bank, write_bank
from twofold.study.exceptions import ResponseError, TwofoldError
from twofold.study.item import Item, canonical_json, content_id

SPEC = {
    "seed": 11,
    "families": {
        "strings": {"n": 6, "modes": ["generate"]},
        "matrices": {"n": 6, "modes": ["select", "generate"]},
        "contrast": {"n": 6, "modes": ["select"]},
        "grids": {"n": 6, "modes": ["generate"]},
    },
}

invalid_wrong = [0]  # typical wrong responses the family refuses to score (logged as invalid)

JUNK: list[Any] = [
    None,
    True,
    0,
    -1,
    2**70,
    1.5,
    "",
    "x",
    "\u0000",
    [],
    [None],
    {},
    {"a": 1},
    [[[]]],
    "🙂" * 3,
]


def _paths(obj: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(obj, dict):
        for k, v in obj.items():
            out += _paths(v, (*prefix, k))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            out += _paths(v, (*prefix, i))
    return out


def _set(obj: Any, path: tuple, value: Any, *, delete: bool = False) -> Any:
    if not path:
        return value
    parent = obj
    for p in path[:-1]:
        parent = parent[p]
    if delete:
        del parent[path[-1]]
    else:
        parent[path[-1]] = value
    return obj


def mutate(rec: dict[str, Any], rng: random.Random) -> tuple[str, bytes]:
    """One random mutation; returns its kind and the record's line (bytes, no newline)."""
    rec = copy.deepcopy(rec)
    kind = rng.choice(
        ["junk", "junk", "junk", "delete", "swap", "number", "deep", "bytes", "cut", "constant"]
    )
    paths = [p for p in _paths(rec) if p]
    path = rng.choice(paths)
    if kind == "junk":
        rec = _set(rec, path, copy.deepcopy(rng.choice(JUNK)))
    elif kind == "delete":
        rec = _set(rec, path, None, delete=True)
    elif kind == "swap":  # another field's value in this place
        other = rng.choice(paths)
        src: Any = rec
        for p in other:
            src = src[p]
        rec = _set(rec, path, copy.deepcopy(src))
    elif kind == "number":
        rec = _set(rec, path, rng.choice([0, 1, -7, 10**6, 0.5, -0.0, 3, 99]))
    elif kind == "deep":
        rec = _set(rec, path, _nest(rng.randint(20, 200)))
    if rng.random() < 0.6 and isinstance(rec, dict) and isinstance(rec.get("id"), str):
        prefix = rec["id"].split("-")[0]
        try:
            rec["id"] = content_id(prefix, rec)  # reach the family's checks, not only the id's
        except (TypeError, ValueError):
            pass
    try:
        line = json.dumps(rec, ensure_ascii=False).encode("utf-8")
    except (TypeError, ValueError, RecursionError):
        line = b"{}"
    if kind == "bytes":
        k = rng.randrange(len(line) + 1)
        line = line[:k] + bytes([rng.choice([0xFF, 0xC3, 0x80, 0x00, 0x22, 0x5C])]) + line[k:]
    elif kind == "cut":
        line = line[: rng.randrange(len(line))]
    elif kind == "constant":
        token = rng.choice([b"NaN", b"Infinity", b"-Infinity"])
        numbers = [i for i, ch in enumerate(line) if chr(ch).isdigit()]
        if numbers:
            k = rng.choice(numbers)
            line = line[:k] + token + line[k + 1 :]
    return kind, line


def _nest(depth: int) -> Any:
    value: Any = 1
    for _ in range(depth):
        value = [value]
    return value


def _write_one(folder: Path, line: bytes, meta: dict[str, Any]) -> None:
    (folder / "items.jsonl").write_bytes(line + b"\n")
    try:
        item = Item.from_record(json.loads(line), validate=False)
        from twofold.study.bank import bank_hash

        h = bank_hash([item])
    except Exception:  # noqa: BLE001 - an unparsable line keeps the old hash; load refuses it
        h = "0" * 64
    (folder / "bank.json").write_text(json.dumps({**meta, "bank_hash": h}))


def use(item: Item, *, pictures: bool) -> None:
    """Everything a study does with a loaded item: render each medium, score each mode."""
    import numpy as np

    fam = get_family(item.family)
    for mode in item.modes:
        render(item, "text", mode)
        render(item, "structured", mode)
        if pictures:
            render(item, "picture", mode)
        fam.score(item, fam.correct_response(item, mode), mode)
        try:
            wrong, _ = fam.sample_error(item, mode, np.random.default_rng(1))
        except Exception as err:  # noqa: BLE001
            if type(err).__name__ != "Rejected":
                raise
        else:
            try:
                fam.score(item, wrong, mode)
            except ResponseError:
                # every runner logs this as an ``invalid`` trial: handled, counted apart
                invalid_wrong[0] += 1


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=10_000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--pictures", action="store_true")
    args = ap.parse_args()
    rng = random.Random(args.seed)
    bank: Bank = generate_bank(parse_spec(SPEC))
    records = [it.to_record() for it in bank]
    counts: collections.Counter[str] = collections.Counter()
    where_uncaught: collections.Counter[str] = collections.Counter()
    where_broken: collections.Counter[str] = collections.Counter()
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        folder = write_bank(Bank.from_items(bank.items[:1]), Path(tmp) / "bank").path
        assert folder is not None
        meta = json.loads((folder / "bank.json").read_text())
        # reference measured in the same run: the unmutated records load and work
        for rec in records:
            _write_one(folder, canonical_json(rec).encode(), meta)
            use(load_bank(folder).items[0], pictures=args.pictures)
        t_ref = time.perf_counter() - t0
        t0 = time.perf_counter()
        for _ in range(args.cases):
            rec = rng.choice(records)
            kind, line = mutate(rec, rng)
            _write_one(folder, line, meta)
            try:
                loaded = load_bank(folder)
            except TwofoldError:
                counts["refused"] += 1
                continue
            except Exception as err:  # noqa: BLE001
                counts["uncaught"] += 1
                tb = traceback.extract_tb(err.__traceback__)[-1]
                where_uncaught[f"{type(err).__name__} at {Path(tb.filename).name}:{tb.lineno}"] += 1
                continue
            counts["loaded"] += 1
            try:
                use(loaded.items[0], pictures=args.pictures)
            except Exception as err:  # noqa: BLE001
                counts["broken"] += 1
                tb = traceback.extract_tb(err.__traceback__)[-1]
                where_broken[
                    f"{kind}: {type(err).__name__} at {Path(tb.filename).name}:{tb.lineno}"
                ] += 1
    dt = time.perf_counter() - t0
    print(f"cases: {args.cases} (seed {args.seed}), {len(records)} source records, 4 families")
    print(f"uncaught exceptions: {counts['uncaught']}  (target 0)")
    print(f"loaded items that fail to render or score: {counts['broken']}  (target 0)")
    print(f"refused with a twofold error: {counts['refused']}; loaded: {counts['loaded']}")
    print(
        f"typical wrong responses refused as unscorable (a runner logs them as invalid): "
        f"{invalid_wrong[0]}"
    )
    print(
        f"time: {dt:.1f} s, {1000 * dt / max(args.cases, 1):.2f} ms per case; reference: the "
        f"{len(records)} intact records load and work in {1000 * t_ref / len(records):.2f} ms each"
    )
    for label, table in (("uncaught", where_uncaught), ("broken", where_broken)):
        for place, n in table.most_common(10):
            print(f"  {label}: {n:5d}  {place}")


if __name__ == "__main__":
    main()
