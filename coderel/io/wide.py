"""Wide sheets: one row per unit, one column per variable (plus the unit and text columns).

The coder is the file's stem, the sheet's name (a workbook with several sheets) or a ``coder``
column. Columns are matched to the codebook without regard to case; unknown, duplicate and hidden
columns, hidden rows, merged cells, rows without a unit ID or coder and repeated units are
problems with their cell.
"""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING

from openpyxl.utils import get_column_letter, range_boundaries

from coderel.io.names import closest, text_of
from coderel.io.text_tables import RawRow, RawTable
from coderel.normalise import CellError, FormulaNoValue, quote

if TYPE_CHECKING:
    from coderel.io.reader import SheetReader

CODER_COLUMN = "coder"


def _map_columns(
    reader: SheetReader, table: RawTable
) -> tuple[int | None, int | None, dict[str, int], dict[str, int]]:
    cb = reader.codebook
    by_fold_var = {v.casefold(): v for v in cb.names}
    by_fold_text = {t.casefold(): t for t in cb.text_columns}
    unit_pos: int | None = None
    coder_pos: int | None = None
    variables: dict[str, int] = {}
    texts: dict[str, int] = {}
    known = [cb.unit, *cb.names, *cb.text_columns]
    for pos, name in enumerate(table.header):
        fold = name.casefold()
        place = reader.place(table, None, pos)
        if name == "":
            if any(pos < len(r.cells) and r.cells[pos] is not None for r in table.rows):
                reader.problems.add(
                    "unknown-column",
                    "a column holds values but has no header",
                    hint=f"give it a header ({cb.unit}, a variable or a text column) or delete it",
                    **place,
                )
            continue
        target: tuple[str, str] | None = None
        if fold == cb.unit.casefold():
            target = ("unit", cb.unit)
        elif fold in by_fold_var:
            target = ("variable", by_fold_var[fold])
        elif fold in by_fold_text:
            target = ("text", by_fold_text[fold])
        elif fold == CODER_COLUMN:
            target = ("coder", CODER_COLUMN)
        if target is None:
            close = closest(name, known)
            reader.problems.add(
                "unknown-column",
                f"the column {quote(name)} is not in the codebook",
                hint=(f"did you mean {close!r}? " if close else "")
                + "rename it to a variable of the codebook, or delete it",
                **place,
            )
            continue
        kind, key = target
        taken = (
            (kind == "unit" and unit_pos is not None)
            or (kind == "coder" and coder_pos is not None)
            or (kind == "variable" and key in variables)
            or (kind == "text" and key in texts)
        )
        if taken:
            reader.problems.add(
                "duplicate-column",
                f"a second column is headed {quote(name)}; only the first is read",
                hint="delete or rename the second column",
                variable=key if kind == "variable" else None,
                **place,
            )
            continue
        if kind == "unit":
            unit_pos = pos
        elif kind == "coder":
            coder_pos = pos
        elif kind == "variable":
            variables[key] = pos
        else:
            texts[key] = pos
    return unit_pos, coder_pos, variables, texts


def read_wide(reader: SheetReader, table: RawTable, default_coder: str) -> None:
    cb = reader.codebook
    unit_pos, coder_pos, variables, texts = _map_columns(reader, table)
    if unit_pos is None:
        # A title above the header (the header then sits in a lower row) is a common cause.
        lower = next(
            (
                r.number
                for r in table.rows[:20]
                if any(
                    isinstance(c, str) and c.strip().casefold() == cb.unit.casefold()
                    for c in r.cells
                )
            ),
            None,
        )
        reader.problems.add(
            "missing-unit-column",
            f"no column is headed {cb.unit!r} (the codebook's unit ID column)",
            hint=(
                f"the headers seem to be in row {lower}: delete the rows above them, so that "
                "the headers are the first row"
                if lower is not None
                else f"add a column {cb.unit!r} holding each unit's ID"
                + (
                    "; if this sheet holds no coding data, hide it (hidden sheets and a sheet "
                    "named 'codebook' are not read)"
                    if table.sheet is not None
                    else ""
                )
            ),
            file=table.file,
            sheet=table.sheet,
            line=table.header_line,
        )
        return
    for name in cb.names:
        if name not in variables:
            reader.problems.add(
                "missing-column",
                f"no column for the variable {name!r}",
                hint=f"add a column headed {name!r} (blank cells are allowed)",
                file=table.file,
                sheet=table.sheet,
                line=table.header_line,
                variable=name,
            )
    column_names = {pos: name for name, pos in variables.items()}
    for pos in sorted(table.hidden_columns):
        if pos - 1 < len(table.header) and table.header[pos - 1]:
            reader.problems.add(
                "hidden-column",
                "this column is hidden; its values were read",
                hint="unhide it and check its values",
                variable=column_names.get(pos - 1),
                **reader.place(table, None, pos - 1),
            )
    if not table.rows:
        reader.problems.add(
            "empty-sheet",
            "the sheet has a header but no data rows",
            hint="check that the right file was given, or remove it",
            file=table.file,
            sheet=table.sheet,
            line=table.header_line,
        )
        return
    if coder_pos is None and not reader.claim(default_coder, table):
        return
    units: dict[int, str] = {}
    for row in table.rows:
        unit = _wide_row(reader, table, row, unit_pos, coder_pos, variables, texts, default_coder)
        if unit is not None:
            units[row.number] = unit
    _merged(reader, table, units, column_names)


