"""Reading an earlier adjudication list (xlsx or csv): its rows, and its decisions."""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from coderel.adjudicate.decisions import Decision, Decisions, hint, parse_decision
from coderel.adjudicate.model import (
    ABOUT_SHEET,
    FIXED_COLUMNS,
    MAIN_SHEET,
    RETIRED_SHEET,
    Adjudication,
    AdjudicationRow,
    column_letter,
)
from coderel.codebook import Codebook
from coderel.codings import SourceFile
from coderel.errors import DataProblems, InputRefused
from coderel.io.archive import (
    DEFAULT_LIMITS,
    Limits,
    check_text,
    check_workbook,
    raise_hint,
)
from coderel.io.atomic import sha256_file
from coderel.io.safe_text import restore
from coderel.problems import Problems


def _clean(value: Any) -> str | None:
    if value is None:
        return None
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if value.is_integer():
            value = int(value)
    text = restore(str(value))  # marks coderel put on formula-like text when it wrote the list
    return text if text.strip() else None


def _header(value: Any) -> str:
    """A header cell as written by coderel (a neutralised ``'=name`` reads as ``=name``)."""
    return _clean(value) or "" if value is not None else ""


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


def _read_tables(
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
        header, body = [_header(h) for h in reader[0]], reader[1:]
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
    from openpyxl import load_workbook

    check_workbook(path, limits)
    try:
        wb = load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:
        raise InputRefused(f"cannot open {path.name!r} as a workbook") from exc
    out: dict[str, tuple[list[str], list[list[Any]], list[int]]] = {}
    try:
        for name in (MAIN_SHEET, RETIRED_SHEET, ABOUT_SHEET):
            if name not in wb.sheetnames:
                continue
            ws = wb[name]
            ws.reset_dimensions()  # rows as stored, not padded to a declared A1:XFD1048576
            it = ws.iter_rows(values_only=True)
            header = [_header(h) for h in next(it, ())]
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
            out[name] = (header, rows, numbers)
    except InputRefused:
        raise
    except Exception as exc:  # openpyxl raises many types on damaged parts
        raise InputRefused(f"cannot read {path.name!r} as a workbook") from exc
    finally:
        wb.close()
    if MAIN_SHEET not in out:
        raise InputRefused(
            f"{path.name!r} has no sheet {MAIN_SHEET!r}: not an adjudication list (if it is one, "
            f"name its main sheet {MAIN_SHEET!r} again; nothing was written)"
        )
    return out


def _coder_columns(
    header: list[str], known_text: set[str], coders: set[str] | None = None
) -> list[tuple[int, str]]:
    """(column index, coder name) of every coder column of a list's header.

    ``coders``: the coders the list was written for (its ``about`` sheet); a column of another
    name is then one the adjudicator added, not a coder.
    """
    out = [
        (i, h[: -len(" (coder)")] if h.endswith(" (coder)") else h)
        for i, h in enumerate(header)
        if h and h not in FIXED_COLUMNS and h not in known_text
    ]
    return out if coders is None else [(i, c) for i, c in out if c in coders]


def _about_coders(tables: Mapping[str, Any]) -> set[str] | None:
    """The coders named on a list's ``about`` sheet (None for a list without one, as a CSV)."""
    if ABOUT_SHEET not in tables:
        return None
    names = {
        _header(row[1]) for row in tables[ABOUT_SHEET][1] if len(row) >= 2 and row[0] == "coder"
    }
    return names or None


def _added_columns(tables: Mapping[str, Any], codebook: Codebook) -> list[str]:
    """Columns the adjudicator added to the main list that hold something (not kept on rewrite)."""
    coders = _about_coders(tables)
    if coders is None:
        return []
    header, body, _ = tables[MAIN_SHEET]
    extra = [
        (i, header[i])
        for i, c in _coder_columns(header, _known_text(tables, codebook))
        if c not in coders
    ]
    return [h for i, h in extra if any(i < len(r) and _clean(r[i]) for r in body)]


def _known_text(tables: Mapping[str, Any], codebook: Codebook) -> set[str]:
    """Text columns of a list: the codebook's, and those named on its ``about`` sheet."""
    known = set(codebook.text_columns)
    if ABOUT_SHEET in tables:
        for row in tables[ABOUT_SHEET][1]:
            if len(row) >= 2 and row[0] == "text column" and row[1]:
                known.add(_header(row[1]))
    return known


def _rows_from(
    header: list[str],
    body: list[list[Any]],
    known_text: set[str],
    coders: set[str] | None = None,
) -> list[AdjudicationRow]:
    if "unit" not in header or "variable" not in header:
        return []
    coder_cols = _coder_columns(header, known_text, coders)

    def get(row: list[Any], name: str) -> str | None:
        if name not in header:
            return None
        i = header.index(name)
        return _clean(row[i]) if i < len(row) else None

    out = []
    for row in body:
        unit, variable = get(row, "unit"), get(row, "variable")
        if unit is None or variable is None:
            continue
        values = {c: (_clean(row[i]) or "") for i, c in coder_cols if i < len(row)}
        out.append(
            AdjudicationRow(
                unit=unit,
                variable=variable,
                kind=get(row, "kind") or "",
                values=values,
                decision=get(row, "decision"),
                note=get(row, "note"),
                adjudicator=get(row, "adjudicator"),
                reason=get(row, "reason"),
                check=get(row, "check"),
            )
        )
    return out


def read_adjudication(path: str | os.PathLike[str], codebook: Codebook) -> Adjudication:
    """Read an earlier adjudication list (xlsx or csv) with its decisions, as an object."""
    path = Path(path)
    tables = _read_tables(path)
    known_text = _known_text(tables, codebook)
    header, body, numbers = tables[MAIN_SHEET]
    if body and not {"unit", "variable", "decision"} <= set(header):
        # Rows we cannot read: treating the file as empty would write over its decisions.
        raise InputRefused(
            f"{path.name!r} holds rows but no unit, variable and decision columns, so its "
            "decisions cannot be read; nothing was written - restore the header row or choose "
            "another output"
        )
    added = _added_columns(tables, codebook)
    if added:
        raise InputRefused(
            f"{path.name!r} has column(s) coderel does not keep when it writes the list again: "
            f"{', '.join(map(repr, added))}; move their content to the 'note' column (or delete "
            "them) and run again; nothing was written"
        )
    coders = _about_coders(tables)
    rows = _rows_from(header, body, known_text, coders)
    _refuse_duplicates(path, header, body, numbers)
    retired: list[AdjudicationRow] = []
    if RETIRED_SHEET in tables:
        rh, rb, _ = tables[RETIRED_SHEET]
        retired = _rows_from(rh, rb, known_text)  # may hold coders no longer in the data
    coders = [c for r in rows for c in r.values]
    return Adjudication(
        codebook=codebook,
        coders=tuple(dict.fromkeys(coders)),
        rows=tuple(rows),
        retired=tuple(retired),
    )


def duplicate_rows(
    path: Path, header: list[str], body: list[list[Any]], numbers: list[int]
) -> Problems:
    """A ``duplicate-list-row`` error for every row whose unit and variable an earlier row has
    (a copied row, an edited ``variable`` cell): neither decision may win silently."""
    problems = Problems()
    if "unit" not in header or "variable" not in header:
        return problems
    iu, iv = header.index("unit"), header.index("variable")
    first: dict[tuple[str, str], int] = {}
    sheet = MAIN_SHEET if path.suffix.lower() == ".xlsx" else None
    for row, number in zip(body, numbers, strict=True):
        unit = _clean(row[iu]) if iu < len(row) else None
        variable = _clean(row[iv]) if iv < len(row) else None
        if unit is None or variable is None:
            continue
        if (unit, variable) in first:
            problems.add(
                "duplicate-list-row",
                f"rows {first[(unit, variable)]} and {number} are both for this unit and "
                "variable; neither decision is used",
                hint="keep one of the two rows (move the other's note into it) and run again",
                file=path.name,
                sheet=sheet,
                cell=f"A{number}",
                unit=unit,
                variable=variable,
            )
        else:
            first[(unit, variable)] = number
    return problems


def _refuse_duplicates(
    path: Path, header: list[str], body: list[list[Any]], numbers: list[int]
) -> None:
    problems = duplicate_rows(path, header, body, numbers)
    if problems:
        raise DataProblems(
            f"{path.name!r} has {len(problems)} duplicated row(s); nothing was written, so no "
            "decision or note is lost",
            problems=problems,
        )


def read_decisions(path: str | os.PathLike[str], codebook: Codebook) -> Decisions:
    """Read the decisions of an adjudication list (sheet ``to decide`` of xlsx, or csv).

    Every filled ``decision`` cell is parsed for its variable; an invalid one becomes a
    ``bad-decision`` problem with its cell reference (``H14``) and is left out.
    """
    path = Path(path)
    tables = _read_tables(path)
    header, body, numbers = tables[MAIN_SHEET]
    problems = Problems()
    decisions: dict[tuple[str, str], Decision] = {}
    if "decision" not in header or "unit" not in header or "variable" not in header:
        problems.add(
            "bad-decision",
            "the list has no unit, variable or decision column",
            file=path.name,
            sheet=MAIN_SHEET if path.suffix.lower() == ".xlsx" else None,
            cell="A1",
        )
        source = SourceFile(str(path), sha256_file(path), path.stat().st_size)
        return Decisions({}, problems, source)
    icol = {name: header.index(name) for name in header if name}
    coder_cols = _coder_columns(header, _known_text(tables, codebook), _about_coders(tables))
    dcol = column_letter(icol["decision"] + 1)
    sheet = MAIN_SHEET if path.suffix.lower() == ".xlsx" else None

    def get(row: list[Any], name: str) -> Any:
        i = icol.get(name)
        return row[i] if i is not None and i < len(row) else None

    dupes = duplicate_rows(path, header, body, numbers)
    problems.extend(dupes)
    duplicated = {(p.unit, p.variable) for p in dupes}
    for row, number in zip(body, numbers, strict=True):
        unit, variable = _clean(get(row, "unit")), _clean(get(row, "variable"))
        raw = get(row, "decision")
        text = _clean(raw)
        if unit is None or variable is None or text is None:
            continue
        place = {"file": path.name, "sheet": sheet, "cell": f"{dcol}{number}"}
        if variable not in codebook:
            problems.add(
                "bad-decision",
                "a decision for a variable the codebook lacks",
                unit=unit,
                variable=variable,
                **place,
            )
            continue
        var = codebook.variable(variable)
        token, reason = parse_decision(var, raw if not isinstance(raw, str) else text)
        if token is None:
            problems.add(
                "bad-decision",
                f"the decision is not valid for {variable!r}: {reason}",
                unit=unit,
                variable=variable,
                hint=hint(var),
                **place,
            )
            continue
        if (unit, variable) in duplicated:
            continue  # reported once for the pair (duplicate-list-row); neither is used
        decisions[(unit, variable)] = Decision(
            value=token[1],
            token=token,
            text=text,
            adjudicator=_clean(get(row, "adjudicator")),
            note=_clean(get(row, "note")),
            cell=place["cell"],
            check=_clean(get(row, "check")),
            values={c: (_clean(row[i]) or "") for i, c in coder_cols if i < len(row)},
        )
    source = SourceFile(str(path), sha256_file(path), path.stat().st_size)
    return Decisions(decisions, problems, source)
