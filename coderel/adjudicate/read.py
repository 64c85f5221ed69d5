"""Reading an earlier adjudication list (xlsx or csv): its rows, and its decisions."""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from coderel.adjudicate.decisions import Decision, Decisions, hint, parse_decision
from coderel.adjudicate.model import (
    ABOUT_SHEET,
    CODER_SUFFIX,
    FIXED_COLUMNS,
    MAIN_SHEET,
    RETIRED_SHEET,
    Adjudication,
    AdjudicationRow,
    column_letter,
)
from coderel.adjudicate.tokens import BLANK_SHOWN, NONE_SHOWN, NOT_APPLICABLE
from coderel.codebook import Codebook, Variable
from coderel.codings import SourceFile
from coderel.errors import DataProblems, InputRefused
from coderel.io.archive import (
    DEFAULT_LIMITS,
    Limits,
    check_text,
    raise_hint,
)
from coderel.io.atomic import sha256_file
from coderel.io.safe_text import restore
from coderel.problems import Problems


def _clean(value: Any) -> str | None:
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
    return header, rows, numbers


@dataclass(frozen=True)
class ListColumns:
    """The columns of one sheet of a list, told apart by the list's own header convention.

    coderel writes ``unit``, ``variable``, ``kind``, then one column per coder, then the text
    columns, then ``decision``, ``note``, ``adjudicator``, ``check``, ``key`` (and ``reason``,
    ``list`` in the csv form; see :func:`coderel.adjudicate.model.main_columns`). So the coders'
    columns are the columns between ``kind`` and ``decision`` that are not text columns; a coder
    named like a fixed column is written ``NAME (coder)``. Every other column is one an
    adjudicator added: it is kept, never taken for a coder.
    """

    #: (position, coder name) of the coders' columns
    coders: tuple[tuple[int, str], ...]
    #: (position, header) of the columns an adjudicator added (kept when the list is rewritten)
    extra: tuple[tuple[int, str], ...]
    #: (position, header, position of the first column of that header) of repeated headers
    duplicates: tuple[tuple[int, str, int], ...]


def _shown(var: Variable, text: str) -> bool:
    """Does ``text`` read as a coder's value of ``var`` as the list shows it
    (:func:`coderel.adjudicate.tokens.display_token`)?"""
    if text in (BLANK_SHOWN, NONE_SHOWN, NOT_APPLICABLE):
        return True
    if var.is_numeric:
        try:
            float(text)
        except ValueError:
            return any(text in (str(m), var.display(m)) for m in var.missing_codes)
        return True
    return parse_decision(var, text)[0] is not None


def _reads_as_coder(
    position: int, header: list[str], body: list[list[Any]], codebook: Codebook
) -> bool:
    """Every filled cell of the column reads as a coder's value of its row's variable, and one
    at least is filled."""
    iv = header.index("variable") if "variable" in header else None
    filled = False
    for row in body:
        text = _clean(row[position]) if position < len(row) else None
        if text is None:
            continue
        variable = _clean(row[iv]) if iv is not None and iv < len(row) else None
        if variable is None or variable not in codebook:
            continue
        if not _shown(codebook.variable(variable), text):
            return False
        filled = True
    return filled


def list_columns(
    header: list[str],
    body: list[list[Any]],
    codebook: Codebook,
    known_text: Collection[str],
    coders: Collection[str] = (),
    *,
    complete: bool = False,
) -> ListColumns:
    """Tell a sheet's coder columns from the columns an adjudicator added (see
    :class:`ListColumns`).

    A column between ``kind`` and ``decision`` that is not a text column is a coder's when its
    header ends in `` (coder)``, when ``coders`` names it (the list's ``about`` sheet, the coders
    of the data now), or else, unless ``complete`` (the ``about`` sheet names every coder the list
    was written for), when every filled cell reads as a coder's value of its row's variable (a
    departed coder's column of a csv list). Any other column is an added one; a
    column without a header is added when it holds something, under the name ``column F``.
    """
    seen: dict[str, int] = {}
    duplicates = []
    for i, h in enumerate(header):
        if not h:
            continue
        if h in seen:
            duplicates.append((i, h, seen[h]))
        else:
            seen[h] = i
    first = {h: i for h, i in seen.items() if h in FIXED_COLUMNS}
    start = first.get("kind", max(first.get("unit", -1), first.get("variable", -1)))
    after = [i for h, i in first.items() if h not in ("unit", "variable", "kind") and i > start]
    end = first.get("decision", min(after, default=len(header)))
    out_coders, extra = [], []
    for i, h in enumerate(header):
        if h in FIXED_COLUMNS and seen.get(h) == i:
            continue
        if not h:
            if any(i < len(r) and _clean(r[i]) for r in body):
                extra.append((i, f"column {column_letter(i + 1)}"))
            continue
        if seen[h] != i or h in known_text:
            continue
        name = h[: -len(CODER_SUFFIX)] if h.endswith(CODER_SUFFIX) else h
        if start < i < end and (
            h.endswith(CODER_SUFFIX)
            or name in coders
            or (not complete and _reads_as_coder(i, header, body, codebook))
        ):
            out_coders.append((i, name))
        else:
            extra.append((i, h))
    return ListColumns(tuple(out_coders), tuple(extra), tuple(duplicates))


