"""Blocks and counterbalanced forms: coverage, Latin-square balance, order constraints, seeds."""

from __future__ import annotations

import itertools
import json
from collections import Counter
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from twofold.experiments.cli import main
from twofold.study import load_study
from twofold.study.exceptions import SpecError
from twofold.study.forms import (
    assignment,
    build_forms,
    form_for,
    latin_square,
    load_forms,
    williams_square,
    write_forms,
)

BANK = """
[bank.spec]
seed = 11
[bank.spec.families.strings]
n = 10
modes = ["generate", "select"]
[bank.spec.families.strings.variants]
operators = ["other-alphabet", "reverse-direction", "longer"]
per_item = 2
[bank.spec.families.matrices]
n = 8
modes = ["select"]
[bank.spec.families.matrices.variants]
operators = ["permute-values", "swap-shapes"]
per_item = 1
[bank.spec.families.contrast]
n = 6
modes = ["select"]
"""


def make_study(root: Path, *, blocks: str, forms: str = "", seed: int = 3) -> Path:
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(
        f'[study]\nname = "formtest"\nseed = {seed}\n{BANK}\n{blocks}\n{forms}\n', "utf-8"
    )
    (root / "instr.txt").write_text("Press SPACE.\n", "utf-8")
    return root / "study.toml"


THREE_BLOCKS = """
[[blocks]]
name = "letters"
families = ["strings"]
mode = "generate"
instructions = "instr.txt"
practice = 2

[[blocks]]
name = "figures"
families = ["matrices"]
mode = "select"
instructions = "instr.txt"

[[blocks]]
name = "sets"
families = ["contrast"]
mode = "select"
instructions = "instr.txt"
"""


@pytest.fixture(scope="module")
def study3(tmp_path_factory):
    path = make_study(
        tmp_path_factory.mktemp("s3"), blocks=THREE_BLOCKS, forms='[forms]\norder = "williams"\n'
    )
    return load_study(path)


def parent_of(bank):
    return {it.id: it.variant_of or it.id for it in bank}


def test_every_item_once_per_form_and_practice_apart(study3):
    bank = study3.bank()
    forms = build_forms(study3, 12)
    for f in forms:
        ids = f.item_ids()
        assert len(ids) == len(set(ids))
        practice = [p for b in f.blocks for p in b.practice]
        assert len(practice) == 2 and not set(practice) & set(ids)
        # with one list, every bank item is either practice, a test item, or an isomorph of a
        # practice item (dropped so the test items do not repeat a practised structure)
        groups = parent_of(bank)
        practised = {groups[p] for p in practice}
        rest = {it.id for it in bank} - set(ids) - set(practice)
        assert all(groups[i] in practised for i in rest)
        assert {b.name: b.mode for b in f.blocks} == {
            "letters": "generate",
            "figures": "select",
            "sets": "select",
        }


def test_williams_balance_over_respondents(study3):
    forms = build_forms(study3, 6)  # 3 blocks: Williams design needs 2 x 3 rows
    orders = [tuple(b.name for b in f.blocks) for f in forms]
    assert len(set(orders)) == 6
    position = Counter((name, k) for o in orders for k, name in enumerate(o))
    assert set(position.values()) == {2}  # each block twice in each position
    follows = Counter((a, b) for o in orders for a, b in itertools.pairwise(o))
    assert len(follows) == 6 and set(follows.values()) == {2}  # carry-over balance


def test_item_order_constraints_hold(study3):
    bank = study3.bank()
    groups = parent_of(bank)
    for f in build_forms(study3, 10):
        for b in f.blocks:
            assert all(groups[a] != groups[c] for a, c in itertools.pairwise(b.items)), b.name


