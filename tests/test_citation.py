"""CITATION.cff is valid Citation File Format 1.2.0 and agrees with the package metadata."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import jsonschema
import pytest
import yaml

ROOT = Path(__file__).resolve().parent.parent
# reference: SOURCES.md#cff-schema — the CFF 1.2.0 JSON Schema as shipped in cffconvert 2.0.0
SCHEMA = json.loads((ROOT / "tests" / "reference" / "cff-1.2.0-schema.json").read_text("utf-8"))


@pytest.fixture(scope="module")
def cff():
    return yaml.safe_load((ROOT / "CITATION.cff").read_text("utf-8"))


def test_citation_file_validates_against_the_cff_schema(cff):
    jsonschema.Draft7Validator(SCHEMA).validate(cff)
    assert cff["cff-version"] == "1.2.0"


def test_the_schema_rejects_a_broken_citation(cff):
    broken = {k: v for k, v in cff.items() if k != "authors"}
    with pytest.raises(jsonschema.ValidationError, match="authors"):
        jsonschema.Draft7Validator(SCHEMA).validate(broken)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft7Validator(SCHEMA).validate({**cff, "cff-version": "1.2"})


def test_citation_agrees_with_the_package(cff):
    meta = tomllib.loads((ROOT / "pyproject.toml").read_text("utf-8"))["project"]
    assert cff["version"] == meta["version"]
    assert cff["license"] == meta["license"]
    assert cff["title"].split(":")[0] == meta["name"]