def _merged(
    reader: SheetReader, table: RawTable, units: dict[int, str], names: dict[int, str]
) -> None:
    """One ``merged-cells`` warning per merged range, placed at its top-left cell."""
    for rng in table.merged:
        min_col, min_row, _, _ = range_boundaries(rng)
        reader.problems.add(
            "merged-cells",
            f"cells {rng} are merged: only the first holds a value, the others read as blank",
            hint="unmerge the cells and fill each one",
            file=table.file,
            sheet=table.sheet,
            cell=f"{get_column_letter(min_col)}{min_row}",
            unit=units.get(min_row),
            variable=names.get(min_col - 1),
        )


def _wide_row(
    reader: SheetReader,
    table: RawTable,
    row: RawRow,
    unit_pos: int,
    coder_pos: int | None,
    variables: dict[str, int],
    texts: dict[str, int],
    default_coder: str,
) -> str | None:
    """Read one row of a wide sheet; return its unit ID when the row was read."""
    cells = row.cells
    used = [unit_pos, *variables.values(), *texts.values()]
    if coder_pos is not None:
        used.append(coder_pos)
    if all(cells[p] is None for p in used):
        return None
    unit_place = reader.place(table, row, unit_pos)
    raw_unit = cells[unit_pos]
    unit = text_of(raw_unit)
    if unit is None:
        if isinstance(raw_unit, CellError | FormulaNoValue):
            error = isinstance(raw_unit, CellError)
            code = "spreadsheet-error" if error else "formula-no-value"
            reader.problems.add(
                code,
                "the unit ID cell holds no usable value; the row was not read",
                hint="type the unit ID",
                **unit_place,
            )
        else:
            reader.problems.add(
                "missing-unit-id",
                "this row has values but no unit ID; the row was not read",
                hint=f"fill in the {reader.codebook.unit!r} cell",
                **unit_place,
            )
        return None
    if isinstance(raw_unit, dt.datetime | dt.date | dt.time):
        reader.problems.add(
            "date-unit-id",
            f"the unit ID cell holds a date or time, read as {unit}",
            hint="if the ID is not a date (a spreadsheet turns IDs like 1-3 into dates), "
            "format the column as Text and type the IDs again; if it is, write it the same "
            "way in every sheet",
            unit=unit,
            **unit_place,
        )
    coder = default_coder
    if coder_pos is not None:
        coder_text = text_of(cells[coder_pos])
        if coder_text is None:
            reader.problems.add(
                "missing-coder",
                "this row has no coder name; the row was not read",
                hint="fill in the coder cell",
                unit=unit,
                **reader.place(table, row, coder_pos),
            )
            return None
        coder = coder_text
        if not reader.claim(coder, table, unit_place["cell"]):
            return None
    first = reader.first_unit((coder, table.file, table.sheet), unit, unit_place["cell"])
    if first is not None:
        reader.problems.add(
            "duplicate-unit",
            f"unit {unit} appears again (first in {first}); this row was not read",
            hint="delete the repeated row, or fix its unit ID",
            unit=unit,
            coder=coder,
            **unit_place,
        )
        return None
    if row.number in table.hidden_rows:
        reader.problems.add(
            "hidden-row",
            "this row is hidden; its values were read",
            hint="unhide the row and check it",
            unit=unit,
            coder=coder,
            **unit_place,
        )
    for variable in reader.codebook.variables:
        pos = variables.get(variable.name)
        if pos is None:
            reader.records.append(
                {
                    "unit": unit,
                    "coder": coder,
                    "variable": variable.name,
                    "value": None,
                    "missing": None,
                    "file": table.file,
                    "sheet": table.sheet,
                    "cell": None,
                    "_line": row.line,
                    "_invalid": True,
                }
            )
            continue
        reader.add_record(
            unit,
            coder,
            variable,
            cells[pos],
            typed=table.is_typed(pos),
            place=reader.place(table, row, pos),
        )
    for column, pos in texts.items():
        reader.add_text(unit, coder, column, cells[pos])
    return unit