def test_same_seed_same_forms_and_prefix_stable(study3, tmp_path):
    a = [f.to_record() for f in build_forms(study3, 5)]
    b = [f.to_record() for f in build_forms(study3, 8)][:5]
    assert a == b
    other = load_study(
        make_study(
            tmp_path / "o", blocks=THREE_BLOCKS, seed=4, forms='[forms]\norder = "williams"\n'
        )
    )
    c = [f.to_record() for f in build_forms(other, 5)]
    assert [f["blocks"][0]["items"] for f in a] != [f["blocks"][0]["items"] for f in c]


def test_item_order_differs_between_respondents(study3):
    forms = build_forms(study3, 6)
    letters = [next(b.items for b in f.blocks if b.name == "letters") for f in forms]
    assert len(set(letters)) > 3


def test_max_run_in_mixed_block(tmp_path):
    blocks = """
[[blocks]]
name = "mixed"
families = ["strings", "matrices"]
mode = "select"
instructions = "instr.txt"
"""
    study = load_study(make_study(tmp_path / "m", blocks=blocks, forms="[forms]\nmax_run = 2\n"))
    bank = study.bank()
    fam = {it.id: it.family for it in bank}
    for f in build_forms(study, 8):
        items = f.blocks[0].items
        runs = [len(list(g)) for _, g in itertools.groupby(items, key=fam.get)]
        assert max(runs) <= 2


def test_lists_split_isomorphs_and_rotate_over_blocks(tmp_path):
    study = load_study(
        make_study(
            tmp_path / "l",
            blocks=THREE_BLOCKS.replace("practice = 2", "practice = 0"),
            forms='[forms]\nlists = 2\norder = "latin"\n',
        )
    )
    bank = study.bank()
    groups = parent_of(bank)
    forms = build_forms(study, 6)  # 3 order rows x 2 lists
    assert Counter(f.list for f in forms) == {0: 3, 1: 3}
    by_list = {}
    for f in forms:
        letters = set(next(b.items for b in f.blocks if b.name == "letters"))
        by_list.setdefault(f.list, letters)
        assert by_list[f.list] == letters  # one list, one item set
    a, b = by_list[0], by_list[1]
    assert not a & b
    # matrices pairs (a parent, one isomorph) never both in one list
    figs = [set(next(x.items for x in f.blocks if x.name == "figures")) for f in forms]
    for s in figs:
        g = Counter(groups[i] for i in s)
        assert max(g.values()) == 1
    # the Latin square of lists: list 0 uses letters-list 0 and figures-list 1
    assert figs[0] != figs[3]


def test_latin_and_williams_squares():
    for n in range(2, 8):
        sq = latin_square(n)
        assert all(sorted(r) == list(range(n)) for r in sq)
        assert all(sorted(c) == list(range(n)) for c in zip(*sq, strict=True))
        w = williams_square(n)
        assert len(w) == (n if n % 2 == 0 else 2 * n)
        follows = Counter((a, b) for r in w for a, b in itertools.pairwise(r))
        assert len(follows) == n * (n - 1) and len(set(follows.values())) == 1
    # reference: SOURCES.md#williams-design — Williams (1949), first row 0 1 3 2 (common practice)
    assert williams_square(4)[0] == [0, 1, 3, 2]


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(1, 9))
def test_constraints_hold_for_any_seed(study3, seed, n):
    import dataclasses

    s = dataclasses.replace(study3, seed=seed)
    groups = parent_of(s.bank())
    forms = build_forms(s, n)
    for f in forms:
        for b in f.blocks:
            assert len(set(b.items)) == len(b.items)
            assert all(groups[x] != groups[y] for x, y in itertools.pairwise(b.items))


