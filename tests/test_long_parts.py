"""A folder of long tables is one dataset: a coder's rows may be spread over its parts.

The oracle is the same table read as one file: splitting it into parts (by unit, by coder, by
variable) must not change a value, and a unit's variable given in two parts is reported once,
at the later part, as a repeat inside one table is.
"""

from __future__ import annotations

import pyarrow as pa
import pyarrow.parquet as pq

from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings
from tests.engine_data import CODEBOOK, long_table, write_dataset

COLUMNS = ["unit", "coder", "variable", "value", "missing", "applies"]


def _values(codings):
    frame = codings.frame[COLUMNS].astype(str)
    return frame.sort_values(["unit", "coder", "variable"]).reset_index(drop=True)


def _errors(codings):
    return sorted((p.code, p.unit, p.coder, p.variable) for p in codings.problems.errors)


def test_parts_by_unit_coder_or_variable_read_as_the_whole_table(tmp_path):
    cb = load_codebook(CODEBOOK)
    table = long_table(120, seed=3)
    pq.write_table(table, tmp_path / "whole.parquet")
    whole = read_codings(cb, [tmp_path / "whole.parquet"])
    assert _errors(whole)  # the generator leaves a few codes outside the codebook
    by_unit = read_codings(cb, [write_dataset(table, tmp_path / "by_unit", by="unit", parts=4)])
    by_coder = read_codings(cb, [write_dataset(table, tmp_path / "by_coder", by="coder")])
    names = table.column("variable").to_numpy(zero_copy_only=False)
    (tmp_path / "by_variable").mkdir()
    for i, name in enumerate(sorted(set(names))):
        part = table.filter(pa.array(names == name))
        pq.write_table(part, tmp_path / "by_variable" / f"p{i:02d}.parquet")
    by_variable = read_codings(cb, [tmp_path / "by_variable"])
    for parts in (by_unit, by_coder, by_variable):
        assert "duplicate-coder" not in set(parts.problems.codes())
        assert _values(parts).equals(_values(whole))
        assert _errors(parts) == _errors(whole)


def test_a_value_given_in_two_parts_is_reported_at_the_later_part(tmp_path):
    cb = load_codebook(CODEBOOK)
    first = pa.table(
        {
            "unit": ["R1", "R1", "R2"],
            "coder": ["ana", "ben", "ana"],
            "variable": ["species", "species", "species"],
            "value": ["1", "2", "3"],
        }
    )
    second = pa.table(
        {
            "unit": ["R2", "R1", "R3"],
            "coder": ["ben", "ana", "ana"],
            "variable": ["species", "species", "species"],
            "value": ["3", "4", "1"],
        }
    )
    pq.write_table(first, tmp_path / "a.parquet")
    pq.write_table(second, tmp_path / "b.parquet")
    codings = read_codings(cb, [tmp_path])
    repeats = [p for p in codings.problems if p.code == "duplicate-unit"]
    assert len(repeats) == 1
    p = repeats[0]
    assert (p.file, p.cell, p.unit, p.coder, p.variable) == (
        "b.parquet",
        "D3",
        "R1",
        "ana",
        "species",
    )
    assert "a.parquet, D2" in p.message
    species = codings.frame[codings.frame["variable"] == "species"]
    kept = species.set_index(["unit", "coder"])["value"].to_dict()
    assert kept[("R1", "ana")] == 1  # the first part's value is kept
    assert kept[("R2", "ben")] == 3
    assert kept[("R3", "ana")] == 1
