"""Reading the cells of an ``.xlsx`` workbook with openpyxl, safely and completely.

The workbook is first checked by :func:`coderel.io.archive.check_workbook` (size, zip bomb, legacy
or encrypted format). openpyxl then reads it in normal mode (not read-only), so that merged cells,
hidden rows and columns and error values are visible; it is loaded twice, once for the stored
values (``data_only=True``) and once for the formulas, to find formula cells that have no stored
result. openpyxl parses the XML through defusedxml when that package is installed; this module
records at import time whether it is (:data:`XML_DEFUSED`) and refuses every workbook otherwise.

Sheets that are hidden, and a sheet named ``codebook``, are skipped: they are helpers, not data.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import openpyxl
import openpyxl.xml
from openpyxl.utils import column_index_from_string, range_boundaries

from coderel.errors import InputRefused
from coderel.io.archive import DEFAULT_LIMITS, Limits, check_workbook
from coderel.io.text_tables import RawRow, RawTable, _header_text
from coderel.normalise import CellError, FormulaNoValue

#: True when openpyxl parses workbook XML through defusedxml (checked at import time).
XML_DEFUSED: bool = bool(getattr(openpyxl.xml, "DEFUSEDXML", False))

#: Sheet names (compared without case) that are never read as coders' data.
SKIPPED_SHEETS: frozenset[str] = frozenset({"codebook"})


@dataclass(frozen=True)
class Workbook:
    """The data sheets of one workbook, each as a :class:`RawTable`, in workbook order."""

    file: str
    tables: tuple[RawTable, ...]
    #: Names of visible sheets that hold no value at all.
    empty: tuple[str, ...] = ()


def _defused(exc: BaseException) -> bool:
    """Did defusedxml stop this error (somewhere in its chain of causes)?"""
    seen: BaseException | None = exc
    for _ in range(10):
        if seen is None:
            return False
        if type(seen).__module__.startswith("defusedxml"):
            return True
        seen = seen.__cause__ or seen.__context__
    return False


def _load(path: Path, *, data_only: bool) -> Any:
    with warnings.catch_warnings():
        # openpyxl warns about features it drops (data validation extensions, styles); they do
        # not change the cell values read here.
        warnings.simplefilter("ignore")
        return openpyxl.load_workbook(path, data_only=data_only, read_only=False)


def _cell_value(cell: Any, formula_cell: Any) -> Any:
    if cell.data_type == "e":
        return CellError(str(cell.value))
    value = cell.value
    if value is None and formula_cell is not None and formula_cell.data_type == "f":
        return FormulaNoValue()
    return value


def _sheet_table(file: str, ws: Any, ws_formulas: Any) -> RawTable | None:
    """A sheet as a :class:`RawTable`; ``None`` when the sheet holds no value at all."""
    grid: dict[int, dict[int, Any]] = {}
    formula_cells = ws_formulas._cells
    for (row, column), cell in ws._cells.items():
        value = _cell_value(cell, formula_cells.get((row, column)))
        if value is None or (isinstance(value, str) and value.strip() == ""):
            continue
        grid.setdefault(row, {})[column] = value
    if not grid:
        return None
    header_row = min(grid)
    header_cells = grid[header_row]
    width = max(max(cols) for cols in grid.values())
    columns = tuple(range(1, width + 1))
    header = tuple(_header_text(header_cells.get(c)) for c in columns)
    rows = tuple(
        RawRow(number=r, cells=tuple(grid[r].get(c) for c in columns))
        for r in sorted(grid)
        if r > header_row
    )
    hidden_rows = frozenset(
        r for r, dim in ws.row_dimensions.items() if dim.hidden and r in grid and r > header_row
    )
    hidden_columns: set[int] = set()
    for key, dim in ws.column_dimensions.items():
        if not dim.hidden:
            continue
        low = dim.min or column_index_from_string(key)
        high = dim.max or low
        hidden_columns.update(c for c in range(low, high + 1) if c <= width)
    merged = []
    for rng in ws.merged_cells.ranges:
        _, _, _, max_row = range_boundaries(str(rng))
        if max_row >= header_row:
            merged.append(str(rng))
    return RawTable(
        file=file,
        sheet=ws.title,
        header=header,
        rows=rows,
        columns=columns,
        header_row=header_row,
        typed=True,
        hidden_rows=hidden_rows,
        hidden_columns=frozenset(hidden_columns),
        merged=tuple(sorted(merged)),
    )


def read_workbook(path: Path, limits: Limits = DEFAULT_LIMITS) -> Workbook:
    """Read the visible data sheets of a workbook.

    Raises
    ------
    InputRefused
        When the XML parser is not hardened, or the file fails a check of
        :func:`coderel.io.archive.check_workbook`, or openpyxl cannot read it.
    """
    if not XML_DEFUSED:
        raise InputRefused(
            f"{path.name} not read: openpyxl is not using defusedxml, so workbook XML would be "
            "parsed without protection; install defusedxml (pip install defusedxml)"
        )
    check_workbook(path, limits)
    try:
        wb_values = _load(path, data_only=True)
        wb_formulas = _load(path, data_only=False)
    except InputRefused:
        raise
    except Exception as exc:  # openpyxl raises many types on damaged parts
        if _defused(exc):
            raise InputRefused(
                f"{path.name} holds XML with entity or DTD declarations, which a spreadsheet "
                "program does not write (a possible attack); refused"
            ) from None
        raise InputRefused(
            f"{path.name} cannot be read as a workbook ({type(exc).__name__}); open and re-save "
            "it in your spreadsheet program"
        ) from None
    tables: list[RawTable] = []
    empty: list[str] = []
    try:
        for ws in wb_values.worksheets:
            if ws.sheet_state != "visible" or ws.title.strip().casefold() in SKIPPED_SHEETS:
                continue
            table = _sheet_table(path.name, ws, wb_formulas[ws.title])
            if table is None:
                empty.append(ws.title)
            else:
                tables.append(table)
    finally:
        wb_values.close()
        wb_formulas.close()
    return Workbook(file=path.name, tables=tuple(tables), empty=tuple(empty))


__all__ = ["SKIPPED_SHEETS", "XML_DEFUSED", "Workbook", "read_workbook"]