def _about_coders(tables: Mapping[str, Any]) -> set[str] | None:
    """The coders named on a list's ``about`` sheet (None for a list without one, as a CSV)."""
    if ABOUT_SHEET not in tables:
        return None
    names = {
        _header(row[1]) for row in tables[ABOUT_SHEET][1] if len(row) >= 2 and row[0] == "coder"
    }
    return names or None


def _sheet_name(path: Path, name: str) -> str | None:
    return name if path.suffix.lower() == ".xlsx" else None


def column_problems(path: Path, sheet: str, columns: ListColumns) -> Problems:
    """``duplicate-list-column`` errors: two columns of one header (which holds the decision,
    which the note?), each named by its header cell."""
    problems = Problems()
    for i, h, j in columns.duplicates:
        problems.add(
            "duplicate-list-column",
            f"columns {column_letter(j + 1)} and {column_letter(i + 1)} are both headed {h!r}; "
            "which one to read is not clear, so neither is guessed",
            hint="rename or delete one of the two columns (move what it holds into the other) "
            "and run again",
            file=path.name,
            sheet=_sheet_name(path, sheet),
            cell=f"{column_letter(i + 1)}1",
        )
    return problems


def kept_column_problems(path: Path, sheet: str, extra: Iterable[tuple[int, str]]) -> Problems:
    """One ``kept-column`` warning for each column an adjudicator added."""
    problems = Problems()
    for i, h in extra:
        problems.add(
            "kept-column",
            f"column {h!r} is not one coderel writes (not a coder, text or list column); it is "
            "kept with everything it holds, as one of the last columns of the list",
            hint="nothing to do; to have it read as a note, move what it holds to 'note'",
            file=path.name,
            sheet=_sheet_name(path, sheet),
            cell=f"{column_letter(i + 1)}1",
        )
    return problems


def _known_text(tables: Mapping[str, Any], codebook: Codebook) -> set[str]:
    """Text columns of a list: the codebook's, and those named on its ``about`` sheet."""
    known = set(codebook.text_columns)
    if ABOUT_SHEET in tables:
        for row in tables[ABOUT_SHEET][1]:
            if len(row) >= 2 and row[0] == "text column" and row[1]:
                known.add(_header(row[1]))
    return known


def _clean_column(body: list[list[Any]], i: int) -> list[str | None]:
    """Column ``i`` of the rows as :func:`_clean` reads each cell (``None`` past a row's end);
    the commonest cells, text with nothing to restore and empty cells, without a call each."""
    if i < 0:
        return [None] * len(body)
    clean = _clean
    return [
        (
            None
            if (v := row[i] if i < len(row) else None) is None
            else (v if v.strip() else None)
            if v.__class__ is str and "'" not in v
            else clean(v)
        )
        for row in body
    ]


def _rows_from(
    header: list[str], body: list[list[Any]], columns: ListColumns
) -> list[AdjudicationRow]:
    if "unit" not in header or "variable" not in header:
        return []
    # -1: a column the sheet lacks; a row shorter than the header lacks its last cells
    first = {h: i for i, h in reversed(list(enumerate(header))) if h}
    names = ("unit", "variable", "kind", "decision", "note", "adjudicator", "reason", "check")
    cells = {name: _clean_column(body, first.get(name, -1)) for name in names}
    coders = [(c, _clean_column(body, i)) for i, c in columns.coders]
    extra = [(h, _clean_column(body, i)) for i, h in columns.extra]
    # a coder's or added column past a row's end is not in that row (a blank coder cell is "")
    lengths = [len(row) for row in body]
    coder_at = [i for i, _ in columns.coders]
    ragged = any(n <= max(coder_at, default=-1) for n in lengths)
    out = []
    for k, (unit, variable) in enumerate(zip(cells["unit"], cells["variable"], strict=True)):
        if unit is None or variable is None:
            continue
        if ragged:
            n = lengths[k]
            values = {
                c: (col[k] or "") for (c, col), i in zip(coders, coder_at, strict=True) if i < n
            }
        else:
            values = {c: (col[k] or "") for c, col in coders}
        out.append(
            AdjudicationRow(
                unit=unit,
                variable=variable,
                kind=cells["kind"][k] or "",
                values=values,
                decision=cells["decision"][k],
                note=cells["note"][k],
                adjudicator=cells["adjudicator"][k],
                reason=cells["reason"][k],
                check=cells["check"][k],
                extra={h: t for h, col in extra if (t := col[k])},
            )
        )
    return out


