"""Reading the cells of an ``.xlsx`` workbook with openpyxl, safely, completely and once.

The workbook is first checked by :func:`coderel.io.archive.check_workbook` (size, zip bomb, number
of sheets, legacy or encrypted format). openpyxl then opens it once, in read-only mode: the
workbook part, shared strings and styles are read, but no worksheet is built in memory. Each
visible data sheet is then streamed row by row through openpyxl's own worksheet parser, keeping
only the cells that hold a value, so memory grows with the values a sheet holds and not with the
ranges it declares: a ``<dimension ref="A1:XFD1048576">`` or a merged range over a million rows
costs nothing, because merged ranges are kept as their text (``A2:C9``) and never expanded into
cells. Hidden sheets and a sheet named ``codebook`` are never parsed.

While streaming, the parser also notes what normal mode would show: the stored result of a
formula (the parser reads cached values) and formulas that have none (:class:`FormulaNoValue`),
error values, hidden rows and columns and merged ranges. Rows, columns and cells are bounded by
:class:`coderel.io.archive.Limits`; a sheet past a limit is refused (``input-refused``) as soon as
the parser reaches it, before the rest of the sheet is read. A number too long to be one (more
than :data:`MAX_NUMBER_CHARS` characters) is kept as its text, which the cell's check then reports.

openpyxl parses the XML through defusedxml when that package is installed; this module records at
import time whether it is (:data:`XML_DEFUSED`) and refuses every workbook otherwise.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import openpyxl
import openpyxl.xml
from openpyxl.utils import range_boundaries
from openpyxl.worksheet._reader import FORMULA_TAG, WorkSheetParser

from coderel.errors import InputRefused
from coderel.io.archive import DEFAULT_LIMITS, Limits, check_workbook, raise_hint
from coderel.io.text_tables import RawRow, RawTable, _header_text
from coderel.normalise import MAX_NUMBER_CHARS, CellError, FormulaNoValue

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


_VALUE_TAG = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}v"


class _SheetParser(WorkSheetParser):
    """openpyxl's streaming worksheet parser, reading stored values, that also marks formulas
    without a stored result and keeps over-long numbers as text."""

    def parse_cell(self, element: Any) -> dict[str, Any]:
        stored = element.find(_VALUE_TAG)
        if (
            stored is not None
            and stored.text is not None
            and len(stored.text) > MAX_NUMBER_CHARS
            and element.get("t", "n") == "n"
        ):
            # int() of thousands of digits fails (and is no number of a codebook): keep the text
            text, stored.text = stored.text, None
            cell = super().parse_cell(element)
            cell["value"], cell["data_type"] = text, "s"
            return cell
        cell = super().parse_cell(element)
        if cell["value"] is None and element.find(FORMULA_TAG) is not None:
            cell["value"], cell["data_type"] = FormulaNoValue(), "f"
        return cell


def _load(path: Path) -> Any:
    with warnings.catch_warnings():
        # openpyxl warns about features it drops (data validation extensions, styles); they do
        # not change the cell values read here.
        warnings.simplefilter("ignore")
        return openpyxl.load_workbook(path, read_only=True, data_only=True)


def _refuse(file: str, sheet: str, what: str, name: str) -> InputRefused:
    return InputRefused(f"{file}!{sheet} {what}; {raise_hint(name)}")


def _stream(file: str, ws: Any, wb: Any, limits: Limits) -> tuple[dict[int, dict[int, Any]], Any]:
    """The sheet's non-blank cells as ``{row: {column: value}}`` and the finished parser."""
    grid: dict[int, dict[int, Any]] = {}
    cells = 0
    with ws._get_source() as source:  # the worksheet part, streamed from the zip
        parser = _SheetParser(
            source,
            ws._shared_strings,
            data_only=True,
            epoch=wb.epoch,
            date_formats=wb._date_formats,
            timedelta_formats=wb._timedelta_formats,
        )
        for row_number, row in parser.parse():
            if row_number > limits.max_rows:
                raise _refuse(
                    file,
                    ws.title,
                    f"has a row {row_number}, past the limit of {limits.max_rows} rows",
                    "max_rows",
                )
            for cell in row:
                value = cell["value"]
                if value is None or (isinstance(value, str) and value.strip() == ""):
                    continue
                column = cell["column"]
                if column > limits.max_columns:
                    raise _refuse(
                        file,
                        ws.title,
                        f"has a value in column {column}, past the limit of "
                        f"{limits.max_columns} columns",
                        "max_columns",
                    )
                if cell["data_type"] == "e":
                    value = CellError(str(value))
                grid.setdefault(cell["row"], {})[column] = value
                cells += 1
                if cells > limits.max_cells:
                    raise _refuse(
                        file, ws.title, f"holds more than {limits.max_cells} values", "max_cells"
                    )
    return grid, parser


