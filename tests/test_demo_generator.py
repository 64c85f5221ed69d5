"""The bundled demo: seeded generator, clean coder sheets, and the messy sheet's known problems.

Reliability figures are checked against the ``krippendorff`` package (Castro 2017,
https://github.com/pln-fing-udelar/fast-krippendorff), used here only as an outside reference.
Verdict bands follow Krippendorff (2004), *Content Analysis: An Introduction to Its Methodology*,
2nd ed., p. 241: alpha >= .800 reliable, .667 <= alpha < .800 tentative conclusions only.
"""

from __future__ import annotations

import csv
import datetime as dt
import importlib.util
import re
import sys
from pathlib import Path

import krippendorff
import numpy as np
import openpyxl
import pytest

from coderel.codebook.load import codebook_problems, load_codebook

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = ROOT / "scripts" / "generate_demo.py"
CODEBOOK = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
DEMO = ROOT / "demo"
CODERS = ("coder_ana", "coder_ben", "coder_cai")


def _load_generator():
    spec = importlib.util.spec_from_file_location("generate_demo", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("generate_demo", module)
    spec.loader.exec_module(module)
    return module


gen = _load_generator()


def _files(folder: Path) -> list[Path]:
    return sorted(p.relative_to(folder) for p in folder.rglob("*") if p.is_file())


def _cells(path: Path) -> list[list[tuple[object, str]]]:
    ws = openpyxl.load_workbook(path)["coding"]
    return [[(c.value, c.data_type) for c in row] for row in ws.iter_rows()]


def _sheet(path: Path) -> tuple[list[str], list[dict[str, object]]]:
    ws = openpyxl.load_workbook(path)["coding"]
    rows = list(ws.iter_rows(values_only=True))
    header = list(rows[0])
    return header, [dict(zip(header, r, strict=True)) for r in rows[1:]]


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    first = tmp_path_factory.mktemp("demo_a")
    second = tmp_path_factory.mktemp("demo_b")
    gen.generate(first)
    gen.generate(second)
    return first, second


@pytest.fixture(scope="module")
def codebook():
    return load_codebook(CODEBOOK)


def test_codebook_loads_without_problems(codebook):
    assert len(codebook_problems(CODEBOOK)) == 0
    assert codebook.unit == "report_id"
    assert codebook.text_columns == ("narrative",)
    assert codebook.names == gen.VARIABLES
    levels = {v.level for v in codebook.variables}
    assert levels == {"nominal", "ordinal", "interval", "ratio"}
    assert [v.name for v in codebook.variables if v.multiple] == ["actions"]
    assert codebook.variable("spray_worked").applies_when.includes == (3,)
    assert all(isinstance(c, str) for c in codebook.variable("time_of_day").codes)


def test_two_runs_give_identical_bytes(runs):
    first, second = runs
    assert _files(first) == _files(second)
    for rel in _files(first):
        assert (first / rel).read_bytes() == (second / rel).read_bytes(), rel


def test_committed_demo_equals_a_fresh_generation(runs):
    fresh, _ = runs
    committed = [p for p in _files(DEMO) if p.name != "README.md"]
    assert committed == _files(fresh)
    for rel in committed:
        if rel.suffix == ".xlsx":
            assert _cells(DEMO / rel) == _cells(fresh / rel), rel
        else:
            assert (DEMO / rel).read_text(encoding="utf-8") == (fresh / rel).read_text(
                encoding="utf-8"
            ), rel


def test_a_different_seed_gives_different_codings(tmp_path, runs):
    gen.generate(tmp_path, seed=7)
    assert _cells(tmp_path / "sheets" / "coder_ben.xlsx") != _cells(
        runs[0] / "sheets" / "coder_ben.xlsx"
    )


def test_sheets_layout_units_and_skips(codebook):
    units = (DEMO / "units.txt").read_text(encoding="utf-8").splitlines()
    assert len(units) == 200
    assert len(set(units)) == 200
    assert sorted(p.stem for p in (DEMO / "sheets").glob("*.xlsx")) == list(CODERS)
    expected_header = [codebook.unit, *codebook.text_columns, *codebook.names]
    coded = {}
    for coder in CODERS:
        header, rows = _sheet(DEMO / "sheets" / f"{coder}.xlsx")
        assert header == expected_header
        ids = [r["report_id"] for r in rows]
        assert len(ids) == len(set(ids))
        assert set(ids) <= set(units)
        assert all(r["narrative"] for r in rows)
        coded[coder] = set(ids)
    skipped = {c: len(set(units) - ids) for c, ids in coded.items()}
    assert skipped == {"coder_ana": 0, "coder_ben": 4, "coder_cai": 3}
    assert all(len(ids) >= 195 for ids in coded.values())


def _codes_of(cell: object) -> list[object]:
    if isinstance(cell, str) and ";" in cell:
        return [int(part) for part in cell.split(";")]
    return [cell]


def test_every_clean_value_is_valid_for_the_codebook(codebook):
    for coder in CODERS:
        _, rows = _sheet(DEMO / "sheets" / f"{coder}.xlsx")
        for row in rows:
            for var in codebook.variables:
                value = row[var.name]
                if value is None:
                    continue
                assert not isinstance(value, dt.datetime)
                if value in var.missing_codes:
                    continue
                if var.is_categorical:
                    codes = _codes_of(value) if var.multiple else [value]
                    assert all(c in var.codes for c in codes), (coder, row["report_id"], var.name)
                    assert len(codes) == len(set(codes))
                else:
                    assert isinstance(value, int | float)
                    low, high = var.range
                    assert low <= value <= high, (coder, row["report_id"], var.name)
                    if var.integer:
                        assert float(value).is_integer()
            # applies_when is respected by each coder's own values
            has_spray = 3 in _codes_of(row["actions"])
            assert (row["spray_worked"] is not None) == has_spray, (coder, row["report_id"])


def test_missing_codes_and_string_codes_occur(codebook):
    values = {name: [] for name in codebook.names}
    for coder in CODERS:
        _, rows = _sheet(DEMO / "sheets" / f"{coder}.xlsx")
        for row in rows:
            for name in codebook.names:
                values[name].append(row[name])
    assert 99 in values["behaviour"]
    assert 99 in values["temperature_c"]
    assert "unknown" in values["time_of_day"]
    assert {"dawn", "day", "dusk", "night"} <= set(values["time_of_day"])
    assert any(isinstance(v, str) and ";" in v for v in values["actions"])
    yes_share = values["food_present"].count(1) / len(values["food_present"])
    assert 0.02 <= yes_share <= 0.08  # a rare category


def _matrix(variable: str, missing: tuple[object, ...]) -> np.ndarray:
    units = (DEMO / "units.txt").read_text(encoding="utf-8").splitlines()
    time_codes = {"dawn": 0, "day": 1, "dusk": 2, "night": 3}
    data = np.full((len(CODERS), len(units)), np.nan)
    for i, coder in enumerate(CODERS):
        _, rows = _sheet(DEMO / "sheets" / f"{coder}.xlsx")
        by_unit = {r["report_id"]: r[variable] for r in rows}
        for j, unit in enumerate(units):
            value = by_unit.get(unit)
            if value is None or value in missing:
                continue
            data[i, j] = time_codes.get(value, value) if isinstance(value, str) else value
    return data


def test_demo_shows_every_verdict(codebook):
    """Alpha from the krippendorff package puts variables in all three bands (Krippendorff 2004)."""
    alpha = {}
    for var in codebook.variables:
        if var.multiple:
            continue
        data = _matrix(var.name, var.missing_codes)
        alpha[var.name] = krippendorff.alpha(reliability_data=data, level_of_measurement=var.level)
    assert alpha["species"] >= 0.9
    assert alpha["visitor_group_size"] >= 0.9
    assert 0.667 + 0.03 <= alpha["behaviour"] < 0.800 - 0.03
    assert alpha["severity"] < 0.6
    assert alpha["spray_worked"] < 0.667
    bands = {"reliable": 0, "tentative": 0, "unreliable": 0}
    for value in alpha.values():
        bands["reliable" if value >= 0.8 else "tentative" if value >= 0.667 else "unreliable"] += 1
    assert all(n >= 1 for n in bands.values()), alpha


def test_food_present_shows_the_prevalence_paradox():
    """High raw agreement with a low chance-corrected coefficient on a rare category."""
    data = _matrix("food_present", ())
    pairs = [(0, 1), (0, 2), (1, 2)]
    agree = np.mean(
        [
            np.nanmean(data[a] == data[b])
            for a, b in pairs
            if np.any(~np.isnan(data[a]) & ~np.isnan(data[b]))
        ]
    )
    value = krippendorff.alpha(reliability_data=data, level_of_measurement="nominal")
    assert agree >= 0.93
    assert value < 0.8


def test_strict_and_lenient_coders_shift_severity():
    data = _matrix("severity", (99,))
    ana, ben, cai = data
    both = ~np.isnan(ana) & ~np.isnan(ben) & ~np.isnan(cai)
    assert np.mean(ben[both]) < np.mean(ana[both]) < np.mean(cai[both])


def test_narratives_come_only_from_the_templates():
    vocabulary = gen.template_vocabulary()
    for coder in CODERS:
        _, rows = _sheet(DEMO / "sheets" / f"{coder}.xlsx")
        for row in rows:
            text = row["narrative"]
            unknown = set(gen.words(text)) - vocabulary
            assert not unknown, (coder, row["report_id"])
            assert not text.startswith(("=", "+", "-", "@"))
            assert re.fullmatch(r"[A-Za-z0-9 ,.;'°\-]+", text), (coder, row["report_id"])


# ---------------------------------------------------------------------------------------------
# The messy sheet
# ---------------------------------------------------------------------------------------------
REQUIRED_CODES = {
    "not-in-codebook",
    "normalised-label",
    "normalised-number",
    "normalised-space",
    "date-converted",
    "spreadsheet-error",
    "formula-no-value",
    "duplicate-unit",
    "unknown-column",
    "out-of-range",
    "not-a-number",
    "should-not-apply",
    "hidden-row",
    "merged-cells",
    "missing-unit-id",
}


@pytest.fixture(scope="module")
def expected():
    with open(DEMO / "messy_expected_problems.csv", encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def test_expected_problems_cover_every_required_code(expected):
    from coderel.problems import PROBLEM_CODES

    codes = [e["code"] for e in expected]
    assert set(codes) == REQUIRED_CODES | {"missing-column"}
    assert len(codes) == len(set(codes))
    assert set(codes) <= set(PROBLEM_CODES)
    assert {e["file"] for e in expected} == {"coder_dee.xlsx"}


def test_each_expected_problem_is_really_in_its_cell(expected, codebook):
    wb = openpyxl.load_workbook(DEMO / "messy" / "coder_dee.xlsx")
    ws = wb["coding"]
    header = [c.value for c in ws[1]]
    ids = [ws.cell(row=r, column=1).value for r in range(2, ws.max_row + 1)]
    by_code = {e["code"]: e for e in expected}

    def cell(code):
        return ws[by_code[code]["cell"]]

    def variable(code):
        return codebook.variable(by_code[code]["variable"])

    for e in expected:
        if e["cell"] and e["code"] != "unknown-column":
            row = int(re.sub(r"\D", "", e["cell"]))
            assert (ws.cell(row=row, column=1).value or "") == e["unit"]
    assert cell("not-in-codebook").value not in variable("not-in-codebook").codes
    label_cell = cell("normalised-label").value
    assert label_cell in {c.label for c in variable("normalised-label").categories}
    number = cell("normalised-number")
    assert number.data_type == "s"
    assert number.value.isdigit()
    spaced = cell("normalised-space").value
    assert spaced != spaced.strip()
    assert spaced.strip() in variable("normalised-space").codes
    assert isinstance(cell("date-converted").value, dt.datetime)
    assert variable("date-converted").is_categorical
    assert cell("spreadsheet-error").data_type == "e"
    assert cell("formula-no-value").data_type == "f"
    low, high = variable("out-of-range").range
    assert not low <= cell("out-of-range").value <= high
    text = cell("not-a-number").value
    assert isinstance(text, str)
    with pytest.raises(ValueError):
        float(text)
    assert variable("not-a-number").is_numeric
    spray = cell("should-not-apply")
    assert spray.value is not None
    actions = ws.cell(row=spray.row, column=header.index("actions") + 1).value
    assert 3 not in _codes_of(actions)
    duplicate = by_code["duplicate-unit"]["unit"]
    assert ids.count(duplicate) == 2
    assert ws.row_dimensions[cell("hidden-row").row].hidden
    merged = [str(r) for r in ws.merged_cells.ranges]
    assert by_code["merged-cells"]["note"].endswith(merged[0])
    assert merged[0].startswith(by_code["merged-cells"]["cell"] + ":")
    orphan = cell("missing-unit-id").row
    assert ws.cell(row=orphan, column=1).value is None
    assert any(c.value is not None for c in ws[orphan][2:])
    unknown = cell("unknown-column").value
    assert unknown not in codebook.names
    assert "food_present" not in header


def test_messy_sheet_has_no_other_deliberate_oddities(expected, codebook):
    """Cells outside the listed ones hold valid values, so the list is the whole story."""
    ws = openpyxl.load_workbook(DEMO / "messy" / "coder_dee.xlsx")["coding"]
    listed = {e["cell"] for e in expected if e["cell"]}
    header = [c.value for c in ws[1]]
    for row in ws.iter_rows(min_row=2):
        for c in row[2:]:
            name = header[c.column - 1]
            if c.coordinate in listed or name not in codebook or c.value is None:
                continue
            var = codebook.variable(name)
            if var.is_categorical:
                codes = _codes_of(c.value) if var.multiple else [c.value]
                assert all(code in var.codes for code in codes), c.coordinate
            else:
                low, high = var.range
                assert isinstance(c.value, int | float)
                assert low <= c.value <= high, c.coordinate
