"""Atomic writes and JSON-lines reading shared by banks, exports, sidecars and answer imports."""

from __future__ import annotations

import json

import pytest
from twofold.study._io import atomic_file, atomic_folder, read_json_lines
from twofold.study.exceptions import ItemError


def test_atomic_folder_replaces_the_old_folder_only_when_complete(tmp_path):
    dest = tmp_path / "out"
    with atomic_folder(dest) as tmp:
        (tmp / "a.txt").write_text("first")
        assert not dest.exists()  # nothing visible until the block ends
    assert (dest / "a.txt").read_text() == "first"
    with pytest.raises(RuntimeError), atomic_folder(dest) as tmp:
        (tmp / "a.txt").write_text("second")
        raise RuntimeError("interrupted")
    assert (dest / "a.txt").read_text() == "first"
    with atomic_folder(dest) as tmp:
        (tmp / "b.txt").write_text("second")
    assert sorted(p.name for p in dest.iterdir()) == ["b.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]  # no temporary left behind


def test_atomic_file_keeps_the_old_content_on_failure(tmp_path):
    path = tmp_path / "sub" / "meta.json"
    with atomic_file(path) as fh:
        json.dump({"n": 1}, fh)
    with pytest.raises(ValueError), atomic_file(path) as fh:
        fh.write('{"n": ')
        raise ValueError("half-written")
    assert json.loads(path.read_text()) == {"n": 1}
    assert [p.name for p in path.parent.iterdir()] == ["meta.json"]
    with atomic_file(path, binary=True) as fh:
        fh.write(b"\x00\x01")
    assert path.read_bytes() == b"\x00\x01"


def test_read_json_lines_numbers_lines_and_skips_blank_ones(tmp_path):
    path = tmp_path / "answers.jsonl"
    path.write_text('{"a": 1}\n\n{"a": 2}\n{"a": NaN}\n', encoding="utf-8")
    rows = []
    with pytest.raises(ItemError) as err:
        for lineno, where, rec in read_json_lines(path, name="items.jsonl", error=ItemError):
            rows.append((lineno, where, rec))
    assert rows == [(1, "items.jsonl line 1", {"a": 1}), (3, "items.jsonl line 3", {"a": 2})]
    assert str(err.value).startswith("items.jsonl line 4: ")
    path.write_text('{"a": 1}\n{"a": \n', encoding="utf-8")
    with pytest.raises(ValueError, match=r"^answers.jsonl line 2: not valid JSON"):
        list(read_json_lines(path))
