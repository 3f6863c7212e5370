"""``twofold items``: every expected error is one line on stderr, exit code 2, nothing written."""

from __future__ import annotations

import json
import re

import pytest
from twofold.experiments.cli import main


@pytest.fixture
def spec(tmp_path):
    path = tmp_path / "spec.toml"
    path.write_text(
        "seed = 3\n[families.strings]\nn = 4\n[families.matrices]\nn = 4\n"
        'modes = ["select"]\ndistractor_scheme = "one-off"\n',
        encoding="utf-8",
    )
    return path


def _run(capsys, *args):
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize(
    ("body", "expected"),
    [
        (
            "seed = 1\n[families.strings]\nn = 3\n[families.strings.params]\n"
            "length = {min = 8, max = 3}\n",
            "spec.toml: families.strings.params: field 'length': got {'min': 8, 'max': 3}; "
            "accepted: a range with min <= max.",
        ),
        (
            "seed = 1\n[families.strings]\nn = 3\n[families.strings.params]\nlength = 40\n",
            "spec.toml: families.strings.params: field 'length': got 40; accepted: an integer "
            "from 3 to 10 (or a list of such levels).",
        ),
        (
            "seed = 1\n[families.matrix]\nn = 3\n",
            "spec.toml: field 'family': got 'matrix'; "
            "accepted: one of contrast, grids, matrices, strings.",
        ),
        ("seed = 1\n[families.strings\nn = 3\n", "not valid TOML"),
    ],
)
def test_bad_specs_give_one_line_and_no_bank(tmp_path, capsys, body, expected):
    path = tmp_path / "spec.toml"
    path.write_text(body, encoding="utf-8")
    code, out, err = _run(capsys, "items", "generate", str(path), "-o", str(tmp_path / "bank"))
    assert code == 2
    assert expected in err
    assert len(err.strip().splitlines()) == 1
    assert "Traceback" not in err
    assert not (tmp_path / "bank").exists()
    assert [p.name for p in tmp_path.iterdir()] == ["spec.toml"]


def test_impossible_level_combination_is_a_generation_error(tmp_path, capsys):
    path = tmp_path / "spec.toml"
    path.write_text(
        'seed = 1\n[families.grids]\nn = 2\n[families.grids.params]\nkinds = ["size"]'
        '\nresize = "same"\n',
        encoding="utf-8",
    )
    code, _, err = _run(capsys, "items", "generate", str(path), "-o", str(tmp_path / "bank"))
    assert code == 2
    assert err.startswith("error: families.grids: no valid item after 200 attempts")
    assert not (tmp_path / "bank").exists()


def test_generate_show_vary_audit_round(tmp_path, capsys, spec):
    bank = tmp_path / "bank"
    code, out, _ = _run(capsys, "items", "generate", str(spec), "-o", str(bank))
    assert code == 0 and "wrote 8 items" in out
    ids = [json.loads(line)["id"] for line in (bank / "items.jsonl").read_text().splitlines()]
    code, out, _ = _run(capsys, "items", "show", str(bank), ids[0], "--as", "text")
    assert code == 0 and out.strip()
    code, out, _ = _run(capsys, "items", "show", str(bank), ids[0], "--as", "structured")
    assert json.loads(out)["item"] == ids[0]
    png = tmp_path / "item.png"
    code, _, _ = _run(
        capsys, "items", "show", str(bank), ids[-1], "--as", "picture", "-o", str(png)
    )
    assert code == 0 and png.read_bytes().startswith(b"\x89PNG")
    code, out, err = _run(capsys, "items", "show", str(bank), "str-000000000000")
    assert code == 2 and "field 'item': got 'str-000000000000'" in err
    code, out, err = _run(
        capsys,
        "items",
        "vary",
        str(bank),
        "--operator",
        "swap-shapes",
        "-o",
        str(tmp_path / "bank2"),
    )
    # each isomorph's draw is seeded by its parent's id, so how many succeed depends on the bank
    made = int(re.search(r"(\d+) variants made", err).group(1))
    assert code == 0 and 1 <= made <= 4 and f"wrote {8 + made} items" in out
    code, _, err = _run(
        capsys, "items", "vary", str(bank), "--operator", "nope", "-o", str(tmp_path / "bank3")
    )
    assert code == 2 and "field '--operator': got 'nope'" in err
    assert not (tmp_path / "bank3").exists()
    # one-off distractors leak the answer: the audit flags the bank and exits 1
    code, out, _ = _run(capsys, "items", "audit", str(bank), "--json", str(tmp_path / "a.json"))
    assert code == 1
    report = json.loads((tmp_path / "a.json").read_text())
    assert any(row["flagged"] for row in report["shortcuts"])
