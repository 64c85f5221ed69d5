"""The cell values of named sheets of a workbook, read fast with python-calamine when it is safe.

python-calamine (Rust) reads a 650,000-cell sheet in well under a second, but it builds each sheet
as one dense grid from its first to its last cell: a workbook with one value in ``A1`` and one in
``XFD1048576`` would ask for seventeen billion cells before any limit could be checked. So, after
the pre-flight of :func:`coderel.io.archive.check_workbook` (size, zip bomb, number of sheets),
every XML part of the archive is scanned for cell and row references (the ``r`` attributes) and
the grid they span is held to :class:`coderel.io.archive.Limits` (rows, columns, cells) before
calamine opens the file. The scan over-approximates: any ``r="A1"``-like text counts.

Two kinds of part are left to the caller's own streaming reader (:func:`read_sheet_values` returns
``None``): cells or rows without a reference (calamine places them by counting, which the scan
cannot bound) and error cells such as ``#N/A`` (calamine reads them as empty, openpyxl as their
text). calamine's XML parser expands no entity declarations; a part that uses one is refused.

Values come back as openpyxl gives them in read-only mode, so both readers read a list the same:
``None`` for an empty cell, ``int`` for a whole number, ``datetime`` for a date.
"""

from __future__ import annotations

import datetime as _dt
import re
import zipfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from coderel.errors import InputRefused
from coderel.io.archive import DEFAULT_LIMITS, Limits, check_workbook, raise_hint

#: An ``r`` attribute holding a cell (``AB12``) or row (``12``) reference, wherever it stands
#: (after a space or quote, so ``dir="5400000"`` is not one; text reading ``r="A1"`` counts too:
#: the scan may over-count, never under-count). The character before the ``r`` is looked at,
#: not consumed (two attributes without a space between them are both found), and the pattern
#: opens with the literal ``r``, which the regex engine looks for fast.
_REFERENCE = re.compile(rb"r(?<=[\s\"']r)\s*=\s*[\"']([A-Za-z]*)(\d+)[\"']")
#: Cell and row elements (any namespace prefix), and those of them that carry an ``r``.
_CELL = re.compile(rb"<(?:[\w.-]+:)?c[\s/>]")
_CELL_WITH_REF = re.compile(rb"<(?:[\w.-]+:)?c\s[^<>]*?r\s*=")
_ROW = re.compile(rb"<(?:[\w.-]+:)?row[\s/>]")
_ROW_WITH_REF = re.compile(rb"<(?:[\w.-]+:)?row\s[^<>]*?r\s*=")
#: What the byte counts of :func:`_all_referenced` do not see: a cell or row element with a
#: namespace prefix (``<x:c ...>``), after another white space than a blank, without attributes,
#: or with its ``r`` in single quotes.
_UNUSUAL = re.compile(rb"<(?:[\w.-]+:(?:c|row)[\s/>]|(?:c|row)(?:[\t\n\r/>]| r='))")
#: An error cell (``t="e"``).
_ERROR_CELL = re.compile(rb"t\s*=\s*[\"']e[\"']")
#: Whole numbers beyond this are kept as floats (a float holds every integer up to 2**53).
_EXACT_INTEGER = 2**53


def _column_number(letters: bytes) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ch - 64)
    return n


def _all_referenced(data: bytes) -> bool:
    """Does every cell and row element of the part carry an ``r`` attribute?"""
    if not _UNUSUAL.search(data):  # the usual part, told by counting bytes
        return data.count(b"<c ") == data.count(b'<c r="') and data.count(b"<row ") == data.count(
            b'<row r="'
        )
    return len(_CELL.findall(data)) == len(_CELL_WITH_REF.findall(data)) and len(
        _ROW.findall(data)
    ) == len(_ROW_WITH_REF.findall(data))


def _scan(path: Path, limits: Limits) -> bool:
    """Hold the grid every part spans to the limits; ``False`` when calamine cannot be used."""
    with zipfile.ZipFile(path) as archive:
        for info in archive.infolist():
            if not info.filename.lower().endswith(".xml"):
                continue
            data = archive.read(info)
            if not _all_referenced(data):
                return False
            if _ERROR_CELL.search(data):
                return False
            references = _REFERENCE.findall(data)
            if not references:
                continue
            letters, digits = {ref[0] for ref in references}, {ref[1] for ref in references}
            if max(map(len, letters)) > 3 or max(map(len, digits)) > 9:
                rows, columns = limits.max_rows + 1, limits.max_columns + 1
            else:
                rows = max(map(int, digits))
                columns = max(_column_number(c) for c in letters)
            if rows > limits.max_rows or columns > limits.max_columns:
                raise InputRefused(
                    f"{path.name!r} has a cell past row {limits.max_rows} or column "
                    f"{limits.max_columns}; " + raise_hint("max_rows")
                )
            if rows * columns > limits.max_cells:
                raise InputRefused(
                    f"{path.name!r} spans {rows} rows x {columns} columns, over the limit of "
                    f"{limits.max_cells} cells; " + raise_hint("max_cells")
                )
    return True


def _value(value: Any) -> Any:
    """A calamine value as openpyxl's read-only mode gives it."""
    if value == "" and isinstance(value, str):
        return None
    if isinstance(value, float) and value.is_integer() and abs(value) < _EXACT_INTEGER:
        return int(value)
    if isinstance(value, _dt.date) and not isinstance(value, _dt.datetime):
        return _dt.datetime.combine(value, _dt.time())
    return value


def read_sheet_values(
    path: Path, names: Sequence[str], limits: Limits = DEFAULT_LIMITS
) -> dict[str, list[list[Any]]] | None:
    """Rows of values (from row 1 and column A) of each sheet in ``names`` the workbook has.

    Returns ``None`` when the workbook holds cells this reader leaves to a streaming one (see
    the module docstring).

    Raises
    ------
    InputRefused
        When the file fails the pre-flight, spans more rows, columns or cells than ``limits``
        allow, or cannot be read as a workbook.
    """
    check_workbook(path, limits)
    if not _scan(path, limits):
        return None
    from python_calamine import CalamineWorkbook

    out: dict[str, list[list[Any]]] = {}
    try:
        wb = CalamineWorkbook.from_path(str(path))
        try:
            for name in names:
                if name not in wb.sheet_names:
                    continue
                grid = wb.get_sheet_by_name(name).to_python(skip_empty_area=False)
                # text as it is (the commonest cell), an empty cell as None; the rest as
                # openpyxl gives it
                out[name] = [
                    [(v or None) if v.__class__ is str else _value(v) for v in row] for row in grid
                ]
        finally:
            wb.close()
    except Exception as exc:  # calamine raises its own types on damaged parts
        raise InputRefused(
            f"cannot read {path.name!r} as a workbook ({type(exc).__name__}); open and re-save "
            "it in your spreadsheet program"
        ) from None
    return out


__all__ = ["read_sheet_values"]
