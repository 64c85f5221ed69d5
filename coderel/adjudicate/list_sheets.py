"""The sheets of an adjudication list (xlsx or csv) read as tables of cells, and a cell's text
as coderel wrote it."""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from coderel.adjudicate.model import (
    ABOUT_SHEET,
    MAIN_SHEET,
    RETIRED_SHEET,
)
from coderel.errors import InputRefused
from coderel.io.archive import (
    DEFAULT_LIMITS,
    Limits,
    check_text,
    raise_hint,
)
from coderel.io.safe_text import restore


def clean_cell(value: Any) -> str | None:
    if value is None:
        return None
    if type(value) is str and "'" not in value:  # the commonest cell: nothing to restore
        return value if value.strip() else None
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if value.is_integer():
            value = int(value)
    text = restore(str(value))  # marks coderel put on formula-like text when it wrote the list
    return text if text.strip() else None


def header_text(value: Any) -> str:
    """A header cell as written by coderel (a neutralised ``'=name`` reads as ``=name``)."""
    return clean_cell(value) or "" if value is not None else ""


def _csv_rows(path: Path, limits: Limits) -> list[list[str]]:
    """The records of a CSV list, within the same limits as a coder's sheet."""
    check_text(path, limits)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputRefused(f"cannot read {path.name!r} as UTF-8 CSV") from exc
    # A list edited in a spreadsheet program may come back with semicolons (or tabs).
    first_line = text.split("\n", 1)[0]
    delimiter = ";" if ";" in first_line and "," not in first_line else ","
    if "\t" in first_line and "," not in first_line and ";" not in first_line:
        delimiter = "\t"
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    rows: list[list[str]] = []
    old = csv.field_size_limit(limits.max_field_chars)
    try:
        for row in reader:
            if len(rows) > limits.max_rows:
                raise InputRefused(
                    f"{path.name!r} has more than {limits.max_rows} rows; " + raise_hint("max_rows")
                )
            if len(row) > limits.max_columns:
                raise InputRefused(
                    f"{path.name!r} has a row of {len(row)} cells (line {reader.line_num}), "
                    f"over the limit of {limits.max_columns}; " + raise_hint("max_columns")
                )
            rows.append(row)
    except csv.Error:
        raise InputRefused(
            f"{path.name!r}: a cell near line {reader.line_num + 1} is longer than "
            f"{limits.max_field_chars} characters (or a quote is never closed); "
            + raise_hint("max_field_chars")
        ) from None
    finally:
        csv.field_size_limit(old)
    return rows


def read_tables(
    path: Path, limits: Limits = DEFAULT_LIMITS
) -> dict[str, tuple[list[str], list[list[Any]], list[int]]]:
    """Sheets of an adjudication file: name -> (header, rows, spreadsheet row numbers).

    The file passes the same pre-flight as a coder's sheet (coderel.io.archive: size, zip bomb,
    sheets, rows, columns, cells, field length; docs/limits.md).
    """
    if path.suffix.lower() == ".csv":
        reader = _csv_rows(path, limits)
        if not reader:
            return {MAIN_SHEET: ([], [], [])}
        header, body = [header_text(h) for h in reader[0]], reader[1:]
        lists: dict[str, tuple[list[str], list[list[Any]], list[int]]] = {}
        list_col = header.index("list") if "list" in header else None
        for n, row in enumerate(body, start=2):
            name = row[list_col] if list_col is not None and list_col < len(row) else MAIN_SHEET
            name = name if name in (MAIN_SHEET, RETIRED_SHEET) else MAIN_SHEET
            entry = lists.setdefault(name, (header, [], []))
            entry[1].append(row)
            entry[2].append(n)
        lists.setdefault(MAIN_SHEET, (header, [], []))
        return lists
    if path.suffix.lower() != ".xlsx":
        raise InputRefused(f"{path.name!r}: an adjudication file is .xlsx or .csv")
    from coderel.io.xlsx_values import read_sheet_values

    names = (MAIN_SHEET, RETIRED_SHEET, ABOUT_SHEET)
    grids = read_sheet_values(path, names, limits)  # pre-flight included
    if grids is None:  # cells the fast reader leaves to openpyxl's streaming one
        out = _stream_tables(path, names, limits)
    else:
        out = {name: _sheet_table(path, name, rows, limits) for name, rows in grids.items()}
    if MAIN_SHEET not in out:
        raise InputRefused(
            f"{path.name!r} has no sheet {MAIN_SHEET!r}: not an adjudication list (if it is one, "
            f"name its main sheet {MAIN_SHEET!r} again; nothing was written)"
        )
    return out


def _stream_tables(
    path: Path, names: Iterable[str], limits: Limits
) -> dict[str, tuple[list[str], list[list[Any]], list[int]]]:
    """The named sheets as openpyxl streams them in read-only mode, each within the limits."""
    from openpyxl import load_workbook

    try:
        wb = load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:
        raise InputRefused(f"cannot open {path.name!r} as a workbook") from exc
    out = {}
    try:
        for name in names:
            if name not in wb.sheetnames:
                continue
            ws = wb[name]
            ws.reset_dimensions()  # rows as stored, not padded to a declared A1:XFD1048576
            out[name] = _sheet_table(path, name, ws.iter_rows(values_only=True), limits)
    except InputRefused:
        raise
    except Exception as exc:  # openpyxl raises many types on damaged parts
        raise InputRefused(f"cannot read {path.name!r} as a workbook") from exc
    finally:
        wb.close()
    return out


def _sheet_table(
    path: Path, name: str, grid: Iterable[Sequence[Any]], limits: Limits
) -> tuple[list[str], list[list[Any]], list[int]]:
    """A sheet's header, its non-empty rows and their spreadsheet row numbers, within limits."""
    it = iter(grid)
    header = [header_text(h) for h in next(it, ())]
    rows, numbers = [], []
    cells = 0
    for n, values in enumerate(it, start=2):
        if values is None or all(v is None for v in values):
            continue
        cells += len(values)
        if n > limits.max_rows or len(values) > limits.max_columns:
            raise InputRefused(
                f"{path.name!r}!{name} goes past row {limits.max_rows} or column "
                f"{limits.max_columns}; " + raise_hint("max_rows")
            )
        if cells > limits.max_cells:
            raise InputRefused(
                f"{path.name!r}!{name} holds more than {limits.max_cells} cells; "
                + raise_hint("max_cells")
            )
        rows.append(list(values))
        numbers.append(n)
    return header, rows, numbers
