"""Writing the list: a workbook with sheets, dropdowns and protection, or one csv table."""

from __future__ import annotations

import os
from typing import Any

import pandas as pd

from coderel.adjudicate.decisions import hint
from coderel.adjudicate.model import (
    ABOUT_SHEET,
    LISTS_SHEET,
    MAIN_SHEET,
    RETIRED_SHEET,
    SUMMARY_SHEET,
    Adjudication,
    column_letter,
    main_columns,
    retired_coders,
    retired_columns,
    row_record,
    rows_frame,
)
from coderel.adjudicate.tokens import NOT_APPLICABLE
from coderel.codebook import Variable

_GROUP_FILL = "EEF2F7"
#: Fill of a decision waiting to be re-confirmed, and of its ``check`` cell (light amber).
_CHECK_FILL = "FCE8B2"


def _choices(var: Variable) -> list[str]:
    """Dropdown entries of a variable: ``code = label`` of categories, missing codes, n/a."""
    entries = [var.display(c) for c in var.codes] + [var.display(m) for m in var.missing_codes]
    if var.applies_when is not None:
        entries.append(NOT_APPLICABLE)
    return entries


def _input_message(var: Variable) -> str:
    return hint(var)[:250]


def write_adjudication(adjudication: Adjudication, path: str | os.PathLike[str]) -> None:
    """Write the list as ``.xlsx`` (sheets, dropdowns, protection) or ``.csv``, atomically."""
    from coderel.io.tables import table_format, write_csv

    form = table_format(path)
    if form == "csv":
        write_csv(
            rows_frame(
                adjudication.rows,
                adjudication.retired,
                adjudication.coders,
                text_columns=adjudication.text_columns,
                narratives=adjudication.narratives,
                extra_columns=adjudication.extra_columns,
            ),
            path,
        )
        return
    if form != "xlsx":
        from coderel.errors import UsageError

        raise UsageError("the adjudication list is written as .xlsx or .csv")
    _write_workbook(adjudication, path)


#: The main sheet's part in the package (it is the first sheet added).
MAIN_SHEET_PART = "xl/worksheets/sheet1.xml"
#: The main sheet's row styles: (shaded, marked), indexed ``2 * shaded + marked``.
_ROW_STYLES = ((False, False), (False, True), (True, False), (True, True))


def _write_workbook(
    adj: Adjudication, path: str | os.PathLike[str], *, splice: bool = True
) -> None:
    """The list as a workbook, written with XlsxWriter in its constant-memory mode.

    XlsxWriter streams each row to disk as it is written, so rows go in order, sheet by sheet.
    The main sheet's rows (a 20,000-unit list is ~650,000 cells) are put in afterwards by
    :func:`coderel.io.xlsx_rows.splice_rows`, column by column, when every cell is a text of
    safe length or empty (``splice=False``, any other cell, or probe rows not found as expected
    write them cell by cell with XlsxWriter; the sheet is the same either way). Every text cell
    is written as text (never read as a number, formula or link) after
    :func:`coderel.io.tables.cell_value` neutralised it. The zip members carry a fixed 1980 time
    stamp and the properties a fixed date, so the same list gives the same bytes.
    """
    from coderel.io.atomic import atomic_path
    from coderel.io.tables import check_sheet_rows
    from coderel.io.xlsx_rows import splice_rows

    check_sheet_rows(len(adj.rows), path, MAIN_SHEET)
    check_sheet_rows(len(adj.retired), path, RETIRED_SHEET)
    with atomic_path(path) as tmp:
        spliced = _workbook_at(adj, tmp, splice=splice)
        if spliced is not None:
            columns, row_probes = spliced
            if not splice_rows(tmp, MAIN_SHEET_PART, columns, row_probes, max(row_probes) + 1):
                _workbook_at(adj, tmp, splice=False)  # written again, over the same file


