"""The long table of codings stays compact and exact at scale (issue 14, items 1-3).

* memory: unit, coder and variable are categorical (one small integer per label), cells compact
  text, and reading allocates a bounded number of bytes per label (tracemalloc sees numpy's and
  Python's allocations);
* order: the categories are in text order, so sorting or grouping by a column gives the order of
  the text itself, as it did when the columns held text;
* the natural order of many unit IDs, sorted on columns, equals sorting by the key
  (:func:`coderel.codings.natural_key`), the reference here;
* ``partial-unit`` warnings, found per distinct set of coders, equal the plain definition (a unit
  coded by some coders but not all; coders in order of first appearance), written out here.
"""

from __future__ import annotations

import random
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from coderel.codebook.load import load_codebook
from coderel.codings import Codings, natural_key, natural_order
from coderel.io.read import read_codings

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"


def _long_parquet(path: Path, n_units: int, seed: int = 0) -> int:
    """A long Parquet table: every unit coded by three coders on six categorical variables."""
    cb = load_codebook(CB)
    names = [v.name for v in cb.variables if v.is_categorical and not v.multiple][:6]
    rng = np.random.default_rng(seed)
    parts = []
    for name in names:
        codes = [str(c) for c in cb.variable(name).codes]
        parts.append(
            pd.DataFrame(
                {
                    "unit": np.repeat([f"R{u:05d}" for u in range(n_units)], 3),
                    "coder": np.tile(["ana", "ben", "cai"], n_units),
                    "variable": name,
                    "value": rng.choice(codes, 3 * n_units),
                }
            )
        )
    frame = pd.concat(parts, ignore_index=True)
    frame.to_parquet(path, index=False)
    return len(frame)


def test_the_codings_frame_holds_few_bytes_per_label(tmp_path):
    _long_parquet(tmp_path / "long.parquet", 5_000)
    codings = read_codings(load_codebook(CB), [tmp_path / "long.parquet"])
    frame = codings.frame
    # a row per unit, coder and variable (those not given are blank rows)
    labels = len(frame)
    assert labels == 5_000 * 3 * len(codings.codebook.variables)
    for col in ("unit", "coder", "variable"):
        assert isinstance(frame[col].dtype, pd.CategoricalDtype), col
    # Text columns with their characters counted: a Python string per label costs 50 bytes or
    # more; categorical codes and pyarrow text cost a few. Measured: about 17 bytes.
    named = frame[["unit", "coder", "variable", "cell"]].memory_usage(deep=True).sum()
    assert named / labels <= 24
    # All columns, object columns as one pointer each (values are shared objects). Measured: 57.
    assert frame.memory_usage(deep=False).sum() / labels <= 64
    assert frame["cell"].iloc[0] == "D2"
    assert frame["unit"].iloc[0] == "R00000"
    assert type(frame["unit"].iloc[0]) is str


def test_reading_a_long_table_allocates_a_bounded_amount_per_label(tmp_path):
    _long_parquet(tmp_path / "long.parquet", 10_000)
    cb = load_codebook(CB)
    tracemalloc.start()
    try:
        codings = read_codings(cb, [tmp_path / "long.parquet"])
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    labels = len(codings.frame)  # a row per unit, coder and variable
    assert labels == 10_000 * 3 * len(cb.variables)
    # Measured here: about 150 bytes per label at the peak (540 with a Python string and object
    # per label and cell); pyarrow's own buffers are not traced.
    assert peak / labels <= 250


def test_categories_keep_the_order_of_the_text():
    rows = [
        {"unit": u, "coder": c, "variable": "species", "value": 1}
        for u in ("b2", "a10", "B1", "a9", "é1", "Z")
        for c in ("zed", "Ann", "ann")
    ]
    codings = Codings.from_records(load_codebook(CB), rows)
    frame = codings.frame
    assert list(frame.sort_values("unit")["unit"].unique()) == sorted({r["unit"] for r in rows})
    assert list(frame.groupby("coder").size().index) == sorted({r["coder"] for r in rows})
    assert codings.units == sorted({r["unit"] for r in rows}, key=natural_key)


def test_ids_given_as_numbers_become_text():
    rows = [{"unit": u, "coder": 7, "variable": "species", "value": 1} for u in (3, 10, 2)]
    codings = Codings.from_records(load_codebook(CB), rows)
    assert codings.units == ["2", "3", "10"]
    assert codings.coders == ["7"]


def _ids(rng: random.Random, n: int, shapes: list[str]) -> list[str]:
    out = []
    for _ in range(n):
        prefix = rng.choice(shapes)
        digits = str(rng.randint(0, 10 ** rng.randint(1, 20))).zfill(rng.randint(0, 6))
        out.append(prefix + digits)
    return out


@pytest.mark.parametrize(
    "shapes",
    [
        ["u", "U", "enc-", "", "Item ", "ß", "SS", "straße-"],  # one number at the end
        ["u", "x٣-", "a1b"],  # an Arabic-Indic digit and two numbers: the key is used
    ],
)
def test_natural_order_of_many_ids_equals_sorting_by_the_key(shapes):
    rng = random.Random(14)
    for _ in range(3):
        ids = [*_ids(rng, 5_000, shapes), "u0", "u000", "U0", "u" + "9" * 19]
        assert natural_order(ids) == sorted(set(ids), key=natural_key)


def test_partial_unit_warnings_equal_the_plain_definition():
    rng = np.random.default_rng(3)
    coders = [f"lab{i}" for i in range(12)]
    rows = []
    for u in range(400):
        for c in rng.choice(coders, int(rng.integers(2, 6)), replace=False):
            rows.append({"unit": f"item{u}", "coder": str(c), "variable": "species", "value": 1})
    rng.shuffle(rows)
    frame = pd.DataFrame(rows)
    cb = load_codebook(CB)
    from coderel.io.table_checks import check_partial_units
    from coderel.problems import Problems

    problems = Problems()
    check_partial_units(problems, Codings.from_records(cb, frame).frame)
    # the plain definition: units and coders in order of first appearance
    order = list(dict.fromkeys(frame["coder"]))
    expected = []
    for unit, rows_of in frame.groupby("unit", sort=False):
        here = set(rows_of["coder"])
        if len(here) < len(order):
            present = ", ".join(c for c in order if c in here)
            absent = ", ".join(c for c in order if c not in here)
            expected.append(f"unit {unit} is coded by {present} but not by {absent}")
    assert [p.message for p in problems] == expected
    assert {p.code for p in problems} == {"partial-unit"}