def _is_hidden(attrs: dict[str, Any]) -> bool:
    return str(attrs.get("hidden", "")).lower() in ("1", "true")


def _sheet_table(file: str, ws: Any, wb: Any, limits: Limits) -> RawTable | None:
    """A sheet as a :class:`RawTable`; ``None`` when the sheet holds no value at all."""
    grid, parser = _stream(file, ws, wb, limits)
    if not grid:
        return None
    header_row = min(grid)
    header_cells = grid[header_row]
    width = max(max(cols) for cols in grid.values())
    if width * len(grid) > limits.max_cells:
        raise _refuse(
            file,
            ws.title,
            f"spans {len(grid)} rows x {width} columns, over the limit of {limits.max_cells} cells",
            "max_cells",
        )
    columns = tuple(range(1, width + 1))
    header = tuple(_header_text(header_cells.get(c)) for c in columns)
    rows = tuple(
        RawRow(number=r, cells=tuple(grid[r].get(c) for c in columns))
        for r in sorted(grid)
        if r > header_row
    )
    hidden_rows = frozenset(
        int(r)
        for r, attrs in parser.row_dimensions.items()
        if _is_hidden(attrs) and int(r) in grid and int(r) > header_row
    )
    hidden_columns: set[int] = set()
    for attrs in parser.column_dimensions.values():
        if not _is_hidden(attrs):
            continue
        low = int(attrs["min"])
        high = min(int(attrs.get("max", low)), width)
        hidden_columns.update(range(low, high + 1))
    merged = []
    for rng in getattr(parser.merged_cells, "mergeCell", None) or ():
        _, _, _, max_row = range_boundaries(rng.ref)
        if max_row >= header_row:
            merged.append(rng.ref)
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
    """Read the visible data sheets of a workbook, each streamed once.

    Raises
    ------
    InputRefused
        When the XML parser is not hardened, or the file fails a check of
        :func:`coderel.io.archive.check_workbook`, a sheet passes a limit, or openpyxl cannot
        read it.
    """
    if not XML_DEFUSED:
        raise InputRefused(
            f"{path.name} not read: openpyxl is not using defusedxml, so workbook XML would be "
            "parsed without protection; install defusedxml (pip install defusedxml)"
        )
    check_workbook(path, limits)
    tables: list[RawTable] = []
    empty: list[str] = []
    wb = None
    try:
        wb = _load(path)
        for ws in wb.worksheets:
            if ws.sheet_state != "visible" or ws.title.strip().casefold() in SKIPPED_SHEETS:
                continue
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                table = _sheet_table(path.name, ws, wb, limits)
            if table is None:
                empty.append(ws.title)
            else:
                tables.append(table)
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
    finally:
        if wb is not None:
            wb.close()
    return Workbook(file=path.name, tables=tuple(tables), empty=tuple(empty))


__all__ = ["SKIPPED_SHEETS", "XML_DEFUSED", "Workbook", "read_workbook"]
