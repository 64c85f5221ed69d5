"""Write the bad-input corpus: one small file per case, each with known problems.

Run ``python tests/data/bad_inputs/make_corpus.py`` to regenerate the files beside this script;
the output is byte-for-byte reproducible (fixed zip times, fixed workbook dates), and
tests/test_bad_inputs.py checks that the checked-in files equal a fresh run. The expected
problems of every file are listed in that test. Codebook: ``codebook.yaml`` beside this script;
every coding sheet has the columns A report_id, B narrative, C animal, D behaviour, E contact,
F injury, G distance_m, H factors, I trail. All names and reports are invented.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import sys
import zipfile
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import openpyxl
import pandas as pd

from coderel.io.tables import workbook_bytes

HERE = Path(__file__).resolve().parent
HEADER = [
    "report_id",
    "narrative",
    "animal",
    "behaviour",
    "contact",
    "injury",
    "distance_m",
    "factors",
    "trail",
]
# Two clean rows every sheet may start from (contact 2 = No, so injury stays blank).
CLEAN = [
    ["R-01", "A bear crossed the trail.", 1, 2, 2, None, 40, "3", "NA"],
    ["R-02", "An elk grazed by the lake.", 2, 1, 2, None, 120, "1;3", "S"],
]
OLE2_MAGIC = bytes.fromhex("D0CF11E0A1B11AE1")
_ZIP_TIME = (1980, 1, 1, 0, 0, 0)


# ---- writers ---------------------------------------------------------------------------------
def _csv_text(rows: Sequence[Sequence[Any]]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    for row in rows:
        writer.writerow(["" if v is None else v for v in row])
    return buffer.getvalue()


def _workbook(sheets: dict[str, Sequence[Sequence[Any]]]) -> openpyxl.Workbook:
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for row in rows:
            ws.append(list(row))
    return wb


def _zip(entries: Sequence[tuple[str, bytes]]) -> bytes:
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in entries:
            info = zipfile.ZipInfo(name, date_time=_ZIP_TIME)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o600 << 16
            archive.writestr(info, data)
    return out.getvalue()


def _workbook_parts() -> list[tuple[str, bytes]]:
    """The two parts whose names make a zip look like a workbook (content is irrelevant here)."""
    return [("[Content_Types].xml", b"<Types/>"), ("xl/workbook.xml", b"<workbook/>")]


# ---- refused files ---------------------------------------------------------------------------
def legacy_xls() -> bytes:
    """An OLE2 compound file: the header of every legacy .xls workbook, then padding."""
    return OLE2_MAGIC + bytes(504) + "Workbook".encode("utf-16-le") + bytes(512)


def encrypted_xlsx() -> bytes:
    """An OLE2 container holding an EncryptedPackage stream, as a password-protected .xlsx is."""
    return (
        OLE2_MAGIC
        + bytes(504)
        + "EncryptionInfo".encode("utf-16-le")
        + bytes(18)
        + "EncryptedPackage".encode("utf-16-le")
        + bytes(512)
    )


def corrupt_xlsx() -> bytes:
    """A zip's local-header magic followed by garbage: no readable central directory."""
    return b"PK\x03\x04" + bytes(range(256)) * 4


def bomb_xlsx() -> bytes:
    """One 4 MB part of zeros (compresses about 1000:1): over the default ratio limit of 200."""
    return _zip([*_workbook_parts(), ("xl/worksheets/sheet1.xml", bytes(4 * 1024 * 1024))])


def many_entries_xlsx() -> bytes:
    """60 tiny entries: refused by a limit of 50 entries (the test passes that limit)."""
    return _zip([*_workbook_parts(), *((f"xl/media/part{i:02d}.bin", b"x") for i in range(58))])


def over_budget_xlsx() -> bytes:
    """Three 600 kB parts of zeros (1.8 MB unpacked, each below the ratio floor of 1 MB):
    refused by an unpacked-size budget of 1 MB (the test passes that limit)."""
    parts = [(f"xl/worksheets/sheet{i}.xml", bytes(600 * 1024)) for i in (1, 2, 3)]
    return _zip([*_workbook_parts(), *parts])


def entities_xlsx() -> bytes:
    """A real workbook whose sheet XML declares nested entities (a "billion laughs" attack).

    openpyxl parses workbook XML through defusedxml, which refuses entity declarations; the
    workbook is then refused as unreadable instead of expanding in memory.
    """
    laughs = "".join(
        f'<!ENTITY l{i} "{("&l" + str(i - 1) + ";") * 10 if i else "ha"}">' for i in range(8)
    )
    doctype = f"<!DOCTYPE worksheet [{laughs}]>".encode()
    source = zipfile.ZipFile(io.BytesIO(wrong_code_xlsx()))
    entries = []
    for info in source.infolist():
        data = source.read(info.filename)
        if info.filename == "xl/worksheets/sheet1.xml":
            data = doctype + data.replace(b"<t>narrative</t>", b"<t>&l7;</t>")
        entries.append((info.filename, data))
    return _zip(entries)


