"""`coderel validate` on the demo's clean and messy sheets (expected problems listed by the generator)."""

import csv
import hashlib
import json
from pathlib import Path

from typer.testing import CliRunner

from coderel.cli import app

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
runner = CliRunner()


def _digest(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


def test_clean_sheets_pass_with_warnings_only():
    result = runner.invoke(
        app, ["validate", "--codebook", str(CB), str(ROOT / "demo/sheets"), "--json"]
    )
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    assert data["summary"]["errors"] == 0
    assert {p["code"] for p in data["problems"]} == {"partial-unit"}


def test_messy_sheet_reports_every_listed_problem_at_its_cell():
    before = _digest(ROOT / "demo/messy")
    result = runner.invoke(
        app, ["validate", "--codebook", str(CB), str(ROOT / "demo/messy"), "--json"]
    )
    assert result.exit_code == 1
    found = {
        (p["code"], p["cell"], p["unit"], p["variable"])
        for p in json.loads(result.stdout)["problems"]
    }
    with open(ROOT / "demo/messy_expected_problems.csv", encoding="utf-8", newline="") as fh:
        expected = {
            (r["code"], r["cell"] or None, r["unit"] or None, r["variable"] or None)
            for r in csv.DictReader(fh)
        }
    assert expected <= found
    assert _digest(ROOT / "demo/messy") == before  # input bytes unchanged


def test_wrong_code_in_known_cell(tmp_path):
    sheet = tmp_path / "coder_x.csv"
    sheet.write_text(
        "report_id,narrative,species,behaviour\nENC-1,text,1,2\nENC-2,text,2,7\n", encoding="utf-8"
    )
    result = runner.invoke(app, ["validate", "--codebook", str(CB), str(sheet), "--json"])
    assert result.exit_code == 1
    problems = json.loads(result.stdout)["problems"]
    wrong = [p for p in problems if p["code"] == "not-in-codebook"]
    assert [(p["cell"], p["unit"], p["variable"]) for p in wrong] == [("D3", "ENC-2", "behaviour")]


def test_problem_list_written_and_output_equal_to_input_refused(tmp_path):
    out = tmp_path / "problems.csv"
    result = runner.invoke(
        app, ["validate", "--codebook", str(CB), str(ROOT / "demo/messy"), "--out", str(out)]
    )
    assert result.exit_code == 1
    assert "not-in-codebook" in out.read_text(encoding="utf-8")
    target = ROOT / "demo/messy/coder_dee.xlsx"
    result = runner.invoke(
        app, ["validate", "--codebook", str(CB), str(target), "--out", str(target)]
    )
    assert result.exit_code == 2
