"""Reading an earlier adjudication list (xlsx or csv): its rows, and its decisions."""

from __future__ import annotations

import os
from collections.abc import Collection
from pathlib import Path
from typing import Any

import pandas as pd

from coderel.adjudicate.decisions import Decision, Decisions, hint, parse_decision
from coderel.adjudicate.list_headers import (
    ListColumns,
    about_coders,
    column_problems,
    kept_column_problems,
    known_text_columns,
    list_columns,
)
from coderel.adjudicate.list_sheets import clean_cell, read_tables
from coderel.adjudicate.model import (
    MAIN_SHEET,
    RETIRED_SHEET,
    Adjudication,
    AdjudicationRow,
    column_letter,
)
from coderel.codebook import Codebook
from coderel.codings import SourceFile
from coderel.errors import DataProblems, InputRefused
from coderel.io.atomic import sha256_file
from coderel.problems import Problems


def _clean_column(body: list[list[Any]], i: int) -> list[str | None]:
    """Column ``i`` of the rows as :func:`clean_cell` reads each cell (``None`` past a row's end);
    the commonest cells, text with nothing to restore and empty cells, without a call each."""
    if i < 0:
        return [None] * len(body)
    clean = clean_cell
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
    tables = read_tables(path)
    known_text = known_text_columns(tables, codebook)
    header, body, numbers = tables[MAIN_SHEET]
    if body and not {"unit", "variable", "decision"} <= set(header):
        # Rows we cannot read: treating the file as empty would write over its decisions.
        raise InputRefused(
            f"{path.name!r} holds rows but no unit, variable and decision columns, so its "
            "decisions cannot be read; nothing was written - restore the header row or choose "
            "another output"
        )
    about = about_coders(tables)
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
    tables = read_tables(path)
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
    about = about_coders(tables)
    named = (about or set()) | set(coders)
    known = known_text_columns(tables, codebook)
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
            adjudicator=clean_cell(get(row, "adjudicator")),
            note=clean_cell(get(row, "note")),
            cell=place["cell"],
            check=clean_cell(get(row, "check")),
            values={c: (clean_cell(row[i]) or "") for i, c in coder_cols if i < len(row)},
        )
    source = SourceFile(str(path), sha256_file(path), path.stat().st_size)
    return Decisions(decisions, problems, source)