def read_adjudication(
    path: str | os.PathLike[str], codebook: Codebook, coders: Collection[str] = ()
) -> Adjudication:
    """Read an earlier adjudication list (xlsx or csv) with its decisions, as an object.

    ``coders``: the coders of the data now (their columns are coders' columns wherever the
    header convention allows, see :func:`list_columns`). Columns an adjudicator added are kept
    on the rows (:attr:`AdjudicationRow.extra`) with one ``kept-column`` warning each; two
    columns of one header (``duplicate-list-column``) and two rows of one cell
    (``duplicate-list-row``) raise :class:`DataProblems`, so nothing is written over them.
    """
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
    about = _about_coders(tables)
    named, complete = (about or set()) | set(coders), about is not None
    csv_form = path.suffix.lower() == ".csv"
    rh, rb, _ = tables.get(RETIRED_SHEET, ([], [], []))
    # a csv list is one table (both lists share its header): its columns are told apart once
    columns = list_columns(
        header, body + rb if csv_form else body, codebook, known_text, named, complete=complete
    )
    problems = column_problems(path, MAIN_SHEET, columns)
    rows = _rows_from(header, body, columns)
    retired: list[AdjudicationRow] = []
    retired_columns = None
    if RETIRED_SHEET in tables:
        # may hold coders no longer in the data
        retired_columns = (
            columns
            if csv_form
            else list_columns(rh, rb, codebook, known_text, named)  # coders of earlier lists
        )
        if not csv_form:
            problems.extend(column_problems(path, RETIRED_SHEET, retired_columns))
        retired = _rows_from(rh, rb, retired_columns)
    problems.extend(duplicate_rows(path, header, body, numbers))
    if problems:
        raise DataProblems(
            f"{path.name!r} has {len(problems)} duplicated row(s) or column(s); nothing was "
            "written, so no decision or note is lost",
            problems=problems,
        )
    kept = kept_column_problems(path, MAIN_SHEET, columns.extra)
    extra = [h for _, h in columns.extra]
    if retired_columns is not None:
        more = [(i, h) for i, h in retired_columns.extra if h not in extra]
        kept.extend(kept_column_problems(path, RETIRED_SHEET, more))
        extra += [h for _, h in more]
    return Adjudication(
        codebook=codebook,
        coders=tuple(dict.fromkeys(c for r in rows for c in r.values)),
        rows=tuple(rows),
        retired=tuple(retired),
        problems=kept,
        extra_columns=tuple(extra),
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
    units, variables = _clean_column(body, iu), _clean_column(body, iv)
    pairs = pd.DataFrame({"unit": units, "variable": variables})
    if not (pairs.duplicated().to_numpy() & pairs.notna().all(axis=1).to_numpy()).any():
        return problems  # the usual list: no two rows of one cell, told without a loop
    for unit, variable, number in zip(units, variables, numbers, strict=True):
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


def read_decisions(
    path: str | os.PathLike[str], codebook: Codebook, coders: Collection[str] = ()
) -> Decisions:
    """Read the decisions of an adjudication list (sheet ``to decide`` of xlsx, or csv).

    Every filled ``decision`` cell is parsed for its variable; an invalid one becomes a
    ``bad-decision`` problem with its cell reference (``H14``) and is left out. Two columns of
    one header are ``duplicate-list-column`` errors and no decision is read; columns an
    adjudicator added are not coders (see :func:`list_columns`; ``coders``: the data's now).
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
    about = _about_coders(tables)
    named = (about or set()) | set(coders)
    known = _known_text(tables, codebook)
    columns = list_columns(header, body, codebook, known, named, complete=about is not None)
    if columns.duplicates:
        problems.extend(column_problems(path, MAIN_SHEET, columns))
        source = SourceFile(str(path), sha256_file(path), path.stat().st_size)
        return Decisions({}, problems, source)
    coder_cols = columns.coders
    dcol = column_letter(icol["decision"] + 1)
    sheet = MAIN_SHEET if path.suffix.lower() == ".xlsx" else None

    def get(row: list[Any], name: str) -> Any:
        i = icol.get(name)
        return row[i] if i is not None and i < len(row) else None

    dupes = duplicate_rows(path, header, body, numbers)
    problems.extend(dupes)
    duplicated = {(p.unit, p.variable) for p in dupes}
    units, variables = _clean_column(body, icol["unit"]), _clean_column(body, icol["variable"])
    texts = _clean_column(body, icol["decision"])
    for k in [k for k, text in enumerate(texts) if text is not None]:  # the filled decisions
        unit, variable, text = units[k], variables[k], texts[k]
        if unit is None or variable is None:
            continue
        row, number = body[k], numbers[k]
        raw = get(row, "decision")
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