def _workbook_at(
    adj: Adjudication, tmp: os.PathLike[str], *, splice: bool
) -> tuple[list[list[Any]], list[int]] | None:
    """Write the workbook at ``tmp``; with ``splice``, what :func:`_main_sheet` left to splice."""
    from xlsxwriter import Workbook

    from coderel.io.tables import FIXED_TIME

    cb = adj.codebook
    headers = main_columns(adj.coders, adj.text_columns, adj.extra_columns)
    ranges: dict[str, list[str]] = {}
    dcol = column_letter(headers.index("decision") + 1)
    for i, row in enumerate(adj.rows, start=2):
        ranges.setdefault(row.variable, []).append(f"{dcol}{i}")
    wb = Workbook(
        str(tmp),
        {
            "constant_memory": True,
            "strings_to_numbers": False,
            "strings_to_formulas": False,
            "strings_to_urls": False,
        },
    )
    wb.set_properties({"created": FIXED_TIME, "author": "coderel"})
    bold = wb.add_format({"bold": True})
    ws = wb.add_worksheet(MAIN_SHEET)
    lists = wb.add_worksheet(LISTS_SHEET)
    spliced = _main_sheet(wb, ws, adj, headers, bold, splice=splice)
    _lists_sheet(wb, ws, lists, cb, ranges)
    _protect(ws)
    _frame_sheet(wb, wb.add_worksheet(SUMMARY_SHEET), adj.summary(), bold, width=30)
    rcoders = retired_coders(adj)
    rcols = retired_columns(rcoders, adj.extra_columns)
    frame = pd.DataFrame([row_record(r, rcoders) for r in adj.retired], columns=rcols)
    _frame_sheet(wb, wb.add_worksheet(RETIRED_SHEET), frame, bold, width=40)
    _frame_sheet(wb, wb.add_worksheet(ABOUT_SHEET), _about(adj), bold, width=80)
    wb.close()
    return spliced


def _shown_column(values: list[Any]) -> list[Any]:
    """A column of the list as written: each distinct text neutralised once
    (:func:`coderel.io.tables.cell_value`; a list repeats a few shown values over thousands of
    rows), ``None`` for an empty cell, a carriage return as the line break an XML parser makes
    of it (XlsxWriter would keep it as the escape ``_x000D_``, which openpyxl reads literally)."""
    from coderel.io.tables import cell_value

    shown: dict[str, Any] = {}
    out: list[Any] = []
    for value in values:
        if type(value) is str:
            cell = shown.get(value)
            if cell is None:
                cell = cell_value(value) if value else ""
                if type(cell) is str and "\r" in cell:
                    cell = cell.replace("\r\n", "\n").replace("\r", "\n")
                cell = shown[value] = cell if cell != "" else _EMPTY
            out.append(None if cell is _EMPTY else cell)
        else:
            out.append(cell_value(value) if value is not None else None)
    return out


#: What an empty text is shown as (a marker, so that a cached ``None`` is told from no entry).
_EMPTY = object()


def _write_cell(ws: Any, i: int, j: int, value: Any, style: Any = None) -> None:
    """One cell, 0-based: a number as a number, anything else as text (already neutralised)."""
    if value is None or value == "":
        if style is not None:
            ws.write_blank(i, j, None, style)
    elif isinstance(value, bool):
        ws.write_boolean(i, j, value, style)
    elif isinstance(value, int | float):
        ws.write_number(i, j, value, style)
    else:
        if "\r" in value:
            # what an XML parser makes of a carriage return that openpyxl wrote as it is;
            # XlsxWriter would keep it as the escape _x000D_, which openpyxl reads literally
            value = value.replace("\r\n", "\n").replace("\r", "\n")
        _write_text(ws, i, j, value, style)


def _write_text(ws: Any, i: int, j: int, text: str, style: Any = None) -> None:
    """A text cell. XlsxWriter copies a text that starts with ``<r>`` and ends with ``</r>`` into
    the sheet as rich text markup, unescaped (its constant-memory mode stores rich strings so):
    a coder named ``<r>x</r>`` would break the sheet's XML. Such a text is written as a rich
    string of three plain pieces instead, which every reader joins back into the same text."""
    if text.startswith("<r>") and text.endswith("</r>"):
        pieces = ("<", "r", text[2:])
        ws.write_rich_string(i, j, *pieces, *((style,) if style is not None else ()))
    else:
        ws.write_string(i, j, text, style)