def test_write_load_assign(study3, tmp_path):
    import dataclasses
    import shutil

    root = tmp_path / "w"
    shutil.copytree(study3.root, root, ignore=shutil.ignore_patterns("forms", "logs"))
    study = load_study(root)
    forms = build_forms(study, 3)
    write_forms(study, forms)
    assert [f.to_record() for f in load_forms(study)] == [f.to_record() for f in forms]
    f1 = form_for(study, "P007")
    f2 = form_for(study, "P002")
    assert (f1.form_id, f2.form_id) == ("F001", "F002")
    assert form_for(study, "P007").form_id == "F001"
    assert assignment(study) == {"P007": "F001", "P002": "F002"}
    form_for(study, "P003")
    with pytest.raises(SpecError, match="all 3 forms are assigned"):
        form_for(study, "P004")
    # an assigned form may not change under a rebuild
    changed = dataclasses.replace(forms[0], list=1)
    with pytest.raises(SpecError, match="assigned to a respondent"):
        write_forms(study, [changed])
    write_forms(study, build_forms(study, 5))  # same seed: more forms is fine
    assert form_for(study, "P004").form_id == "F004"
    assert json.loads((root / "forms" / "design.json").read_text())["n_forms"] == 5


@pytest.mark.parametrize(
    ("blocks", "forms", "message"),
    [
        (
            '[[blocks]]\nname = "a"\nfamilies = ["strngs"]\ninstructions = "instr.txt"\n',
            "",
            "field 'blocks[0].families': got 'strngs'; accepted: one of contrast, grids, matrices, "
            "strings.",
        ),
        (
            '[[blocks]]\nname = "a"\nfamilies = ["strings"]\ninstructions = "nope.txt"\n',
            "",
            "field 'blocks[0].instructions': got 'nope.txt'",
        ),
        (
            '[[blocks]]\nname = "a"\nfamilies = ["contrast"]\nmode = "generate"\n'
            'instructions = "instr.txt"\n',
            "",
            "field 'blocks[0].mode': got 'generate'",
        ),
        (
            '[[blocks]]\nname = "a"\nfamilies = ["strings"]\ninstructions = "instr.txt"\n',
            '[forms]\norder = "random"\n',
            "field 'forms.order': got 'random'; accepted: one of fixed, latin, williams.",
        ),
        (
            '[[blocks]]\nname = "a"\nfamilies = ["strings"]\ninstructions = "instr.txt"\n'
            "time_limit = 3\n",
            "",
            "field 'blocks[0].time_limit'",
        ),
    ],
)
def test_bad_tables_name_the_key(tmp_path, blocks, forms, message):
    path = make_study(tmp_path / "bad", blocks=blocks, forms=forms)
    with pytest.raises(SpecError) as err:
        build_forms(load_study(path), 2)
    assert message in str(err.value)


def test_cli_build_and_error(study3, tmp_path, capsys):
    import shutil

    root = tmp_path / "c"
    shutil.copytree(study3.root, root, ignore=shutil.ignore_patterns("forms", "logs"))
    assert main(["forms", "build", str(root / "study.toml"), "--respondents", "4"]) == 0
    assert sorted(p.name for p in (root / "forms").iterdir()) == [
        "F001.json",
        "F002.json",
        "F003.json",
        "F004.json",
        "design.json",
    ]
    (root / "study.toml").write_text("[study\n", "utf-8")
    capsys.readouterr()
    assert main(["forms", "build", str(root / "study.toml")]) == 2
    # rich wraps at the console width (80 columns without a terminal): join the lines back
    err = " ".join(capsys.readouterr().err.split())
    assert err.startswith("error: ") and "study.toml: not valid TOML" in err


def test_templates_command_writes_files_to_replace(tmp_path, capsys):
    path = make_study(tmp_path / "t", blocks=THREE_BLOCKS.replace("instr.txt", "texts/a.txt"))
    assert main(["forms", "templates", str(path)]) == 0
    consent = (tmp_path / "t" / "consent.txt").read_text("utf-8")
    assert consent.startswith("TEMPLATE - REPLACE THIS TEXT")
    assert "ethics board" in consent
    assert (tmp_path / "t" / "texts" / "a.txt").read_text("utf-8").strip()
    (tmp_path / "t" / "consent.txt").write_text("our approved text", "utf-8")
    assert main(["forms", "templates", str(path)]) == 0  # existing files are kept
    assert (tmp_path / "t" / "consent.txt").read_text("utf-8") == "our approved text"
