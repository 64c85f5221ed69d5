"""The bad-input corpus: every case a small file with the exact problems it must produce.

Files and codebook live in tests/data/bad_inputs/ and are written by make_corpus.py there; each
expected problem below was read off the file as built (the row and column a value was put in by
the script), not off coderel's output. Cells are named as a spreadsheet names them; for CSV the
row number counts CSV records with the header as row 1.

Outside references for the refusals: the OLE2 compound-file signature ``D0 CF 11 E0 A1 B1 1A E1``
(Microsoft, [MS-CFB] Compound File Binary File Format, section 2.2 "Compound File Header"), the
``EncryptedPackage`` stream of a password-protected OOXML file ([MS-OFFCRYPTO] Office Document
Cryptography Structure, section 2.3.4.4), and the "billion laughs" entity expansion that
defusedxml forbids (defusedxml README, "Attack vectors").
"""

from __future__ import annotations

import datetime as dt
import importlib.util
import json
import sys
from pathlib import Path

import openpyxl
import openpyxl.xml
import pandas as pd
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.io.archive import Limits
from coderel.io.read import read_codings
from coderel.io.xlsx import XML_DEFUSED

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "tests" / "data" / "bad_inputs"
CB_PATH = DATA / "codebook.yaml"
DEMO_CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SMALL_LIMITS = Limits(max_entries=50, max_uncompressed_bytes=1_000_000)
runner = CliRunner()