def _main_columns_cells(adj: Adjudication, headers: list[str]) -> list[list[Any]]:
    """The main sheet's cells column by column (header order), as they are written."""
    rows = adj.rows
    texts = [adj.narratives.get(r.unit, {}) for r in rows] if adj.text_columns else []
    # Each header names one field of the row (no two alike, no added column named like one of
    # row_record's own): the columns straight from the rows' fields, without a record per row.
    if len(set(headers)) == len(headers) and "reason" not in adj.extra_columns:
        columns: list[list[Any]] = [
            [r.unit for r in rows],
            [r.variable for r in rows],
            [r.kind for r in rows],
            *([r.values.get(c, "") for r in rows] for c in adj.coders),
            *([t.get(c, "") for t in texts] for c in adj.text_columns),
            [r.decision for r in rows],
            [r.note for r in rows],
            [r.adjudicator for r in rows],
            [r.check for r in rows],
            [r.key for r in rows],
            *([r.extra.get(c) for r in rows] for c in adj.extra_columns),
        ]
    else:
        no_texts: dict[str, str] = {}
        records = [
            row_record(
                r,
                adj.coders,
                {c: (texts[k] if texts else no_texts).get(c, "") for c in adj.text_columns},
            )
            for k, r in enumerate(rows)
        ]
        columns = [[rec.get(h) for rec in records] for h in headers]
    return [_shown_column(column) for column in columns]


def _main_sheet(
    wb: Any, ws: Any, adj: Adjudication, headers: list[str], bold: Any, *, splice: bool
) -> tuple[list[list[Any]], list[int]] | None:
    """The rows to decide: the adjudicator's columns unlocked, rows shaded by unit, decisions
    waiting to be re-confirmed marked, text columns wrapped.

    With ``splice`` and cells that allow it, only one probe row per row style is written here,
    and the columns and each row's probe row are returned for
    :func:`coderel.io.xlsx_rows.splice_rows` to put in once the workbook is closed; else every
    cell is written here and ``None`` returned.
    """
    from coderel.io.tables import cell_value
    from coderel.io.xlsx_rows import splice_ready

    for j, h in enumerate(headers):
        _write_cell(ws, 0, j, cell_value(h), bold)  # a coder named =HYPERLINK(...) stays text
    mine = ("decision", "note", "adjudicator", "check", *adj.extra_columns)
    editable = {headers.index(n) for n in mine}
    text_idx = {headers.index(c) for c in adj.text_columns}
    marked_cols = {headers.index("check"), headers.index("decision")}
    # A cell's style depends on its column, the row's shade and its check mark: each of these
    # few combinations is one format, made once.
    styles: dict[tuple[int, bool, bool], Any] = {}

    def style(j: int, shaded: bool, marked: bool) -> Any:
        key = (j, shaded, marked and j in marked_cols)
        if key not in styles:
            props: dict[str, Any] = {}
            if j in editable:
                props["locked"] = False
            if j in text_idx:
                props.update(text_wrap=True, valign="top")
            if shaded:
                props.update(pattern=1, bg_color=f"#{_GROUP_FILL}")
            if key[2]:
                props.update(pattern=1, bg_color=f"#{_CHECK_FILL}")
            styles[key] = wb.add_format(props) if props else None
        return styles[key]

    # one list of the columns' styles per (shaded, marked), indexed 2 * shaded + marked
    row_styles = [
        [style(j, shaded, marked) for j in range(len(headers))] for shaded, marked in _ROW_STYLES
    ]
    columns = _main_columns_cells(adj, headers)
    shade, last_unit = False, None
    row_style: list[int] = []
    for row in adj.rows:
        if row.unit != last_unit:
            shade, last_unit = (not shade), row.unit
        row_style.append(2 * shade + row.to_check)
    spliced = None
    if splice and adj.rows and splice_ready(columns):
        # One probe row per row style, in the order the rows first use them: XlsxWriter numbers
        # the formats as cells first use them, so its style table comes out as cell by cell.
        probes = list(dict.fromkeys(row_style))
        for i, k in enumerate(probes, start=1):
            for j in range(len(headers)):
                ws.write_string(i, j, "-", row_styles[k][j])
        probe_of = {k: p for p, k in enumerate(probes)}
        spliced = (columns, [probe_of[k] for k in row_style])
    else:
        write_string, write_blank = ws.write_string, ws.write_blank
        cells_by_row = zip(*columns, strict=True)
        for i, (k, cells) in enumerate(zip(row_style, cells_by_row, strict=True), start=1):
            styles_now = row_styles[k]
            for j, value in enumerate(cells):
                if value.__class__ is str and not value.startswith("<r>"):
                    write_string(i, j, value, styles_now[j])  # the commonest cell, at once
                elif value is None:
                    if styles_now[j] is not None:
                        write_blank(i, j, None, styles_now[j])
                else:
                    _write_cell(ws, i, j, value, styles_now[j])
    widths = {"unit": 12, "variable": 20, "kind": 14, "decision": 30, "note": 30}
    widths.update({"adjudicator": 16, "check": 40, "key": 24})
    key_col = headers.index("key")
    for j, h in enumerate(headers):
        width = widths.get(h, 60 if j in text_idx else 26)
        ws.set_column(j, j, width, None, {"hidden": True} if j == key_col else None)
    ws.freeze_panes(1, 3)
    if adj.rows:
        ws.autofilter(0, 0, len(adj.rows), len(headers) - 1)
    return spliced


