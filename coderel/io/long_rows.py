"""Long tables (unit, coder, variable, value) read row by row.

Used for workbooks and for the CSV and Parquet files that the column reader
(:mod:`coderel.io.long_columnar`) leaves to it; both give the same records and problems. A coder's
variables missing from the table are added as blank records, so that every (unit, coder) has one
record per variable, as in a wide sheet.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from coderel.io.names import closest, text_of
from coderel.io.text_tables import RawTable
from coderel.normalise import quote

if TYPE_CHECKING:
    from coderel.io.reader import SheetReader


def read_long(reader: SheetReader, table: RawTable) -> None:
    cb = reader.codebook
    text_columns = {t.casefold(): t for t in cb.text_columns}
    by_fold_var = {v.casefold(): v for v in cb.names}
    given: dict[tuple[str, str], set[str]] = {}
    order: list[tuple[str, str, dict[str, Any]]] = []
    if not table.rows:
        reader.problems.add(
            "empty-sheet",
            "the long table has a header but no data rows",
            hint="check that the right file was given, or remove it",
            file=table.file,
            sheet=table.sheet,
            line=table.header_line,
        )
        return
    source = (table.file, table.sheet)
    for row in table.rows:
        cells = row.cells
        if all(c is None for c in cells[:4]):
            continue
        unit = text_of(cells[0])
        coder = text_of(cells[1])
        name = text_of(cells[2])
        if unit is None:
            reader.problems.add(
                "missing-unit-id",
                "this row has no unit ID; it was not read",
                hint="fill in the unit cell",
                coder=coder,
                **reader.place(table, row, 0),
            )
            continue
        if coder is None:
            reader.problems.add(
                "missing-coder",
                "this row has no coder name; it was not read",
                hint="fill in the coder cell",
                unit=unit,
                **reader.place(table, row, 1),
            )
            continue
        if reader.owners.get(coder) != source and not reader.claim(
            coder, table, table.cell_ref(1, row.number), long=True
        ):
            continue
        variable_name = by_fold_var.get(name.casefold()) if name else None
        text_name = text_columns.get(name.casefold()) if name else None
        if variable_name is None and text_name is None:
            close = closest(name or "", [*cb.names, *cb.text_columns])
            reader.problems.add(
                "unknown-variable",
                f"{quote(name) if name else 'a blank name'} is not a variable of the codebook",
                hint=(f"did you mean {close!r}? " if close else "")
                + "use the variable names of the codebook",
                unit=unit,
                coder=coder,
                **reader.place(table, row, 2),
            )
            continue
        key_name = variable_name or text_name or ""
        value_place = reader.place(table, row, 3)
        first = reader.first_unit(
            (coder, table.file, table.sheet), (unit, key_name), value_place["cell"]
        )
        if first is not None:
            reader.problems.add(
                "duplicate-unit",
                f"unit {unit}, variable {key_name} appears again (first in {first}); "
                "this row was not read",
                hint="delete the repeated row",
                unit=unit,
                coder=coder,
                variable=variable_name,
                **value_place,
            )
            continue
        if text_name is not None and variable_name is None:
            reader.add_text(unit, coder, text_name, cells[3])
            continue
        pair = (unit, coder)
        if pair not in given:
            given[pair] = set()
            order.append((unit, coder, {"file": table.file, "sheet": table.sheet}))
        given[pair].add(key_name)
        reader.add_record(
            unit,
            coder,
            cb.variable(key_name),
            cells[3],
            typed=table.is_typed(3),
            place=value_place,
        )
    for unit, coder, place in order:
        for variable in cb.variables:
            if variable.name not in given[(unit, coder)]:
                reader.add_record(
                    unit,
                    coder,
                    variable,
                    None,
                    typed=table.typed,
                    place={**place, "cell": None, "line": None},
                    present=False,
                )
