"""Many rows of text cells written straight into a workbook's sheet, column by column.

XlsxWriter costs about 6 microseconds a cell, one call each; an adjudication list of 20,000
units has about 650,000 cells, so it spent some 4 seconds in those calls alone. Here the rows of a
sheet are made as SpreadsheetML text (ECMA-376 Part 1, 18.3.1: ``row`` and ``c`` elements, inline
strings ``t="inlineStr"``), each distinct text of a column escaped once, and put into the sheet
XlsxWriter wrote in place of a few probe rows: everything else in the workbook (styles, column
widths, frozen panes, filters, dropdowns, protection, other sheets) stays as XlsxWriter made it.

The probe rows give each cell style's number in the workbook's style table, as XlsxWriter
numbered it: the caller writes one probe row per row style (a text in every column, with that
row style's formats) where the rows are to go, and :func:`splice_rows` reads the ``s`` numbers off
them and replaces them with the real rows.

Each cell is written as XlsxWriter writes an inline string in its constant-memory mode (same
escapes of ``&``, ``<``, ``>`` and of control characters as ``_xHHHH_``, ``xml:space`` kept where
a text starts or ends with white space), so the sheet is the same, byte for byte, as the one
written cell by cell (``tests/test_xlsx_rows.py``). One difference: a text that looks like rich
text markup (``<r>...</r>``) is escaped here as any other text, where XlsxWriter would have
copied it into the sheet as markup.
"""

from __future__ import annotations

import os
import re
import zipfile
from collections.abc import Sequence
from pathlib import Path

from openpyxl.utils import column_index_from_string, get_column_letter

#: The longest text a cell holds is 32,767 UTF-16 units (XlsxWriter cuts longer ones); a text of
#: at most half that many characters cannot reach it.
SAFE_TEXT_LENGTH = 32767 // 2

_ESCAPED_ESCAPE = re.compile("(_x[0-9a-fA-F]{4}_)")
_CONTROL = re.compile(r"([\x00-\x08\x0b-\x1f])")
_MARKUP = re.compile("[&<>]")
_LEADING_SPACE = re.compile(r"^\s")
_TRAILING_SPACE = re.compile(r"\s$")
_STYLE = re.compile(r'<c r="([A-Z]+)(\d+)"(?: s="(\d+)")?')


def splice_ready(columns: Sequence[Sequence[object]]) -> bool:
    """Whether every cell is a text of safe length or empty (``None``): what splicing writes."""
    for column in columns:
        for value in set(column):
            if value is None:
                continue
            if value.__class__ is not str or len(value) > SAFE_TEXT_LENGTH:
                return False
    return True


def _body(text: str) -> str:
    """What follows a cell's reference and style for a text: the inline string element."""
    text = _ESCAPED_ESCAPE.sub(r"_x005F\1", text)
    text = _CONTROL.sub(lambda m: f"_x{ord(m.group(1)):04X}_", text)
    text = text.replace("\ufffe", "_xFFFE_").replace("\uffff", "_xFFFF_")
    if _MARKUP.search(text):
        text = text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    space = (
        ' xml:space="preserve"'
        if _LEADING_SPACE.search(text) or _TRAILING_SPACE.search(text)
        else ""
    )
    return f' t="inlineStr"><is><t{space}>{text}</t></is></c>'


def _probe_styles(xml: str, first_row: int, probes: int, width: int) -> list[list[str]] | None:
    """The ``s`` attribute of each probe row's cells: one list per probe row, one entry per
    column (``''`` for a cell with no style); ``None`` unless every probe cell, and nothing
    else, was found."""
    styles = [[""] * width for _ in range(probes)]
    found = 0
    for letters, row, style in _STYLE.findall(xml):
        k = int(row) - first_row
        if len(letters) > 3 or not 0 <= k < probes:
            return None
        j = column_index_from_string(letters)
        if not 1 <= j <= width:
            return None
        found += 1
        if style:
            styles[k][j - 1] = f' s="{style}"'
    if found != probes * width or xml.count("<c ") != found:
        return None
    return styles


def _rows_xml(
    columns: Sequence[Sequence[str | None]],
    row_styles: Sequence[int],
    styles: list[list[str]],
    first_row: int,
) -> str:
    """The ``row`` elements of the rows, built a column at a time."""
    numbers = [str(first_row + k) for k in range(len(row_styles))]
    cells_by_column = []
    for j, column in enumerate(columns):
        letter = get_column_letter(j + 1)
        bodies = {v: _body(v) for v in set(column) if v is not None}
        attrs = [styles[p][j] for p in range(len(styles))]
        cells_by_column.append(
            [
                (
                    f'<c r="{letter}{n}"{attrs[p]}{bodies[v]}'
                    if v is not None
                    else f'<c r="{letter}{n}"{attrs[p]}/>'
                    if attrs[p]
                    else ""
                )
                for n, p, v in zip(numbers, row_styles, column, strict=True)
            ]
        )
    return "".join(
        f'<row r="{n}">{"".join(cells)}</row>'
        for n, cells in zip(numbers, zip(*cells_by_column, strict=True), strict=True)
    )


def splice_rows(
    path: str | os.PathLike[str],
    member: str,
    columns: Sequence[Sequence[str | None]],
    row_styles: Sequence[int],
    probes: int,
    *,
    first_row: int = 2,
) -> bool:
    """Put rows of text cells into a sheet of a workbook written by XlsxWriter, in place of its
    probe rows.

    Parameters
    ----------
    path
        The workbook, a temporary file of the caller's (:func:`coderel.io.atomic.atomic_path`):
        it is written again in place.
    member
        The sheet's part in the package, e.g. ``xl/worksheets/sheet1.xml``.
    columns
        The cells, column by column from column A: texts of at most :data:`SAFE_TEXT_LENGTH`
        characters, already shown as they are to be read (see :func:`splice_ready`), or ``None``
        for an empty cell.
    row_styles
        For each row, which probe row's styles it takes.
    probes
        How many probe rows the caller wrote, from ``first_row`` on, one per row style, each with
        a text in every column so that each cell's style shows. They are the last rows of the
        sheet.
    first_row
        The 1-based number of the first row (and of the first probe row).

    Returns
    -------
    bool
        ``False`` (the workbook left as it was) when the probe rows are not found as expected,
        say from another version of XlsxWriter: the caller then writes the rows cell by cell.
    """
    path = Path(path)
    with zipfile.ZipFile(path) as old:
        infos = old.infolist()
        parts = {info.filename: old.read(info) for info in infos}
    xml = parts[member].decode("utf-8")
    start = xml.index(f'<row r="{first_row}"')
    end = xml.index("</sheetData>")
    styles = _probe_styles(xml[start:end], first_row, probes, len(columns))
    if styles is None:  # not the probe rows as this module knows them: leave the workbook
        return False
    last = first_row + len(row_styles) - 1
    dimension = f'<dimension ref="A1:{get_column_letter(len(columns))}{max(last, first_row - 1)}"/>'
    head = re.sub(r'<dimension ref="[^"]*"/>', dimension, xml[:start], count=1)
    body = _rows_xml(columns, row_styles, styles, first_row)
    parts[member] = (head + body + xml[end:]).encode("utf-8")
    # Every part is in memory: the package is written again over the caller's temporary file
    # (no other file is made, so an interrupted write leaves only that temporary file).
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED) as new:
        for info in infos:
            new.writestr(info, parts[info.filename])
    return True
