"""Writing the list: a workbook with sheets, dropdowns and protection, or one csv table."""

from __future__ import annotations

import os
from copy import copy

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


def _write_workbook(adj: Adjudication, path: str | os.PathLike[str]) -> None:
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Alignment, Font, PatternFill, Protection
    from openpyxl.worksheet.cell_range import MultiCellRange
    from openpyxl.worksheet.datavalidation import DataValidation

    from coderel.io.tables import cell_value, fill_sheet, save_workbook

    cb = adj.codebook
    wb = Workbook()
    ws = wb.active
    ws.title = MAIN_SHEET
    headers = main_columns(adj.coders, adj.text_columns, adj.extra_columns)
    ws.append([cell_value(h) for h in headers])  # a coder named =HYPERLINK(...) stays text
    for cell in ws[1]:
        cell.font = Font(bold=True)
    mine = ("decision", "note", "adjudicator", "check", *adj.extra_columns)
    editable = {headers.index(n) + 1 for n in mine}
    text_idx = {headers.index(c) + 1 for c in adj.text_columns}
    fill = PatternFill("solid", start_color=_GROUP_FILL, end_color=_GROUP_FILL)
    check_fill = PatternFill("solid", start_color=_CHECK_FILL, end_color=_CHECK_FILL)
    check_col, decision_col = headers.index("check") + 1, headers.index("decision") + 1
    shade, last_unit = False, None
    ranges: dict[str, list[str]] = {}
    dcol = column_letter(headers.index("decision") + 1)
    # A cell's style depends on its column, the row's shade and its check mark: each of these few
    # styles is made once on a model cell and copied (styling every cell anew costs more than
    # writing it).
    styles: dict[tuple[int, bool, bool], object] = {}

    def style(j: int, shaded: bool, marked: bool) -> object:
        key = (j, shaded, marked and j in (check_col, decision_col))
        if key not in styles:
            model = WriteOnlyCell(ws)
            if j in editable:
                model.protection = Protection(locked=False)
            if j in text_idx:
                model.alignment = Alignment(wrap_text=True, vertical="top")
            if shaded:
                model.fill = fill
            if key[2]:
                model.fill = check_fill
            styles[key] = model._style
        return styles[key]

    for i, row in enumerate(adj.rows, start=2):
        texts = {c: adj.narratives.get(row.unit, {}).get(c, "") for c in adj.text_columns}
        record = row_record(row, adj.coders, texts)
        ws.append([cell_value(record.get(h)) for h in headers])
        if row.unit != last_unit:
            shade, last_unit = (not shade), row.unit
        for j in range(1, len(headers) + 1):
            cell = ws.cell(row=i, column=j)  # not ws[i]: it scans every cell of the sheet
            cell._style = copy(style(j, shade, row.to_check))
        ranges.setdefault(row.variable, []).append(f"{dcol}{i}")
    widths = {"unit": 12, "variable": 20, "kind": 14, "decision": 30, "note": 30}
    widths.update({"adjudicator": 16, "check": 40, "key": 24})
    for j, h in enumerate(headers, start=1):
        default = 60 if j in text_idx else 26
        ws.column_dimensions[column_letter(j)].width = widths.get(h, default)
    ws.column_dimensions[column_letter(headers.index("key") + 1)].hidden = True
    ws.freeze_panes = "D2"
    if adj.rows:
        ws.auto_filter.ref = f"A1:{column_letter(len(headers))}{len(adj.rows) + 1}"

    # dropdown lists live on a hidden sheet (a literal list is limited to 255 characters)
    lists = wb.create_sheet(LISTS_SHEET)
    list_col = 0
    for var in cb.variables:
        if var.name not in ranges:
            continue
        if var.is_categorical and not var.multiple:
            list_col += 1
            letter = column_letter(list_col)
            lists.cell(row=1, column=list_col, value=cell_value(var.name))
            entries = _choices(var)
            for r, entry in enumerate(entries, start=2):
                lists.cell(row=r, column=list_col, value=cell_value(entry))
            dv = DataValidation(
                type="list",
                formula1=f"'{LISTS_SHEET}'!${letter}$2:${letter}${len(entries) + 1}",
                allow_blank=True,
                errorStyle="warning",
                showErrorMessage=True,
                error=_input_message(var),
                errorTitle="not a code of this variable",
            )
        else:
            dv = DataValidation(type=None, allow_blank=True)
        dv.promptTitle = var.name[:32]
        dv.prompt = _input_message(var)
        dv.showInputMessage = True
        dv.sqref = MultiCellRange(" ".join(ranges[var.name]))  # dv.add: a scan per cell
        ws.add_data_validation(dv)
    lists.sheet_state = "hidden"

    ws.protection.sheet = True
    ws.protection.autoFilter = False
    ws.protection.sort = False
    ws.protection.formatColumns = False
    ws.protection.formatRows = False

    summary = adj.summary()
    fill_sheet(wb.create_sheet(SUMMARY_SHEET), summary, width=30)

    retired_ws = wb.create_sheet(RETIRED_SHEET)
    rcoders = retired_coders(adj)
    rcols = retired_columns(rcoders, adj.extra_columns)
    frame = pd.DataFrame([row_record(r, rcoders) for r in adj.retired], columns=rcols)
    fill_sheet(retired_ws, frame, width=40)

    about = pd.DataFrame(
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
    fill_sheet(wb.create_sheet(ABOUT_SHEET), about, width=80)
    save_workbook(wb, path)