# ---- sheets with cell problems ---------------------------------------------------------------
def latin1_csv() -> bytes:
    """A CSV saved as Latin-1: the e-acute on line 3 is not UTF-8."""
    rows = [HEADER, CLEAN[0], ["R-02", "Elk near the caf\u00e9.", 2, 1, 2, None, 120, "1", "S"]]
    return _csv_text(rows).encode("latin-1")


def cells_xlsx() -> bytes:
    """One problem per row from row 4 on, each in a known cell (rows 2-3 are clean)."""
    wb = _workbook({"coding": [HEADER, *CLEAN]})
    ws = wb["coding"]
    rows = [
        # factors 1-3 turned into a date (3 January) by a spreadsheet -> H4
        ["R-03", "Cougar tracks.", 3, 2, 2, None, 300, dt.datetime(2026, 1, 3), "S"],
        # distance is the error value #N/A -> G5
        ["R-04", "Bear at dusk.", 1, 3, 2, None, "#N/A", "2", "S"],
        # behaviour is a formula whose result was never stored -> D6
        ["R-05", "Elk bugling.", 2, "=1+1", 2, None, 80, "1", "NA"],
        # the label Alert typed instead of code 2 -> D7 (warning)
        ["R-06", "Elk stared.", 2, "Alert", 2, None, 60, "1", "S"],
        # animal 2 stored as the text 2.0 -> C8, contact " 2 " with spaces -> E8 (warnings)
        ["R-07", "Elk left.", "2.0", 1, " 2 ", None, 90, "1", "S"],
        # trail holds the code NA (north approach), which must stay a code: no problem
        ["R-08", "Bear on the north approach.", 1, 1, 2, None, 15, "3", "NA"],
    ]
    for row in rows:
        ws.append(row)
    ws["C8"].number_format = "@"
    return workbook_bytes(wb)


def dates_csv() -> bytes:
    """A CSV saved by a spreadsheet after it turned typed codes into dates (text such as 3-Jan)."""
    rows = [
        HEADER,
        ["R-01", "Bear and elk.", 1, 2, 2, None, 40, "3-Jan", "S"],  # H2: 1-3 became 3 January
        ["R-02", "Elk herd.", 2, 1, 2, None, 120, "Jan-03", "S"],  # H3: another locale's form
        ["R-03", "Cougar far off.", 3, 1, 2, None, "2026-01-03", "1", "S"],  # G4
        ["R-04", "Bear by the bins.", 1, 2, 2, None, 10, "1-3", "S"],  # H5: typed 1-3, no date
    ]
    return _csv_text(rows).encode("utf-8")


def wrong_code_xlsx() -> bytes:
    """behaviour 7 in D3 (unit R-02): not a code of behaviour."""
    rows = [HEADER, CLEAN[0], ["R-02", "An elk grazed.", 2, 7, 2, None, 120, "1;3", "S"]]
    return workbook_bytes(_workbook({"coding": rows}))


def cached_formula_xlsx() -> bytes:
    """D2 holds the formula 1+1 with its stored result 2, as a spreadsheet program saves it."""
    formula = b'<c r="D2"><f>1+1</f><v>2</v></c>'
    source = zipfile.ZipFile(io.BytesIO(workbook_bytes(_workbook({"coding": [HEADER, *CLEAN]}))))
    entries = []
    for info in source.infolist():
        data = source.read(info.filename)
        if info.filename == "xl/worksheets/sheet1.xml":
            assert b'<c r="D2" t="n"><v>2</v></c>' in data
            data = data.replace(b'<c r="D2" t="n"><v>2</v></c>', formula)
        entries.append((info.filename, data))
    return _zip(entries)


def ragged_csv() -> bytes:
    """Row 2 (R-01) stops after behaviour; row 3 (R-02) has a tenth cell under no header (J)."""
    text = _csv_text([HEADER, CLEAN[0][:4], [*CLEAN[1], "extra"]])
    return text.encode("utf-8")


def long_ragged_csv() -> bytes:
    """A long table whose row 3 stops after the coder (no variable, no value)."""
    return _csv_text(
        [["unit", "coder", "variable", "value"], ["R-01", "ana", "animal", "1"], ["R-01", "ana"]]
    ).encode("utf-8")


def columns_csv() -> bytes:
    """A typo in a header (distnce_m, G1), hence no distance_m column, and R-01 twice (A4)."""
    header = [h if h != "distance_m" else "distnce_m" for h in HEADER]
    rows = [header, *CLEAN, ["R-01", "Repeated row.", 1, 2, 2, None, 40, "3", "NA"]]
    return _csv_text(rows).encode("utf-8")


def empty_xlsx() -> bytes:
    """A workbook whose only sheet is blank."""
    return workbook_bytes(_workbook({"coding": []}))


def header_only_csv() -> bytes:
    return _csv_text([HEADER]).encode("utf-8")


