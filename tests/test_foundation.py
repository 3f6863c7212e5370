"""The data contract: item records, schema, banks, specs and their errors."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest
from twofold.study import (
    BankError,
    ItemError,
    SpecError,
    generate_bank,
    load_bank,
    parse_spec,
    write_bank,
)
from twofold.study.item import Item, canonical_json, content_id, item_schema

SPEC = {
    "seed": 11,
    "families": {
        "strings": {"n": 6, "modes": ["generate"]},
        "matrices": {"n": 6, "modes": ["select"], "distractor_scheme": "one-off"},
    },
}


@pytest.fixture(scope="module")
def bank_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("bank") / "bank"
    write_bank(generate_bank(parse_spec(SPEC)), out)
    return out


def test_item_schema_is_valid_under_the_2020_12_meta_schema():
    # reference: SOURCES.md#json-schema — draft 2020-12 meta-schema, via jsonschema
    jsonschema.Draft202012Validator.check_schema(item_schema())
    assert item_schema()["$schema"] == "https://json-schema.org/draft/2020-12/schema"


def test_canonical_json_sorts_keys_and_drops_whitespace():
    assert canonical_json({"b": 1, "a": [1, 2], "c": "é"}) == '{"a":[1,2],"b":1,"c":"é"}'
    with pytest.raises(ValueError):
        canonical_json({"x": float("nan")})


def test_item_id_is_a_content_hash_with_family_prefix(bank_dir):
    bank = load_bank(bank_dir)
    for item in bank:
        rec = item.to_record()
        assert item.id == content_id(item.id[:3], rec)
        changed = dict(rec, factors={**rec["factors"], "extra": 1})
        assert content_id(item.id[:3], changed) != item.id
        # the per-item seed is not part of the content
        assert content_id(item.id[:3], dict(rec, seed=rec["seed"] + 1)) == item.id


def test_item_is_immutable(bank_dir):
    item = next(iter(load_bank(bank_dir)))
    with pytest.raises(AttributeError):
        item.family = "other"  # type: ignore[misc]
    assert Item.from_record(item.to_record()) == item


def test_same_spec_and_seed_give_identical_bank(tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    a = write_bank(generate_bank(parse_spec(SPEC)), tmp_path / "a")
    b = write_bank(generate_bank(parse_spec(SPEC)), tmp_path / "b")
    assert (tmp_path / "a/items.jsonl").read_bytes() == (tmp_path / "b/items.jsonl").read_bytes()
    assert (tmp_path / "a/bank.json").read_bytes() == (tmp_path / "b/bank.json").read_bytes()
    assert a.hash == b.hash
    other = generate_bank(parse_spec(dict(SPEC, seed=12)))
    assert other.hash != a.hash


def test_bank_round_trip_keeps_hash_and_items(bank_dir):
    bank = load_bank(bank_dir)
    assert len(bank) == 12
    assert bank.families() == ["matrices", "strings"]
    assert bank.meta["n_items"] == 12
    assert set(bank.meta["families"]) == {"matrices", "strings"}
    first = bank.items[0]
    assert bank[first.id] is first


def _corrupt(bank_dir: Path, tmp_path: Path, edit) -> Path:
    dest = tmp_path / "bad"
    dest.mkdir()
    lines = (bank_dir / "items.jsonl").read_text("utf-8").splitlines()
    lines = edit(lines)
    (dest / "items.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (dest / "bank.json").write_text((bank_dir / "bank.json").read_text("utf-8"), encoding="utf-8")
    return dest


def _edit_record(lineno: int, fn):
    def edit(lines):
        rec = json.loads(lines[lineno - 1])
        fn(rec)
        lines[lineno - 1] = json.dumps(rec)
        return lines

    return edit


@pytest.mark.parametrize(
    ("edit", "expected"),
    [
        (lambda ls: ls[:2] + ["{not json"] + ls[3:], "items.jsonl line 3: not valid JSON"),
        (
            _edit_record(2, lambda r: r.update(family="matrix")),
            "items.jsonl line 2: field 'family': got 'matrix'; accepted: one of ",
        ),
        (
            _edit_record(4, lambda r: r.pop("answer")),
            "items.jsonl line 4: field 'answer' is missing",
        ),
        (
            _edit_record(5, lambda r: r.update(seed="seven")),
            "items.jsonl line 5: field 'seed': got 'seven'; accepted: a value of type integer",
        ),
        (
            _edit_record(1, lambda r: r["factors"].update(tampered=True)),
            "items.jsonl line 1: field 'id'",
        ),
    ],
)
def test_bad_records_name_line_field_and_accepted_values(bank_dir, tmp_path, edit, expected):
    bad = _corrupt(bank_dir, tmp_path, edit)
    with pytest.raises(ItemError) as info:
        load_bank(bad)
    assert str(info.value).startswith(expected)


def test_tampered_bank_hash_is_refused(bank_dir, tmp_path):
    bad = _corrupt(bank_dir, tmp_path, lambda ls: ls[:-1])  # an item removed
    with pytest.raises(BankError, match="field 'bank_hash'"):
        load_bank(bad)


def test_known_family_names_are_listed_in_the_error():
    with pytest.raises(SpecError) as info:
        parse_spec({"families": {"matrix": {"n": 2}}})
    msg = str(info.value)
    assert "field 'family': got 'matrix'; accepted: one of " in msg
    assert "matrices" in msg and "strings" in msg


@pytest.mark.parametrize(
    ("family_spec", "field"),
    [
        ({"n": 0}, "'n'"),
        ({"n": 2, "modes": ["guess"]}, "'modes'"),
        ({"n": 2, "params": {"no_such": 3}}, "'params.no_such'"),
        ({"n": 2, "variants": {"operators": ["no-such-op"]}}, "'variants.operators'"),
        ({"n": 2, "colour": 1}, "'colour'"),
    ],
)
def test_bad_spec_entries_name_the_field(family_spec, field):
    with pytest.raises(SpecError, match=field):
        parse_spec({"families": {"strings": family_spec}})


def test_write_bank_refuses_to_overwrite_and_leaves_no_partial_folder(bank_dir, tmp_path):
    bank = load_bank(bank_dir)
    with pytest.raises(BankError, match="folder exists"):
        write_bank(bank, bank_dir)
    out = tmp_path / "w"

    class Boom(Exception):
        pass

    class BadItem:
        id = "bad-000000000000"

        def to_json(self):
            raise Boom

    broken = type(bank)(items=(bank.items[0], BadItem()), meta=bank.meta)  # type: ignore[arg-type]
    with pytest.raises(Boom):
        write_bank(broken, out)
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == []


def test_generic_top_level_names_are_not_importable():
    code = (
        "import importlib.util as u; "
        "print([u.find_spec(m) is None for m in ('study', 'analysis', 'experiments')])"
    )
    res = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, cwd="/", check=True
    )
    assert res.stdout.strip() == "[True, True, True]"