def _lists_sheet(wb: Any, ws: Any, lists: Any, cb: Any, ranges: dict[str, list[str]]) -> None:
    """Dropdowns of the decision cells; their entries live on a hidden sheet (a literal list is
    limited to 255 characters)."""
    from coderel.io.tables import cell_value

    columns: list[list[Any]] = []
    for var in cb.variables:
        if var.name not in ranges:
            continue
        cells = " ".join(ranges[var.name])
        first = ranges[var.name][0]
        options: dict[str, Any] = {
            "input_title": var.name[:32],
            "input_message": _input_message(var),
            "show_input": True,
            "ignore_blank": True,
            "multi_range": cells,
        }
        if var.is_categorical and not var.multiple:
            entries = _choices(var)
            columns.append([cell_value(var.name), *(cell_value(e) for e in entries)])
            letter = column_letter(len(columns))
            options.update(
                validate="list",
                source=f"='{LISTS_SHEET}'!${letter}$2:${letter}${len(entries) + 1}",
                error_type="warning",
                show_error=True,
                error_message=_input_message(var),
                error_title="not a code of this variable",
            )
        else:
            options.update(validate="any", show_error=False)
        ws.data_validation(first, options)
    for i in range(max((len(c) for c in columns), default=0)):
        for j, column in enumerate(columns):
            if i < len(column):
                _write_cell(lists, i, j, column[i])
    lists.hide()


def _protect(ws: Any) -> None:
    """Lock the sheet but for the unlocked cells; filtering, sorting and resizing stay free."""
    ws.protect(
        "",
        {
            "objects": True,
            "scenarios": True,
            "format_columns": True,
            "format_rows": True,
            "sort": True,
            "autofilter": True,
        },
    )


def _about(adj: Adjudication) -> pd.DataFrame:
    cb = adj.codebook
    return pd.DataFrame(
        [
            ("codebook", cb.title),
            ("codebook version", cb.version),
            *[("coder", c) for c in adj.coders],
            *[("text column", c) for c in adj.text_columns],
            ("rule", adj.settling.describe()),
            ("how to decide", "fill 'decision' with a code, 'code = label', a label, "),
            ("", f"several codes as 1;3 (multi-select), a missing code, or {NOT_APPLICABLE!r}"),
            ("", "decisions are kept when the list is made again (matched by unit|variable)"),
            ("", "a filled 'check' cell: the coders' values changed after the decision; merge"),
            ("", "does not use it until you confirm (or change) the decision and clear 'check'"),
        ],
        columns=["item", "value"],
    )


def _frame_sheet(wb: Any, ws: Any, frame: pd.DataFrame, bold: Any, *, width: int) -> None:
    """A table on its own sheet as :func:`coderel.io.tables.fill_sheet` lays it out: bold header
    frozen, neutralised cells, each column as wide as its first 200 values (at most ``width``),
    a column with longer text wrapped."""
    from coderel.io.tables import cell_value

    wrap = wb.add_format({"text_wrap": True, "valign": "top"})
    wrapped = set()
    for j, col in enumerate(frame.columns):
        _write_cell(ws, 0, j, cell_value(str(col)), bold)
        sample = [len(str(v)) for v in frame[col].head(200) if v is not None]
        longest = max([len(str(col)), *sample])
        if longest > width:
            wrapped.add(j)
        ws.set_column(j, j, min(max(8, longest + 2), width))
    for i, row in enumerate(frame.itertuples(index=False, name=None), start=1):
        for j, v in enumerate(row):
            _write_cell(ws, i, j, cell_value(v), wrap if j in wrapped else None)
    ws.freeze_panes(1, 0)
