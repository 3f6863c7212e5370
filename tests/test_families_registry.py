"""Shared tests run over every registered family, so a new family is covered automatically."""

from __future__ import annotations

import pytest
from twofold.study import generate_bank, known_families, load_bank, parse_spec, write_bank
from twofold.study.audit import audit_bank
from twofold.study.conformance import check_family
from twofold.study.families import get_family
from twofold.study.render import render

FAMILIES = known_families()


def test_the_four_builtin_families_are_registered():
    assert {"contrast", "grids", "matrices", "strings"} <= set(FAMILIES)


@pytest.mark.parametrize("name", FAMILIES)
def test_family_conforms(name):
    check_family(get_family(name), n=6)


@pytest.mark.parametrize("name", FAMILIES)
def test_family_declares_enough_and_documents_it(name):
    fam = get_family(name)
    assert len(fam.factors) >= 4
    assert len(fam.variant_operators) >= 3
    assert len(fam.error_types) >= 5  # at least four named types plus "other"
    assert all(desc.strip() for desc in fam.error_types.values())
    assert fam.answer_format.strip()
    assert len(fam.prefix) == 3


def test_mixed_bank_generates_audits_renders_and_varies(tmp_path):
    spec = {"seed": 3, "families": {}}
    for name in FAMILIES:
        fam = get_family(name)
        spec["families"][name] = {
            "n": 3,
            "modes": list(fam.modes),
            "variants": {"operators": list(fam.variant_operators)[:1]},
        }
    bank = write_bank(generate_bank(parse_spec(spec)), tmp_path / "bank")
    again = load_bank(tmp_path / "bank")
    assert again.hash == bank.hash
    assert set(again.families()) == set(FAMILIES)
    assert sum(it.variant_of is not None for it in again) == 3 * len(FAMILIES)
    for item in again:
        for mode in item.modes:
            assert isinstance(render(item, "text", mode), str)
    report = audit_bank(again)
    assert report["n_items"] == len(again)
