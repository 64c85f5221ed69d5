"""The list's main sheet put in column by column is the sheet XlsxWriter writes cell by cell.

:func:`coderel.io.xlsx_rows.splice_rows` writes the rows of the list's main sheet as SpreadsheetML
text (ECMA-376 Part 1, 18.3.1.73 ``row``, 18.3.1.4 ``c``, 18.3.1.53 ``is``) in place of probe
rows. The outside reference is XlsxWriter itself, writing the same cells one call each: on lists
with texts that need escaping (``&``, ``<``, control characters, literal ``_x0041_`` escapes,
leading and trailing white space, line breaks, text beyond the Basic Multilingual Plane),
decisions waiting to be re-confirmed, text columns and added columns, the two workbooks must be
the same bytes. A reader outside the project (openpyxl) must then read every cell back as written.
"""

from __future__ import annotations

import zipfile

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from coderel.adjudicate import MAIN_SHEET, write_adjudication
from coderel.adjudicate.model import (
    ABOUT_SHEET,
    RETIRED_SHEET,
    STALE_CHECK,
    Adjudication,
    AdjudicationRow,
)
from coderel.adjudicate.read import read_adjudication
from coderel.adjudicate.write import MAIN_SHEET_PART, _write_workbook
from coderel.codebook import Category, Codebook, Variable
from coderel.io.tables import cell_value
from coderel.io.xlsx_rows import SAFE_TEXT_LENGTH, splice_ready

CB = Codebook(
    title="list writer test (invented)",
    unit="report",
    variables=(
        Variable("trail", "nominal", categories=(Category(1, "Ridge"), Category(2, "Lake"))),
        Variable("visitors", "ratio"),
    ),
)

TRICKY = [
    "plain",
    'a & b < c > d "quoted"',
    "_x0041_ stays literal",
    "bell\x07 and tab\t",
    " leading space",
    "trailing space ",
    "two\nlines\n",
    "é ü 中文 Ελληνικά кириллица",
    "emoji 🦉 beyond the plane",
    "\ufffe\uffff",
    "=1+1",
    "",
]

#: (a text that looks like rich text markup is written differently on purpose: the test below)
_text = st.one_of(
    st.sampled_from(TRICKY), st.text(max_size=12).filter(lambda t: not t.startswith("<r>"))
)


def _adjudication(cells, *, text_columns=(), extra=()) -> Adjudication:
    rows = []
    narratives = {}
    for k, (unit, variable, a, b, decision, stale, note, more) in enumerate(cells):
        unit = f"R{unit}"
        rows.append(
            AdjudicationRow(
                unit=unit,
                variable=variable,
                kind="values differ",
                values={"ann": a, "bo": b},
                decision=decision or None,
                note=note or None,
                check=STALE_CHECK if stale and decision else None,
                extra=dict.fromkeys(extra, more),
            )
        )
        if text_columns:
            narratives[unit] = dict.fromkeys(text_columns, f"{more} {k}")
    rows.sort(key=lambda r: (r.unit, r.variable))
    return Adjudication(
        codebook=CB,
        coders=("ann", "bo"),
        rows=tuple(rows),
        text_columns=tuple(text_columns),
        narratives=narratives,
        extra_columns=tuple(extra),
    )


_cells = st.lists(
    st.tuples(
        st.integers(0, 6),
        st.sampled_from(["trail", "visitors"]),
        _text,
        _text,
        st.sampled_from(["", "1", "2 = Lake", "nonsense"]),
        st.booleans(),
        _text,
        _text,
    ),
    min_size=1,
    max_size=25,
    unique_by=lambda c: (c[0], c[1]),
)


