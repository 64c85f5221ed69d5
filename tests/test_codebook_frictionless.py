"""Frictionless Table Schema v2 exchange: lossless round trips and the standard's field shapes.

Oracle for the shapes: Frictionless Data, "Table Schema" v2.0 (2024), sections "Field
Descriptors" (categories with value/label, categoriesOrdered), "Missing Values" (labelled, as
text), "Constraints" (minimum, maximum, enum), "list" type (delimiter, itemType), "Primary Key".
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pytest

from coderel.codebook import Codebook, MissingCode, Variable
from coderel.codebook.frictionless import (
    dump_codebook,
    from_table_schema,
    to_table_schema,
    write_codebook_yaml,
    write_table_schema,
)
from coderel.codebook.load import load_codebook, parse_codebook_yaml
from coderel.errors import CodebookError

DATA = Path(__file__).parent / "data" / "codebook"
SAMPLE = Path(__file__).parents[1] / "sample_codebooks" / "wildlife_encounters.yaml"


@pytest.fixture
def cb() -> Codebook:
    return load_codebook(DATA / "valid.yaml")


def fields_by_name(schema: dict) -> dict[str, dict]:
    return {f["name"]: f for f in schema["fields"]}


def test_round_trip_through_table_schema(cb: Codebook) -> None:
    back = from_table_schema(to_table_schema(cb))
    assert dataclasses.replace(back, source=cb.source) == cb
    # also through JSON text, as a file would carry it
    back = from_table_schema(json.loads(json.dumps(to_table_schema(cb))))
    assert dataclasses.replace(back, source=cb.source) == cb


def test_round_trip_keeps_code_types(cb: Codebook) -> None:
    back = from_table_schema(to_table_schema(cb))
    assert back.variable("spray_worked").codes == ("y", "n", "01")
    assert type(back.variable("behaviour").missing_codes[0]) is int


def test_round_trip_through_yaml(cb: Codebook) -> None:
    back, problems = parse_codebook_yaml(dump_codebook(cb), source=cb.source)
    assert not problems
    assert back == cb


def test_field_shapes_follow_table_schema(cb: Codebook) -> None:
    schema = to_table_schema(cb)
    assert schema["primaryKey"] == ["report_id"]
    fields = fields_by_name(schema)
    assert list(fields)[:2] == ["report_id", "narrative"]
    assert fields["report_id"]["type"] == "string"
    assert fields["narrative"]["type"] == "string"
    behaviour = fields["behaviour"]
    assert behaviour["type"] == "integer"
    assert behaviour["title"] == "Animal behaviour"
    assert behaviour["categories"][0] == {"value": 1, "label": "Unaware"}
    assert behaviour["categoriesOrdered"] is True
    assert {"value": "99", "label": "cannot be coded"} in behaviour["missingValues"]
    assert all(isinstance(m["value"], str) for m in behaviour["missingValues"])
    assert behaviour["constraints"]["enum"] == [1, 2, 3]
    assert behaviour["coderel:level"] == "ordinal"
    group = fields["group_size"]
    assert group["type"] == "integer"
    assert group["constraints"] == {"minimum": 1, "maximum": 60}
    actions = fields["actions"]
    assert (actions["type"], actions["delimiter"], actions["itemType"]) == ("list", ";", "integer")
    assert "categoriesOrdered" not in actions
    spray = fields["spray_worked"]
    assert spray["type"] == "string"
    assert spray["coderel:appliesWhen"] == {"variable": "actions", "includes": [3]}
    assert fields["distance_m"]["type"] == "number"


def test_text_missing_code_on_integer_codes_survives() -> None:
    var = Variable(
        "v",
        "nominal",
        categories=load_codebook(DATA / "valid.yaml").variable("behaviour").categories,
        missing=(MissingCode("na", "not applicable"), MissingCode(99)),
    )
    text_var = dataclasses.replace(var, name="w", missing=(MissingCode(7),))
    text_var = dataclasses.replace(
        text_var,
        categories=tuple(dataclasses.replace(c, code=f"c{c.code}") for c in var.categories),
    )
    cb = Codebook("t", (var, text_var))
    back = from_table_schema(to_table_schema(cb))
    assert back == cb
    assert back.variable("w").missing_codes == (7,)


def test_foreign_schema_infers_levels() -> None:
    schema = {
        "fields": [
            {"name": "id", "type": "string"},
            {"name": "note", "type": "string"},
            {"name": "mood", "type": "integer", "categories": [1, 2, 3], "categoriesOrdered": True},
            {"name": "colour", "type": "string", "categories": [{"value": "r", "label": "Red"}]},
            {"name": "count", "type": "integer", "constraints": {"minimum": 0, "maximum": 9}},
        ],
        "primaryKey": "id",
    }
    cb = from_table_schema(schema)
    assert cb.unit == "id"
    assert cb.text_columns == ("note",)
    assert [v.level for v in cb.variables] == ["ordinal", "nominal", "interval"]
    assert cb.variable("mood").categories[0].label == "1"
    assert cb.variable("count").range == (0.0, 9.0)
    assert cb.variable("count").integer


def test_broken_schema_raises_with_problems() -> None:
    schema = {
        "fields": [
            {"name": "a", "type": "integer", "categories": [{"value": 1, "label": "x"}] * 2},
            {
                "name": "b",
                "type": "number",
                "coderel:level": "ratio",
                "constraints": {"minimum": 5, "maximum": 1},
            },
        ]
    }
    with pytest.raises(CodebookError) as info:
        from_table_schema(schema)
    assert info.value.problems.codes() == ["duplicate-code", "bad-range"]
    with pytest.raises(CodebookError):
        from_table_schema({"no": "fields"})  # type: ignore[arg-type]


def test_files_both_ways(cb: Codebook, tmp_path: Path) -> None:
    out_json = write_table_schema(cb, tmp_path / "cb.json")
    from_json = load_codebook(out_json)
    assert dataclasses.replace(from_json, source=cb.source) == cb
    out_yaml = write_codebook_yaml(from_json, tmp_path / "cb.yaml")
    assert dataclasses.replace(load_codebook(out_yaml), source=cb.source) == cb


def test_json_syntax_error_has_a_line(tmp_path: Path) -> None:
    path = tmp_path / "cb.json"
    path.write_text('{\n  "fields": [\n    {"name": "a",}\n  ]\n}\n')
    with pytest.raises(CodebookError) as info:
        load_codebook(path)
    assert [(p.code, p.line) for p in info.value.problems] == [("codebook-syntax", 3)]


@pytest.mark.skipif(not SAMPLE.exists(), reason="demo codebook not written yet")
def test_demo_codebook_round_trips() -> None:
    cb = load_codebook(SAMPLE)
    assert dataclasses.replace(from_table_schema(to_table_schema(cb)), source=cb.source) == cb
    back, _ = parse_codebook_yaml(dump_codebook(cb), source=cb.source)
    assert back == cb
