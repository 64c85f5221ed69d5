"""Blank coding workbooks: layout, dropdowns, limits, and a filled template that validates clean.

The oracle for "the dropdown points at the right list" is the codebook itself: every list range
is resolved in the workbook and compared with the variable's ``code = label`` entries.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import openpyxl
import pytest
from openpyxl.utils import range_boundaries
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.codebook.load import load_codebook
from coderel.errors import UsageError
from coderel.template import (
    CODEBOOK_SHEET,
    CODING_SHEET,
    LISTS_SHEET,
    choices,
    read_unit_list,
    write_templates,
)
from coderel.validate import validate

ROOT = Path(__file__).resolve().parents[1]
CB_PATH = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
UNITS = ROOT / "demo" / "units.txt"
runner = CliRunner()


@pytest.fixture(scope="module")
def cb() -> Codebook:
    return load_codebook(CB_PATH)


@pytest.fixture
def templates(tmp_path, cb) -> list[Path]:
    return write_templates(cb, ["ana", "ben"], tmp_path / "out", read_unit_list(UNITS)[:6])


def _header(ws) -> dict[str, str]:
    return {c.value: c.column_letter for c in ws[1]}


def _list_values(wb, formula: str) -> list[str]:
    sheet, ref = formula.split("!")
    ws = wb[sheet.strip("'")]
    min_col, min_row, max_col, max_row = range_boundaries(ref.replace("$", ""))
    assert min_col == max_col
    return [ws.cell(row=r, column=min_col).value for r in range(min_row, max_row + 1)]


def test_layout_units_and_hidden_lists(templates, cb):
    assert [p.name for p in templates] == ["ana.xlsx", "ben.xlsx"]
    wb = openpyxl.load_workbook(templates[0])
    assert wb.sheetnames == [CODING_SHEET, CODEBOOK_SHEET, LISTS_SHEET]
    assert [ws.sheet_state for ws in wb.worksheets] == ["visible", "visible", "hidden"]
    ws = wb[CODING_SHEET]
    assert [c.value for c in ws[1]] == [cb.unit, *cb.text_columns, *cb.names]
    assert ws.freeze_panes == "B2"
    assert all(c.font.bold for c in ws[1])
    units = [ws.cell(row=r, column=1).value for r in range(2, ws.max_row + 1)]
    assert units == ["ENC-001", "ENC-002", "ENC-003", "ENC-004", "ENC-005", "ENC-006"]
    # nothing but the unit IDs is filled in
    assert all(ws.cell(row=r, column=c).value is None for r in range(2, 8) for c in range(2, 13))


def test_dropdowns_point_at_each_variables_code_label_list(templates, cb):
    wb = openpyxl.load_workbook(templates[0])
    ws = wb[CODING_SHEET]
    letters = _header(ws)
    by_column = {
        str(dv.sqref).split(":")[0].rstrip("0123456789"): dv
        for dv in ws.data_validations.dataValidation
    }
    lists = [v for v in cb.variables if v.is_categorical and not v.multiple]
    assert [v.name for v in lists] == [
        "species",
        "behaviour",
        "severity",
        "time_of_day",
        "food_present",
        "spray_worked",
    ]
    for variable in lists:
        dv = by_column[letters[variable.name]]
        assert dv.type == "list"
        assert str(dv.sqref) == f"{letters[variable.name]}2:{letters[variable.name]}501"
        assert dv.formula1.startswith(f"'{LISTS_SHEET}'!")
        assert _list_values(wb, dv.formula1) == choices(variable)
        assert dv.errorStyle == "warning"  # typing a bare code stays possible
    assert choices(cb.variable("behaviour"))[0] == "1 = Unaware"
    assert choices(cb.variable("behaviour"))[-1] == "99 = cannot be coded from the report"
    # multi-select: no list (a list allows one entry), but an input message with the codes
    actions = by_column[letters["actions"]]
    assert actions.type is None
    assert "separated by ';'" in actions.prompt
    assert "3 = Used bear spray" in actions.prompt


def test_number_limits_and_input_messages(templates, cb):
    ws = openpyxl.load_workbook(templates[0])[CODING_SHEET]
    letters = _header(ws)
    dvs = {
        str(dv.sqref).split(":")[0].rstrip("0123456789"): dv
        for dv in ws.data_validations.dataValidation
    }
    group = dvs[letters["visitor_group_size"]]
    assert (group.type, group.operator, group.formula1, group.formula2) == (
        "whole",
        "between",
        "1",
        "60",
    )
    distance = dvs[letters["visitor_distance_m"]]
    assert (distance.type, distance.formula1, distance.formula2) == ("decimal", "0", "500")
    temperature = dvs[letters["temperature_c"]]
    assert (temperature.type, temperature.formula1, temperature.formula2) == (
        "decimal",
        "-20",
        "40",
    )
    # the missing code 999 lies outside 0-500: the limit warns instead of refusing
    assert distance.errorStyle == "warning"
    assert "999" in distance.error
    for variable in cb.variables:
        dv = dvs[letters[variable.name]]
        assert dv.showInputMessage
        assert dv.prompt.startswith(variable.label)
        assert len(dv.prompt) <= 255
    spray = dvs[letters["spray_worked"]]
    assert "Applies only when actions includes 3 = Used bear spray" in spray.prompt


def test_codebook_sheet_lists_every_definition(templates, cb):
    ws = openpyxl.load_workbook(templates[0])[CODEBOOK_SHEET]
    cells = [str(v) for row in ws.iter_rows(values_only=True) for v in row if v is not None]
    text = "\n".join(cells)
    assert cb.title in cells
    assert cb.version in cells
    for variable in cb.variables:
        assert variable.name in cells
        assert variable.level in cells
        for category in variable.categories:
            assert category.label in cells
            if category.description:
                assert category.description in text
        for missing in variable.missing:
            assert f"missing: {missing.label}" in cells
    assert "a black bear crossed the path" in text
    assert "Applies only when actions includes 3 = Used bear spray" in text
    assert "from 0 to 500" in text


FILLED = {
    # unit: values typed by ana (dropdown text, typed codes, multi-select, numbers, missing codes)
    "ENC-001": {
        "species": "1 = Black bear",
        "behaviour": "3 = Agitated",
        "visitor_distance_m": 12.5,
        "severity": "0 = None",
        "time_of_day": "dusk = Dusk",
        "visitor_group_size": 3,
        "temperature_c": -4,
        "food_present": "2 = No",
        "actions": "1;3",
        "spray_worked": "1 = Yes",
    },
    "ENC-002": {
        "species": 2,
        "behaviour": "99 = cannot be coded from the report",
        "visitor_distance_m": 999,
        "severity": 1,
        "time_of_day": "unknown = not stated in the report",
        "visitor_group_size": 60,
        "temperature_c": 99,
        "food_present": 1,
        "actions": "2",
    },
    "ENC-003": {
        "species": "7 = Other animal",
        "behaviour": 1,
        "visitor_distance_m": 0,
        "severity": "3 = Serious",
        "time_of_day": "night",
        "visitor_group_size": 1,
        "temperature_c": 21.5,
        "food_present": "1 = Yes",
        "actions": "3;6",
        "spray_worked": "99 = cannot be coded from the report",
    },
}


def _fill(path: Path, rows: dict[str, dict[str, object]]) -> None:
    wb = openpyxl.load_workbook(path)
    ws = wb[CODING_SHEET]
    columns = {c.value: c.column for c in ws[1]}
    row_of = {ws.cell(row=r, column=1).value: r for r in range(2, ws.max_row + 1)}
    for unit, values in rows.items():
        for name, value in values.items():
            ws.cell(row=row_of[unit], column=columns[name], value=value)
    wb.save(path)


def test_filled_template_passes_validate_with_zero_problems(tmp_path, cb):
    paths = write_templates(cb, ["ana", "ben"], tmp_path, ["ENC-001", "ENC-002", "ENC-003"])
    for path in paths:
        _fill(path, FILLED)
    result = validate(cb, paths)
    assert [p.to_dict() for p in result.problems] == []
    frame = result.codings.frame
    ana = frame[frame["coder"] == "ana"].set_index(["unit", "variable"])
    assert ana.loc[("ENC-001", "species"), "value"] == 1
    assert ana.loc[("ENC-001", "time_of_day"), "value"] == "dusk"
    assert ana.loc[("ENC-001", "actions"), "value"] == (1, 3)
    assert ana.loc[("ENC-001", "visitor_distance_m"), "value"] == 12.5
    assert ana.loc[("ENC-002", "behaviour"), "missing"] == 99
    assert ana.loc[("ENC-002", "visitor_distance_m"), "missing"] == 999
    assert ana.loc[("ENC-003", "actions"), "value"] == (3, 6)
    assert ana.loc[("ENC-003", "spray_worked"), "missing"] == 99
    assert sorted(result.codings.coders) == ["ana", "ben"]


def test_blank_template_validates_and_a_wrong_code_is_found_at_its_cell(tmp_path, cb):
    (path,) = write_templates(cb, ["cai"], tmp_path, ["ENC-001", "ENC-002"])
    # no error; one warning that the coder has coded nothing yet (issue 9, item 7)
    (blank,) = validate(cb, [path]).problems
    assert (blank.code, blank.severity, blank.coder) == ("uncoded-unit", "warning", "cai")
    assert "left 2 units blank" in blank.message
    _fill(path, {"ENC-002": {"behaviour": "2 = Unaware"}})  # code and label do not match
    (problem,) = validate(cb, [path]).problems.errors
    assert (problem.code, problem.cell, problem.unit, problem.variable, problem.coder) == (
        "not-in-codebook",
        "D3",
        "ENC-002",
        "behaviour",
        "cai",
    )


def test_negative_code_entry_is_neutralised_and_still_read(tmp_path):
    variable = Variable(
        "stance",
        "nominal",
        categories=(Category(-1, "Retreat"), Category(1, "Hold")),
        missing=(MissingCode(99, "cannot be coded"),),
    )
    cb = Codebook(title="t", unit="unit", variables=(variable,))
    (path,) = write_templates(cb, ["dee"], tmp_path, ["U1"])
    wb = openpyxl.load_workbook(path)
    dv = wb[CODING_SHEET].data_validations.dataValidation[0]
    entries = _list_values(wb, dv.formula1)
    assert entries[0] == "'-1 = Retreat"  # a leading '-' is neutralised (formula injection)
    _fill(path, {"U1": {"stance": entries[0]}})
    result = validate(cb, [path])
    assert result.problems.codes() == []
    assert result.codings.frame["value"].tolist() == [-1]


def test_same_input_gives_same_bytes_and_filled_files_are_kept(tmp_path, cb):
    (first,) = write_templates(cb, ["ana"], tmp_path / "a", ["ENC-001"])
    (second,) = write_templates(cb, ["ana"], tmp_path / "b", ["ENC-001"])
    assert first.read_bytes() == second.read_bytes()
    write_templates(cb, ["ana"], tmp_path / "a", ["ENC-001"])  # same bytes: allowed
    _fill(first, {"ENC-001": {"species": 2}})
    filled = hashlib.sha256(first.read_bytes()).hexdigest()
    with pytest.raises(UsageError, match="already exists"):
        write_templates(cb, ["ana"], tmp_path / "a", ["ENC-001"])
    assert hashlib.sha256(first.read_bytes()).hexdigest() == filled
    write_templates(cb, ["ana"], tmp_path / "a", ["ENC-001"], overwrite=True)
    assert first.read_bytes() == second.read_bytes()


def test_outputs_never_replace_an_input(tmp_path, cb):
    unit_list = tmp_path / "ana.xlsx"
    unit_list.write_text("ENC-001\n", encoding="utf-8")
    with pytest.raises(UsageError, match="also an input"):
        write_templates(cb, ["ana"], tmp_path, ["ENC-001"], inputs=[unit_list], overwrite=True)
    assert unit_list.read_text(encoding="utf-8") == "ENC-001\n"


@pytest.mark.parametrize("coders", [["a/b"], ["ana", "ANA"], [""], [".hidden"], ["x:y"]])
def test_coder_names_must_be_file_names(tmp_path, cb, coders):
    with pytest.raises(UsageError):
        write_templates(cb, coders, tmp_path)
    assert not any(tmp_path.iterdir())


def test_unit_list_blank_lines_skipped_and_duplicates_refused(tmp_path):
    good = tmp_path / "units.txt"
    good.write_text("\ufeffU1\n\n  U2  \r\nU3\n", encoding="utf-8")
    assert read_unit_list(good) == ["U1", "U2", "U3"]
    bad = tmp_path / "twice.txt"
    bad.write_text("U1\nU2\nU1\n", encoding="utf-8")
    with pytest.raises(UsageError, match=r"'U1' twice \(lines 1 and 3\)"):
        read_unit_list(bad)
    latin = tmp_path / "latin.txt"
    latin.write_bytes("Üb-1\n".encode("latin-1"))
    with pytest.raises(UsageError, match="not UTF-8"):
        read_unit_list(latin)


def test_cli_json_lists_written_files_and_validate_accepts_them(tmp_path):
    out = tmp_path / "templates"
    args = ["template", "--codebook", str(CB_PATH), "--coders", "ana,ben,cai", "-o", str(out)]
    result = runner.invoke(app, [*args, "--units", str(UNITS), "--json"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data == {"files": [str(out / f"{c}.xlsx") for c in ("ana", "ben", "cai")], "units": 200}
    check = runner.invoke(app, ["validate", "--codebook", str(CB_PATH), str(out), "--json"])
    assert check.exit_code == 0
    summary = json.loads(check.stdout)["summary"]
    # blank templates: no error; nothing is coded yet, one warning per coder (issue 9, item 7)
    assert (summary["coders"], summary["units"], summary["errors"], summary["warnings"]) == (
        [],
        0,
        0,
        3,
    )
    problems = json.loads(check.stdout)["problems"]
    assert {(p["code"], p["coder"]) for p in problems} == {
        ("uncoded-unit", c) for c in ("ana", "ben", "cai")
    }
    assert all("left 200 units blank" in p["message"] for p in problems)


def test_cli_usage_errors_exit_2(tmp_path):
    base = ["template", "--codebook", str(CB_PATH), "-o", str(tmp_path)]
    assert runner.invoke(app, [*base, "--coders", "a/b"]).exit_code == 2
    assert (
        runner.invoke(app, [*base, "--coders", "ana", "--units", str(tmp_path / "none")]).exit_code
        == 2
    )
    assert runner.invoke(app, [*base]).exit_code == 2  # --coders is required


def test_limits_refuse_outside_values_when_no_missing_code_needs_them(tmp_path, codebook):
    # conftest's codebook: visitors is a count 0..100 without missing codes; distance_m has -1
    (path,) = write_templates(codebook, ["eve"], tmp_path)
    ws = openpyxl.load_workbook(path)[CODING_SHEET]
    letters = _header(ws)
    dvs = {
        str(dv.sqref).split(":")[0].rstrip("0123456789"): dv
        for dv in ws.data_validations.dataValidation
    }
    visitors = dvs[letters["visitors"]]
    assert (visitors.type, visitors.formula1, visitors.formula2) == ("whole", "0", "100")
    assert visitors.errorStyle == "stop"
    assert dvs[letters["distance_m"]].errorStyle == "warning"
    # no unit list: validations still cover DEFAULT_ROWS rows below the header
    assert str(visitors.sqref) == f"{letters['visitors']}2:{letters['visitors']}501"
    assert ws.max_row == 1


def test_large_and_fractional_limits_are_written_in_full(tmp_path):
    income = Variable("fine_paid", "ratio", range=(0.5, 2_500_000.0))
    cb = Codebook(title="t", unit="unit", variables=(income,))
    (path,) = write_templates(cb, ["fay"], tmp_path)
    (dv,) = openpyxl.load_workbook(path)[CODING_SHEET].data_validations.dataValidation
    assert (dv.type, dv.formula1, dv.formula2) == ("decimal", "0.5", "2500000")
    assert "from 0.5 to 2500000" in dv.prompt


def test_a_unit_list_longer_than_a_sheet_is_refused(tmp_path, cb, monkeypatch):
    """A coding sheet holds 1,048,576 rows with its header (ECMA-376 Part 1, 18.3.1.73): a unit
    list past that is refused before any workbook is made (the limit made small here)."""
    import coderel.io.tables as tables

    monkeypatch.setattr(tables, "SHEET_ROWS", 4)
    units = read_unit_list(UNITS)
    with pytest.raises(UsageError, match=r"'ana\.xlsx'.*would have 4 rows"):
        write_templates(cb, ["ana", "ben"], tmp_path / "out", units[:4])
    assert not (tmp_path / "out").exists()
    assert len(write_templates(cb, ["ana"], tmp_path / "out", units[:3])) == 1