def _load_corpus_script():
    spec = importlib.util.spec_from_file_location("make_corpus", DATA / "make_corpus.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("make_corpus", module)
    spec.loader.exec_module(module)
    return module


corpus = _load_corpus_script()


@pytest.fixture(scope="module")
def cb():
    return load_codebook(CB_PATH)


def _read(cb, *names: str, limits: Limits = SMALL_LIMITS, folder: Path = DATA):
    return read_codings(cb, [folder / n for n in names], limits=limits)


def _found(codings) -> list[tuple]:
    return [(p.code, p.cell, p.unit, p.variable) for p in codings.problems]


# ---- refused files: exit code 3, one input-refused problem naming the reason ---------------------
REFUSED = {
    "legacy.xls": "is a legacy .xls workbook",
    "legacy_renamed.xlsx": "is a legacy .xls workbook",
    "encrypted.xlsx": "is a password-protected (encrypted) workbook",
    "corrupt.xlsx": "is a damaged workbook",
    "bomb.xlsx": "has a part that expands 1028 times when unpacked (limit 200)",
    "many_entries.xlsx": "holds 60 archive entries, over the limit of 50",
    "over_budget.xlsx": "unpacks to 2 MB, over the limit of 1 MB",
    "entities.xlsx": "holds XML with entity or DTD declarations",
}


@pytest.mark.parametrize(("name", "reason"), REFUSED.items())
def test_refused_files(cb, name, reason):
    codings = _read(cb, name)
    (problem,) = codings.problems
    assert (problem.code, problem.severity, problem.file) == ("input-refused", "error", name)
    assert reason in problem.message
    assert "coderel reads .xlsx workbooks, UTF-8 .csv files and .parquet files" in (
        problem.message + problem.hint
    )
    assert codings.frame.empty


def test_default_limits_let_an_ordinary_archive_of_60_entries_through(cb):
    codings = _read(cb, "many_entries.xlsx", limits=Limits())
    # past the archive checks: its parts are not a real workbook, so openpyxl cannot read it
    (problem,) = codings.problems
    assert "cannot be read as a workbook" in problem.message


def test_a_refused_file_does_not_stop_the_others_and_exits_3():
    args = ["validate", "--codebook", str(CB_PATH), str(DATA / "encrypted.xlsx")]
    result = runner.invoke(app, [*args, str(DATA / "per_sheet.xlsx"), "--json"])
    assert result.exit_code == 3
    data = json.loads(result.stdout)
    assert [p["code"] for p in data["problems"]] == ["input-refused"]
    assert data["summary"]["coders"] == ["ana", "ben"]


def test_openpyxl_parses_through_defusedxml():
    assert openpyxl.xml.DEFUSEDXML is True
    assert XML_DEFUSED is True


# ---- sheets with problems in known cells ---------------------------------------------------------
EXPECTED: dict[str, list[tuple]] = {
    "latin1.csv": [("encoding", None, None, None)],
    "cells.xlsx": [
        ("date-converted", "H4", "R-03", "factors"),
        ("spreadsheet-error", "G5", "R-04", "distance_m"),
        ("formula-no-value", "D6", "R-05", "behaviour"),
        ("normalised-label", "D7", "R-06", "behaviour"),
        ("normalised-number", "C8", "R-07", "animal"),
        ("normalised-space", "E8", "R-07", "contact"),
    ],
    "dates.csv": [
        ("date-converted", "H2", "R-01", "factors"),
        ("date-converted", "H3", "R-02", "factors"),
        ("date-converted", "G4", "R-03", "distance_m"),
        ("not-in-codebook", "H5", "R-04", "factors"),
    ],
    "wrong_code.xlsx": [("not-in-codebook", "D3", "R-02", "behaviour")],
    "cached_formula.xlsx": [],
    # line 3 has one cell past the header's nine: RFC 4180 (section 2.4) wants the same number
    # of fields on every line; the cells under the header are still read
    "ragged.csv": [("ragged-row", "J3", None, None)],
    "long_ragged.csv": [("unknown-variable", "C3", "R-01", None)],
    "columns.csv": [
        ("unknown-column", "G1", None, None),
        ("missing-column", None, None, "distance_m"),
        ("duplicate-unit", "A4", "R-01", None),
    ],
    "empty.xlsx": [("empty-sheet", None, None, None)],
    "header_only.csv": [("empty-sheet", None, None, None)],
    "layout.xlsx": [
        ("hidden-column", "G1", None, "distance_m"),
        ("hidden-row", "A3", "R-02", None),
        ("merged-cells", "B4", "R-03", None),
    ],
    "skip_logic.csv": [
        ("should-not-apply", "F4", "R-03", "injury"),
        ("should-apply", "F5", "R-04", "injury"),
    ],
    "same_coder": [("duplicate-coder", None, None, None)],
    "long_bad_header.csv": [("long-format", None, None, None)],
    "per_sheet.xlsx": [],
    "coder_column.csv": [],
    "long.csv": [],
    "long.parquet": [],
}


@pytest.mark.parametrize(("name", "expected"), EXPECTED.items())
def test_exact_problems(cb, name, expected):
    assert _found(_read(cb, name)) == expected


def test_problem_details_name_value_place_and_fix(cb):
    latin = _read(cb, "latin1.csv").problems[0]
    assert latin.line == 3
    assert "not UTF-8" in latin.message
    assert "CSV UTF-8" in latin.hint
    cells = {p.code: p for p in _read(cb, "cells.xlsx").problems}
    assert "format the column as Text" in cells["date-converted"].hint
    assert "#N/A" in cells["spreadsheet-error"].message
    assert cells["normalised-label"].message == "the label 'Alert' was read as code 2"
    assert cells["normalised-label"].severity == "warning"
    assert {p.coder for p in cells.values()} == {"cells"}
    columns = {p.code: p for p in _read(cb, "columns.csv").problems}
    assert columns["unknown-column"].hint.startswith("did you mean 'distance_m'?")
    assert "first in A2" in columns["duplicate-unit"].message
    same = _read(cb, "same_coder").problems[0]
    assert (same.file, same.coder) == ("ana.xlsx", "ana")
    assert "already comes from ana.csv" in same.message


def test_values_read_from_the_cells_sheet(cb):
    frame = _read(cb, "cells.xlsx").frame
    value = frame.set_index(["unit", "variable"])["value"]
    assert value[("R-06", "behaviour")] == 2  # label -> code
    assert value[("R-07", "animal")] == 2  # text 2.0 -> code 2
    assert value[("R-07", "contact")] == 2  # spaces removed
    assert value[("R-08", "trail")] == "NA"  # the code NA is a code, not a missing value
    assert value[("R-01", "trail")] == "NA"
    for unit, name in [("R-03", "factors"), ("R-04", "distance_m"), ("R-05", "behaviour")]:
        assert value[(unit, name)] is None  # invalid cells reach no statistic


def test_cached_formula_result_and_ragged_rows_are_read(cb):
    cached = _read(cb, "cached_formula.xlsx").frame.set_index(["unit", "variable"])["value"]
    assert cached[("R-01", "behaviour")] == 2  # the stored result of =1+1
    ragged = _read(cb, "ragged.csv").frame.set_index(["unit", "variable"])["value"]
    assert ragged[("R-01", "behaviour")] == 2
    assert ragged[("R-01", "trail")] is None  # cells after the row's end are blank
    assert ragged[("R-02", "trail")] == "S"


def test_code_na_in_csv_is_kept(cb, tmp_path):
    sheet = tmp_path / "ana.csv"
    sheet.write_text(
        "report_id,narrative,animal,behaviour,contact,injury,distance_m,factors,trail\n"
        "R-1,,1,1,2,,5,1,NA\n",
        encoding="utf-8",
    )
    codings = read_codings(cb, [sheet])
    assert _found(codings) == []
    assert codings.frame.set_index("variable").loc["trail", "value"] == "NA"


def _tidy(codings) -> pd.DataFrame:
    cols = ["unit", "coder", "variable", "value", "missing"]
    frame = codings.frame[cols].astype(object)
    return frame.sort_values(cols[:3]).reset_index(drop=True)


def test_sheet_per_coder_coder_column_and_long_tables_read_the_same(cb):
    base = _tidy(_read(cb, "per_sheet.xlsx"))
    assert sorted(set(base["coder"])) == ["ana", "ben"]
    assert len(base) == 2 * 2 * 7
    for name in ("coder_column.csv", "long.csv", "long.parquet"):
        pd.testing.assert_frame_equal(_tidy(_read(cb, name)), base, obj=name)


def test_wrong_code_in_a_known_cell_via_validate_json():
    result = runner.invoke(
        app, ["validate", "--codebook", str(CB_PATH), str(DATA / "wrong_code.xlsx"), "--json"]
    )
    assert result.exit_code == 1
    (problem,) = json.loads(result.stdout)["problems"]
    assert {k: problem[k] for k in ("code", "file", "sheet", "cell", "unit", "variable")} == {
        "code": "not-in-codebook",
        "file": "wrong_code.xlsx",
        "sheet": "coding",
        "cell": "D3",
        "unit": "R-02",
        "variable": "behaviour",
    }
    assert problem["coder"] == "wrong_code"
    assert problem["message"] == "'7' is not a code of behaviour"


#: Files written byte by byte by the script itself (no zip or workbook library involved).
BYTE_STABLE = {
    "legacy.xls",
    "legacy_renamed.xlsx",
    "encrypted.xlsx",
    "corrupt.xlsx",
    "latin1.csv",
    "dates.csv",
    "ragged.csv",
    "long_ragged.csv",
    "columns.csv",
    "header_only.csv",
    "skip_logic.csv",
    "coder_column.csv",
    "ana.csv",
    "long.csv",
    "long_bad_header.csv",
}


# ---- the corpus itself ---------------------------------------------------------------------------
def test_corpus_script_reproduces_the_checked_in_files(tmp_path, cb):
    first = corpus.generate(tmp_path / "a")
    second = corpus.generate(tmp_path / "b")
    for a, b in zip(first, second, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name
    for path in first:
        rel = path.relative_to(tmp_path / "a")
        committed = DATA / rel
        assert committed.is_file(), rel
        if rel.name in BYTE_STABLE:
            assert committed.read_bytes() == path.read_bytes(), rel
        else:  # zip, workbook and parquet bytes depend on library versions; content must not
            ours = _read(cb, rel.name, folder=committed.parent)
            fresh = _read(cb, rel.name, folder=path.parent)
            assert _found(ours) == _found(fresh), rel
            pd.testing.assert_frame_equal(_tidy(ours), _tidy(fresh), obj=str(rel))


# ---- wide == long on the demo ---------------------------------------------------------------------
def _demo_long(tmp_path: Path) -> dict[str, Path]:
    """The demo's three wide sheets rewritten as one long table (csv, xlsx, parquet)."""
    demo_cb = load_codebook(DEMO_CB)
    rows = []
    for path in sorted((ROOT / "demo" / "sheets").glob("*.xlsx")):
        ws = openpyxl.load_workbook(path, data_only=True)["coding"]
        values = list(ws.iter_rows(values_only=True))
        header = values[0]
        for record in values[1:]:
            cells = dict(zip(header, record, strict=True))
            for name in (*demo_cb.text_columns, *demo_cb.names):
                if cells.get(name) is not None:
                    rows.append([cells[demo_cb.unit], path.stem, name, cells[name]])
    assert not any(isinstance(r[3], dt.datetime) for r in rows)
    columns = ["unit", "coder", "variable", "value"]
    text = pd.DataFrame([[*r[:3], str(r[3])] for r in rows], columns=columns)
    out = {"csv": tmp_path / "long.csv", "xlsx": tmp_path / "long.xlsx"}
    text.to_csv(out["csv"], index=False)
    wb = openpyxl.Workbook()
    wb.active.append(columns)
    for r in rows:
        wb.active.append(r)  # typed cells, as a spreadsheet holds them
    wb.save(out["xlsx"])
    out["parquet"] = tmp_path / "long.parquet"
    text.astype("string").to_parquet(out["parquet"], index=False)
    return out


def test_demo_wide_and_long_give_the_same_codings(tmp_path):
    demo_cb = load_codebook(DEMO_CB)
    wide = read_codings(demo_cb, [ROOT / "demo" / "sheets"])
    expected = _tidy(wide)
    assert len(expected) == len(wide.frame)
    wide_problems = sorted(_found(wide))
    texts = wide.texts.sort_values(["unit", "coder"]).reset_index(drop=True)
    for form, path in _demo_long(tmp_path).items():
        long = read_codings(demo_cb, [path])
        pd.testing.assert_frame_equal(_tidy(long), expected, obj=form)
        assert sorted(_found(long)) == wide_problems, form
        assert [p.code for p in long.problems] == ["partial-unit"] * len(long.problems)
        long_texts = long.texts.sort_values(["unit", "coder"]).reset_index(drop=True)
        assert long_texts["text"].tolist() == texts["text"].tolist(), form


def test_date_like_text_is_a_date_only_when_it_is_no_code():
    from coderel.codebook import Category, Variable
    from coderel.normalise import normalise_cell

    months = Variable("month", "nominal", categories=(Category("May-1", "first of May"),))
    assert normalise_cell(months, "May-1", typed=False).value == "May-1"
    found = normalise_cell(months, "May-2", typed=False).findings
    assert [f.code for f in found] == ["date-converted"]


def test_a_notes_sheet_beside_the_coding_sheet_is_reported_with_a_way_out(cb, tmp_path):
    template = tmp_path / "ana.xlsx"
    template.write_bytes((DATA / "wrong_code.xlsx").read_bytes())
    wb = openpyxl.load_workbook(template)
    wb.create_sheet("notes").append(["R-02: check the elk's behaviour"])
    wb.save(template)
    problems = [p for p in read_codings(cb, [template]).problems if p.sheet == "notes"]
    assert [p.code for p in problems] == ["unknown-column", "missing-unit-column"]
    assert "hide it" in problems[1].hint
    wb["notes"].sheet_state = "hidden"
    wb.save(template)
    codings = read_codings(cb, [template])
    assert codings.coders == ["ana"]
    assert [p.code for p in codings.problems] == ["not-in-codebook"]
