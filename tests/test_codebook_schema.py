"""The shipped JSON Schema accepts well-formed codebooks and rejects broken ones.

Oracle: the ``jsonschema`` package's draft 2020-12 validator (independent of coderel's loader).
"""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml
from jsonschema import Draft202012Validator

from coderel.codebook.frictionless import dump_codebook
from coderel.codebook.load import codebook_json_schema, load_codebook

DATA = Path(__file__).parent / "data" / "codebook"
SAMPLE = Path(__file__).parents[1] / "sample_codebooks" / "wildlife_encounters.yaml"


@pytest.fixture(scope="module")
def validator() -> Draft202012Validator:
    schema = codebook_json_schema()
    Draft202012Validator.check_schema(schema)
    return Draft202012Validator(schema)


def errors(validator: Draft202012Validator, path: Path) -> list[str]:
    data = yaml.safe_load(path.read_text("utf-8"))
    return [e.message for e in validator.iter_errors(data)]


def test_valid_codebook_passes(validator: Draft202012Validator) -> None:
    assert errors(validator, DATA / "valid.yaml") == []


def test_written_yaml_passes(validator: Draft202012Validator) -> None:
    text = dump_codebook(load_codebook(DATA / "valid.yaml"))
    assert list(validator.iter_errors(yaml.safe_load(text))) == []


@pytest.mark.parametrize(
    "name",
    ["five_problems.yaml", "unknown_keys.yaml", "numeric_misuse.yaml", "not_a_mapping.yaml"],
)
def test_broken_codebooks_fail(validator: Draft202012Validator, name: str) -> None:
    assert errors(validator, DATA / name)


def test_schema_names_the_bad_level(validator: Draft202012Validator) -> None:
    messages = errors(validator, DATA / "five_problems.yaml")
    assert any("'ordinall' is not one of" in m for m in messages)


@pytest.mark.skipif(not SAMPLE.exists(), reason="demo codebook not written yet")
def test_demo_codebook_passes(validator: Draft202012Validator) -> None:
    assert errors(validator, SAMPLE) == []