def layout_xlsx() -> bytes:
    """Row 3 (R-02) hidden, column G (distance_m) hidden, B4:B5 merged."""
    rows = [
        HEADER,
        *CLEAN,
        ["R-03", "Bear and cub.", 1, 2, 2, None, 50, "1", "S"],
        ["R-04", None, 1, 2, 2, None, 55, "1", "S"],
    ]
    wb = _workbook({"coding": rows})
    ws = wb["coding"]
    ws.row_dimensions[3].hidden = True
    ws.column_dimensions["G"].hidden = True
    ws.merge_cells("B4:B5")
    return workbook_bytes(wb)


def skip_logic_csv() -> bytes:
    """R-03 has contact 2 but an injury (F4); R-04 has contact 1 and no injury (F5)."""
    rows = [
        HEADER,
        *CLEAN,
        ["R-03", "Elk walked off.", 2, 2, 2, 1, 30, "1", "S"],
        ["R-04", "Bear swatted a pack.", 1, 3, 1, None, 2, "1", "S"],
        ["R-05", "Bear bumped a hiker.", 1, 3, 1, 2, 0, "2", "S"],
    ]
    return _csv_text(rows).encode("utf-8")


def _two_coders() -> dict[str, list[list[Any]]]:
    ana = [HEADER, *CLEAN]
    ben = [HEADER, CLEAN[0], ["R-02", "An elk grazed by the lake.", 2, 2, 2, None, 110, "1", "S"]]
    return {"ana": ana, "ben": ben}


def per_sheet_xlsx() -> bytes:
    """One workbook, one sheet per coder (ana, ben)."""
    return workbook_bytes(_workbook(_two_coders()))


def coder_column_csv() -> bytes:
    """One table with a coder column; the coders' rows are interleaved."""
    sheets = _two_coders()
    rows = [[*HEADER, "coder"]]
    for i in (1, 2):
        for coder in ("ana", "ben"):
            rows.append([*sheets[coder][i], coder])
    return _csv_text(rows).encode("utf-8")


def same_coder_csv() -> bytes:
    return _csv_text([HEADER, *CLEAN]).encode("utf-8")


def same_coder_xlsx() -> bytes:
    return workbook_bytes(_workbook({"coding": [HEADER, CLEAN[1]]}))


def long_rows() -> list[list[Any]]:
    """The two coders of :func:`_two_coders` as a long table (text values, as in a CSV)."""
    rows: list[list[Any]] = [["unit", "coder", "variable", "value"]]
    for coder, sheet in _two_coders().items():
        for row in sheet[1:]:
            for name, value in zip(HEADER[1:], row[1:], strict=True):
                if value is not None:
                    rows.append([row[0], coder, name, str(value)])
    return rows


def long_csv() -> bytes:
    return _csv_text(long_rows()).encode("utf-8")


def long_parquet() -> bytes:
    rows = long_rows()
    frame = pd.DataFrame(rows[1:], columns=rows[0]).astype("string")
    buffer = io.BytesIO()
    frame.to_parquet(buffer, index=False, engine="pyarrow", compression="snappy")
    return buffer.getvalue()


def long_bad_header_csv() -> bytes:
    """A long table whose header names its columns id, coder, variable, value."""
    rows = long_rows()
    return _csv_text([["id", "coder", "variable", "value"], *rows[1:3]]).encode("utf-8")


CASES: dict[str, Callable[[], bytes]] = {
    "legacy.xls": legacy_xls,
    "legacy_renamed.xlsx": legacy_xls,
    "encrypted.xlsx": encrypted_xlsx,
    "corrupt.xlsx": corrupt_xlsx,
    "bomb.xlsx": bomb_xlsx,
    "many_entries.xlsx": many_entries_xlsx,
    "over_budget.xlsx": over_budget_xlsx,
    "entities.xlsx": entities_xlsx,
    "latin1.csv": latin1_csv,
    "cells.xlsx": cells_xlsx,
    "dates.csv": dates_csv,
    "wrong_code.xlsx": wrong_code_xlsx,
    "cached_formula.xlsx": cached_formula_xlsx,
    "ragged.csv": ragged_csv,
    "long_ragged.csv": long_ragged_csv,
    "columns.csv": columns_csv,
    "empty.xlsx": empty_xlsx,
    "header_only.csv": header_only_csv,
    "layout.xlsx": layout_xlsx,
    "skip_logic.csv": skip_logic_csv,
    "per_sheet.xlsx": per_sheet_xlsx,
    "coder_column.csv": coder_column_csv,
    "same_coder/ana.csv": same_coder_csv,
    "same_coder/ana.xlsx": same_coder_xlsx,
    "long.csv": long_csv,
    "long.parquet": long_parquet,
    "long_bad_header.csv": long_bad_header_csv,
}


def generate(folder: Path = HERE) -> list[Path]:
    """Write every case into ``folder``; return the paths written."""
    written = []
    for name, make in CASES.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(make())
        written.append(path)
    return written


if __name__ == "__main__":
    for path in generate(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE):
        print(path)