def _members(path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as z:
        return {i.filename: z.read(i) for i in z.infolist()}


@settings(
    max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(_cells, st.sampled_from([(), ("narrative",)]), st.sampled_from([(), ("my notes",)]))
def test_spliced_rows_are_the_cell_by_cell_workbook(tmp_path, cells, text_columns, extra):
    adj = _adjudication(cells, text_columns=text_columns, extra=extra)
    fast, slow = tmp_path / "fast.xlsx", tmp_path / "slow.xlsx"
    _write_workbook(adj, fast)
    _write_workbook(adj, slow, splice=False)
    assert _members(fast) == _members(slow)
    assert fast.read_bytes() == slow.read_bytes()


def test_the_sheet_reads_back_cell_for_cell(tmp_path):
    # control characters, non-characters and literal _xHHHH_ are left out: openpyxl reads their
    # escapes its own way (the bytes are XlsxWriter's either way, as the test above shows)
    texts = [t for t in TRICKY if (t.isprintable() or "\n" in t) and "_x" not in t]
    cells = [
        (i, var, texts[i % len(texts)], texts[(i + 3) % len(texts)], d, i % 2 == 0, "n", "x")
        for i in range(len(texts))
        for var, d in (("trail", "1"), ("visitors", ""))
    ]
    adj = _adjudication(cells, text_columns=("narrative",), extra=("my notes",))
    path = tmp_path / "list.xlsx"
    write_adjudication(adj, path)
    ws = openpyxl.load_workbook(path)[MAIN_SHEET]
    got = list(ws.iter_rows(min_row=2, values_only=True))
    assert len(got) == len(adj.rows)
    assert ws.max_row == len(adj.rows) + 1  # the dimension names the rows written
    for row, values in zip(adj.rows, got, strict=True):
        assert values[0] == row.unit
        # what openpyxl reads: an empty text is an empty cell, a formula-like text neutralised
        assert values[3] == (cell_value(row.values["ann"]) or None)
        assert values[4] == (cell_value(row.values["bo"]) or None)


def test_rich_text_markup_is_kept_as_text(tmp_path):
    """Texts that look like rich text markup (``<r>...</r>``) stay text on every sheet: XlsxWriter
    copies such a text into the sheet unescaped, so a coder named ``<r>ann</r>`` broke the
    header's XML and a value ``<r><t>x</t></r>`` was read back as ``x``. Spliced rows escape
    them; cells written by XlsxWriter (headers, the other sheets, a list written cell by cell)
    go in as three plain pieces of rich text. openpyxl and coderel's own reader read them back
    as written."""
    odd = "<r><t>not markup</t></r>"
    coder = "<r>ann</r>"
    cb = Codebook(title="<r>title</r>", unit="report", variables=CB.variables)
    rows = (AdjudicationRow("R1", "trail", "values differ", {coder: odd, "bo": "2"}),)
    retired = (
        AdjudicationRow("R2", "trail", "values differ", {coder: odd, "bo": "1"}, reason="gone"),
    )
    adj = Adjudication(codebook=cb, coders=(coder, "bo"), rows=rows, retired=retired)
    for splice in (True, False):
        path = tmp_path / f"list-{splice}.xlsx"
        _write_workbook(adj, path, splice=splice)
        wb = openpyxl.load_workbook(path)
        main, gone = wb[MAIN_SHEET], wb[RETIRED_SHEET]
        assert [main["D1"].value, gone["D1"].value] == [coder, coder]
        assert [main["D2"].value, gone["D2"].value] == [odd, odd]
        assert ("codebook", "<r>title</r>") in set(wb[ABOUT_SHEET].iter_rows(values_only=True))
        back = read_adjudication(path, cb, (coder, "bo"))
        assert [dict(r.values) for r in back.rows] == [{coder: odd, "bo": "2"}]
        assert [dict(r.values) for r in back.retired] == [{coder: odd, "bo": "1"}]
        assert not back.problems
    sheet = _members(tmp_path / "list-True.xlsx")[MAIN_SHEET_PART].decode()
    assert "&lt;r&gt;&lt;t&gt;not markup" in sheet


def test_long_texts_and_numbers_go_cell_by_cell():
    assert splice_ready([["a", None], ["b" * SAFE_TEXT_LENGTH]])
    assert not splice_ready([["a", "b" * (SAFE_TEXT_LENGTH + 1)]])
    assert not splice_ready([["a", 3]])


def test_a_sheet_past_the_workbook_row_limit_is_refused(tmp_path, monkeypatch):
    """A workbook sheet holds 1,048,576 rows (ECMA-376 Part 1, 18.3.1.73), the header included.
    XlsxWriter silently drops the cells of rows past it (a list would lose rows to decide), so a
    list or table too long for a sheet is refused before anything is written, with the way out
    (.csv); here the limit is made small so that the test needs few rows."""
    import pandas as pd

    import coderel.io.tables as tables
    from coderel.errors import UsageError

    monkeypatch.setattr(tables, "SHEET_ROWS", 3)
    cells = [(i, "trail", "1", "2", "", False, "", "") for i in range(3)]
    adj = _adjudication(cells)
    path = tmp_path / "list.xlsx"
    with pytest.raises(UsageError, match=r"3 rows, more than a workbook sheet holds.*\.csv"):
        write_adjudication(adj, path)
    assert not path.exists()
    write_adjudication(adj, tmp_path / "list.csv")  # the way out
    assert len(pd.read_csv(tmp_path / "list.csv")) == 3
    write_adjudication(_adjudication(cells[:2]), path)  # 2 rows and the header fit
    assert openpyxl.load_workbook(path)[MAIN_SHEET].max_row == 3
    with pytest.raises(UsageError, match="'data' would have 3 rows"):
        tables.write_table(pd.DataFrame({"unit": ["a", "b", "c"]}), tmp_path / "merged.xlsx")
    assert not (tmp_path / "merged.xlsx").exists()


def test_probe_rows_not_found_as_expected_write_the_rows_cell_by_cell(tmp_path, monkeypatch):
    """Another XlsxWriter might write the probe rows otherwise: then the workbook is written
    again cell by cell, over the same temporary file, and is the cell-by-cell workbook."""
    import re

    import coderel.io.xlsx_rows as xlsx_rows

    adj = _adjudication([(i, "trail", "1", "2", "1", i == 1, "n", "x") for i in range(4)])
    slow = tmp_path / "slow.xlsx"
    _write_workbook(adj, slow, splice=False)
    calls = []
    real = xlsx_rows.splice_rows

    def spy(*args, **kwargs):
        calls.append(real(*args, **kwargs))
        return calls[-1]

    monkeypatch.setattr(xlsx_rows, "splice_rows", spy)
    monkeypatch.setattr(xlsx_rows, "_STYLE", re.compile(r'<c r="([A-Z]+)(\d+)" style="(\d+)"'))
    fast = tmp_path / "list.xlsx"
    _write_workbook(adj, fast)
    assert calls == [False]
    assert fast.read_bytes() == slow.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["list.xlsx", "slow.xlsx"]
