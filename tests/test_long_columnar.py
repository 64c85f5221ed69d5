"""Long tables read column by column (coderel.io.long_columnar) give exactly what the row-by-row
reader gives: the same long table, the same narrative texts and the same problems, with the same
places, in the same order. The row reader is the reference here; the bad-input corpus
(tests/test_bad_inputs.py) checks both against hand-written expectations.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import coderel.io.read as read_module
from coderel.codebook.load import load_codebook
from coderel.io import long_columnar
from coderel.io.read import read_codings

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"

# Raw values of every kind a long table meets: codes, labels, spaces, missing codes, numbers as
# text, floats for integer codes, wrong codes, blanks, multi-select sets, dates as text.
VALUES = {
    "species": ["1", "2", " 3", "Elk", "99", "8", "", "2.0", "black bear"],
    "behaviour": ["1", "4", "5", "7", "99", " ", "x"],
    "visitor_distance_m": ["10", "12.5", "600", "999", "-3", "abc", "3-Jan", "0"],
    "severity": ["0", "1", "3", "99"],
    "time_of_day": ["dawn", "Dusk", "night", "unknown", "noon"],
    "visitor_group_size": ["1", "2", "2.5", "99", "70"],
    "temperature_c": ["-5", "12", "40", "41", "99"],
    "food_present": ["1", "2", "Yes", "3"],
    "actions": ["1", "1;6", "3", "3;2", "6;1", "9", "99", "#N/A"],
    "spray_worked": ["1", "2", "3", "99", ""],
    "narrative": ["the elk ran", "", "a bear close"],
}


def _rows(seed: int, n_units: int = 40, delimiter: str = ",") -> list[tuple[str, str, str, str]]:
    rng = np.random.default_rng(seed)
    rows = []
    names = list(VALUES)
    for u in range(n_units):
        for coder in ("ana", "ben", "cai"):
            for name in names:
                if rng.random() < 0.15:
                    continue  # a variable not given: filled as blank
                value = str(rng.choice(VALUES[name]))
                if delimiter not in value:
                    rows.append((f"R{u:03d}", coder, name, value))
    extras = [
        ("", "ana", "species", "1"),  # no unit ID
        ("R001", "", "species", "1"),  # no coder
        ("R002", "ana", "specie", "1"),  # unknown variable (close to species)
        ("R002", "ana", "", "1"),  # blank name
        ("R003", "ben", "species", "2"),  # repeated row (if present)
        ("R003", "ben", "SPECIES", "3"),  # repeated, other case
        ("R004", "cai", "narrative", "again"),  # repeated text
        (" R005 ", "ana", "behaviour", "2"),  # spaces around the unit
        ("R900", "dan", "species", "1"),  # a partial unit
        ("", "", "", ""),  # an all-blank row
    ]
    for extra in extras:
        rows.insert(int(rng.integers(0, len(rows))), extra)
    return rows


def _write_csv(path: Path, rows, delimiter: str = ",") -> None:
    lines = [delimiter.join(("unit", "coder", "variable", "value"))]
    lines += [delimiter.join(r) for r in rows]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _read_both(cb, paths, monkeypatch):
    fast = read_codings(cb, paths)
    used = []
    real = read_module._read_long_columns

    def spy(*args):
        used.append(real(*args))
        return used[-1]

    monkeypatch.setattr(read_module, "_read_long_columns", spy)
    read_codings(cb, paths)
    monkeypatch.setattr(read_module, "_read_long_columns", lambda *_a: False)
    slow = read_codings(cb, paths)
    monkeypatch.undo()
    return fast, slow, used


def _same(fast, slow) -> None:
    pd.testing.assert_frame_equal(fast.frame, slow.frame)
    pd.testing.assert_frame_equal(
        fast.texts.reset_index(drop=True), slow.texts.reset_index(drop=True)
    )
    assert [p.to_dict() for p in fast.problems] == [p.to_dict() for p in slow.problems]


@pytest.mark.parametrize("delimiter", [",", ";"])
def test_long_csv_is_read_as_the_row_reader_reads_it(tmp_path, monkeypatch, delimiter):
    cb = load_codebook(CB)
    _write_csv(tmp_path / "a.csv", _rows(1, delimiter=delimiter), delimiter)
    second = [("R010", "ana", "species", "2"), ("R011", "eve", "species", "1")]
    _write_csv(tmp_path / "b.csv", second, delimiter)
    fast, slow, used = _read_both(cb, [tmp_path / "a.csv", tmp_path / "b.csv"], monkeypatch)
    assert used == [True, True]  # both files took the column path
    _same(fast, slow)
    codes = set(fast.problems.codes())
    for code in ("missing-unit-id", "missing-coder", "unknown-variable", "duplicate-unit"):
        assert code in codes
    # b.csv is a second part of one long table: ana's rows there are read (no duplicate-coder)
    assert "duplicate-coder" not in codes
    assert ((fast.frame["unit"] == "R010") & (fast.frame["coder"] == "ana")).any()


def test_long_parquet_is_read_as_the_row_reader_reads_it(tmp_path, monkeypatch):
    cb = load_codebook(CB)
    rows = _rows(2)
    frame = pd.DataFrame(rows, columns=["unit", "coder", "variable", "value"])
    frame = frame.replace({"": None})
    frame.to_parquet(tmp_path / "text.parquet", index=False)
    # a numeric value column (one variable) and a numeric unit column
    numeric = pd.DataFrame(
        {
            "unit": [1.0, 2.0, 3.0, np.nan, 5.0, 5.0],
            "coder": ["kim", "kim", "kim", "kim", "kim", "lou"],
            "variable": ["visitor_group_size"] * 6,
            "value": [2.0, 3.0, np.nan, 4.0, 7.5, 99.0],
        }
    )
    pq.write_table(pa.Table.from_pandas(numeric, preserve_index=False), tmp_path / "num.parquet")
    ints = numeric.assign(value=[2, 3, 0, 4, 7, 99], unit=["1", "2", "3", None, "5", "5"])
    ints.to_parquet(tmp_path / "int.parquet", index=False)
    named_index = numeric.assign(coder="max").set_index(pd.Index(list("abcdef"), name="k"))
    named_index.to_parquet(tmp_path / "idx.parquet")
    files = [tmp_path / f for f in ("text.parquet", "num.parquet", "int.parquet", "idx.parquet")]
    fast, slow, used = _read_both(cb, files, monkeypatch)
    assert used == [True, True, True, True]
    _same(fast, slow)


def test_files_the_column_path_leaves_to_the_row_reader(tmp_path, monkeypatch):
    cb = load_codebook(CB)
    quoted = tmp_path / "quoted.csv"
    quoted.write_text('unit,coder,variable,value\nR1,ana,actions,"1;3"\n', encoding="utf-8")
    blank_line = tmp_path / "blank.csv"
    blank_line.write_text("unit,coder,variable,value\nR1,ana,species,1\n\nR2,ana,species,2\n")
    ragged = tmp_path / "ragged.csv"
    ragged.write_text("unit,coder,variable,value\nR1,ana,species,1,9\nR2,ana,species\n")
    crlf = tmp_path / "crlf.csv"
    crlf.write_bytes(b"unit,coder,variable,value\r\nR1,ana,species,1\r\n")
    dates = tmp_path / "dates.parquet"
    pd.DataFrame(
        {"unit": ["R1"], "coder": ["ana"], "variable": ["species"], "value": [pd.Timestamp(0)]}
    ).to_parquet(dates, index=False)
    wide = tmp_path / "wide.csv"
    wide.write_text("report_id,species\nR1,1\n", encoding="utf-8")
    limits = read_module.DEFAULT_LIMITS
    for path in (quoted, blank_line, ragged, crlf):
        assert long_columnar.read_csv_columns(path, limits) is None, path.name
    assert long_columnar.read_parquet_columns(dates, limits) is None
    assert long_columnar.read_csv_columns(wide, limits) is None
    for path in (quoted, blank_line, ragged, crlf, dates):
        fast, slow, _ = _read_both(cb, [path], monkeypatch)
        _same(fast, slow)


def test_a_big_long_csv_is_not_refused_by_the_sheet_size_limit(tmp_path):
    cb = load_codebook(CB)
    path = tmp_path / "big.csv"
    _write_csv(path, [(f"R{u}", c, "species", "1") for u in range(300) for c in ("ana", "ben")])
    small = read_module.Limits(max_file_bytes=1000)
    codings = read_codings(cb, [path], limits=small)
    assert not codings.problems.refused
    assert len(codings.units) == 300
    wide = tmp_path / "wide.csv"
    wide.write_text("report_id,species\n" + "".join(f"R{u},1\n" for u in range(300)))
    refused = read_codings(cb, [wide], limits=small).problems.refused
    assert refused
    assert "over the limit" in refused[0].message


def test_a_long_table_past_the_spreadsheet_row_limit_is_read(tmp_path):
    # A spreadsheet's row and cell limits (docs/limits.md) do not refuse a long table read
    # column by column; its memory is bounded by LONG_FILE_BYTES and LONG_ROWS instead.
    cb = load_codebook(CB)
    rows = [(f"R{u}", c, "species", "1") for u in range(300) for c in ("ana", "ben")]
    frame = pd.DataFrame(rows, columns=["unit", "coder", "variable", "value"])
    parquet = tmp_path / "long.parquet"
    frame.to_parquet(parquet, index=False)
    csv_path = tmp_path / "long.csv"
    _write_csv(csv_path, rows)
    small = read_module.Limits(max_rows=100, max_cells=400, max_uncompressed_bytes=1000)
    for path in (parquet, csv_path):
        codings = read_codings(cb, [path], limits=small)
        assert not codings.problems.refused, path.name
        assert len(codings.units) == 300
    # a wide sheet of the same size is still refused by them
    wide = tmp_path / "wide.parquet"
    pd.DataFrame({"report_id": [f"R{u}" for u in range(300)], "species": 1}).to_parquet(wide)
    assert read_codings(cb, [wide], limits=small).problems.refused
