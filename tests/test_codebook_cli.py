"""``coderel codebook check | convert | schema`` through typer's CliRunner.

The oracle for ``check`` is the fixture file itself: the expected (code, line) pairs are read off
tests/data/codebook/five_problems.yaml with ``cat -n``. The oracle for ``convert`` is the source
codebook: a round trip YAML -> Table Schema -> YAML gives back an equal codebook; the JSON uses
the keys of the Frictionless Table Schema v2 (Frictionless Data, "Table Schema", v2.0, 2024:
``fields``, ``categories`` of ``value``/``label``, ``categoriesOrdered``, ``primaryKey``) and
keeps our own keys under the ``coderel:`` prefix.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import jsonschema
import yaml
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook.load import codebook_json_schema, load_codebook

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
BROKEN = ROOT / "tests" / "data" / "codebook" / "five_problems.yaml"
runner = CliRunner()


def _same(a, b) -> bool:
    return dataclasses.replace(a, source=None) == dataclasses.replace(b, source=None)


def test_check_reports_every_problem_with_its_line_and_exits_1():
    result = runner.invoke(app, ["codebook", "check", str(BROKEN), "--json"])
    assert result.exit_code == 1
    data = json.loads(result.stdout)
    found = [(p["code"], p["line"], p["variable"]) for p in data["problems"]]
    assert found == [
        ("unknown-level", 6, "behaviour"),
        ("duplicate-code", 9, "behaviour"),
        ("duplicate-variable", 10, "behaviour"),
        ("bad-range", 16, "group_size"),
        ("missing-categories", 17, "habitat"),
    ]
    assert data["summary"] == {"file": "five_problems.yaml", "errors": 5, "warnings": 0}
    assert all(p["file"] == "five_problems.yaml" for p in data["problems"])


def test_check_table_names_the_lines():
    result = runner.invoke(app, ["codebook", "check", str(BROKEN)])
    assert result.exit_code == 1
    assert "five_problems.yaml:16" in result.stdout
    assert "did you mean 'ordinal'?" in result.stdout


def test_check_of_a_good_codebook_summarises_its_variables():
    result = runner.invoke(app, ["codebook", "check", str(SAMPLE), "--json"])
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    assert data["problems"] == []
    variables = {v["name"]: v for v in data["summary"]["variables"]}
    assert list(variables) == list(load_codebook(SAMPLE).names)
    assert variables["spray_worked"]["applies_when"] == {"variable": "actions", "includes": [3]}
    assert variables["visitor_distance_m"]["range"] == [0, 500]
    assert variables["behaviour"]["categories"] == 5
    text = runner.invoke(app, ["codebook", "check", str(SAMPLE)])
    assert text.exit_code == 0
    assert "spray_worked" in text.stdout
    assert "actions in 3" in text.stdout


def test_check_of_a_missing_file_is_a_usage_error(tmp_path):
    assert runner.invoke(app, ["codebook", "check", str(tmp_path / "none.yaml")]).exit_code == 2


def test_convert_round_trip_yaml_json_yaml(tmp_path):
    as_json = tmp_path / "cb.json"
    as_yaml = tmp_path / "cb.yml"
    first = runner.invoke(app, ["codebook", "convert", str(SAMPLE), "-o", str(as_json), "--json"])
    assert first.exit_code == 0, first.output
    assert json.loads(first.stdout) == {
        "input": str(SAMPLE),
        "output": str(as_json),
        "form": "table-schema",
        "variables": 10,
    }
    schema = json.loads(as_json.read_text(encoding="utf-8"))
    assert schema["primaryKey"] == ["report_id"]
    behaviour = next(f for f in schema["fields"] if f["name"] == "behaviour")
    assert behaviour["categoriesOrdered"] is True
    assert behaviour["categories"][1] == {
        "value": 2,
        "label": "Alert",
        "coderel:description": "The animal looked at, listened to or sniffed towards the visitors.",
    }
    assert behaviour["coderel:level"] == "ordinal"
    second = runner.invoke(app, ["codebook", "convert", str(as_json), "-o", str(as_yaml)])
    assert second.exit_code == 0, second.output
    assert yaml.safe_load(as_yaml.read_text(encoding="utf-8"))["unit"] == "report_id"
    original = load_codebook(SAMPLE)
    assert _same(load_codebook(as_json), original)
    assert _same(load_codebook(as_yaml), original)


def test_convert_refuses_its_input_an_unknown_form_and_a_broken_codebook(tmp_path):
    copy = tmp_path / "cb.yaml"
    copy.write_bytes(SAMPLE.read_bytes())
    before = copy.read_bytes()
    same = runner.invoke(app, ["codebook", "convert", str(copy), "-o", str(copy)])
    assert same.exit_code == 2
    assert copy.read_bytes() == before
    odd = runner.invoke(app, ["codebook", "convert", str(copy), "-o", str(tmp_path / "cb.txt")])
    assert odd.exit_code == 2
    assert not (tmp_path / "cb.txt").exists()
    broken = runner.invoke(
        app, ["codebook", "convert", str(BROKEN), "-o", str(tmp_path / "b.json")]
    )
    assert broken.exit_code == 1
    assert not (tmp_path / "b.json").exists()


def test_schema_printed_and_written_is_the_shipped_schema_and_checks_the_sample(tmp_path):
    result = runner.invoke(app, ["codebook", "schema"])
    assert result.exit_code == 0
    printed = json.loads(result.stdout)
    assert printed == codebook_json_schema()
    jsonschema.validate(yaml.safe_load(SAMPLE.read_text(encoding="utf-8")), printed)
    out = tmp_path / "codebook.schema.json"
    assert runner.invoke(app, ["codebook", "schema", "-o", str(out)]).exit_code == 0
    assert json.loads(out.read_text(encoding="utf-8")) == printed
