"""The columns of a list's sheet told apart by its header: coders, text columns, columns an
adjudicator added, repeated headers; and the problems they make."""

from __future__ import annotations

from collections.abc import Collection, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from coderel.adjudicate.decisions import parse_decision
from coderel.adjudicate.list_sheets import clean_cell, header_text
from coderel.adjudicate.model import (
    ABOUT_SHEET,
    CODER_SUFFIX,
    FIXED_COLUMNS,
    column_letter,
)
from coderel.adjudicate.tokens import BLANK_SHOWN, NONE_SHOWN, NOT_APPLICABLE
from coderel.codebook import Codebook, Variable
from coderel.problems import Problems


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
        text = clean_cell(row[position]) if position < len(row) else None
        if text is None:
            continue
        variable = clean_cell(row[iv]) if iv is not None and iv < len(row) else None
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
            if any(i < len(r) and clean_cell(r[i]) for r in body):
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


def about_coders(tables: Mapping[str, Any]) -> set[str] | None:
    """The coders named on a list's ``about`` sheet (None for a list without one, as a CSV)."""
    if ABOUT_SHEET not in tables:
        return None
    names = {
        header_text(row[1]) for row in tables[ABOUT_SHEET][1] if len(row) >= 2 and row[0] == "coder"
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


def known_text_columns(tables: Mapping[str, Any], codebook: Codebook) -> set[str]:
    """Text columns of a list: the codebook's, and those named on its ``about`` sheet."""
    known = set(codebook.text_columns)
    if ABOUT_SHEET in tables:
        for row in tables[ABOUT_SHEET][1]:
            if len(row) >= 2 and row[0] == "text column" and row[1]:
                known.add(header_text(row[1]))
    return known
