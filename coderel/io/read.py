"""Reading coders' sheets into the long table :class:`coderel.codings.Codings`.

Accepted inputs (files, or folders whose ``.xlsx``, ``.csv`` and ``.parquet`` files are read in
name order, skipping hidden files and ``~$`` lock files):

* **wide sheets**: one row per unit, one column per variable, plus the codebook's unit column and
  its text columns, as ``.xlsx``, ``.csv`` or ``.parquet``. The coder is the file's stem; or, in a
  workbook with several non-empty sheets, each sheet's name; or a ``coder`` column;
* **long tables** whose header is exactly ``unit, coder, variable, value``, optionally with a fifth
  column ``occasion`` for a coder's second coding (test-retest; :mod:`coderel.io.occasions`)
  and/or a column ``round`` (rounds of the coding protocol; :mod:`coderel.io.rounds`).

Every cell goes through :func:`coderel.normalise.normalise_cell`; every problem is collected with
its file, sheet, cell, unit, coder and variable, never raised, and an invalid cell gets the value
``None`` so that no statistic sees it. A file that must not be read (legacy or encrypted workbook,
damaged or oversized archive) becomes an ``input-refused`` problem and the other files are still
read. Skip logic (``applies_when``) is checked both ways once all files are read, and units coded by
only some coders are reported as ``partial-unit`` warnings. Input files are only ever opened for
reading.
"""

from __future__ import annotations

import datetime as dt
import difflib
import functools
import re
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from openpyxl.utils import get_column_letter, range_boundaries

from coderel.codebook import Code, Codebook, Variable
from coderel.codings import TEXT_COLUMNS, Codings, SourceFile, applicability
from coderel.errors import InputRefused, UsageError
from coderel.io.archive import (
    DEFAULT_LIMITS,
    OLE2_MAGIC,
    SUPPORTED,
    Limits,
    check_parquet,
    check_text,
    describe_ole2,
    shown_name,
    text_name,
)
from coderel.io.atomic import sha256_file
from coderel.io.coverage import coder_key, drop_uncoded, warn_alike_coders
from coderel.io.long_parts import merge_long_parts
from coderel.io.occasions import OCCASION_COLUMN, split_occasions, tag_occasions
from coderel.io.rounds import is_round_table, tag_rounds
from coderel.io.safe_text import restore
from coderel.io.text_tables import RawRow, RawTable, read_csv, read_parquet
from coderel.normalise import (
    CellError,
    Finding,
    FormulaNoValue,
    Normalised,
    normalise_cell,
    quote,
)
from coderel.problems import Problems

DATA_SUFFIXES: tuple[str, ...] = (".xlsx", ".csv", ".parquet")
#: Files that look like coding data coderel cannot read: inside a folder they are refused
#: (exit 3) rather than skipped, so that no coder goes missing without a word.
UNREAD_SUFFIXES: tuple[str, ...] = (".xls", ".xlsm", ".xlsb", ".ods")
LONG_HEADER: tuple[str, ...] = ("unit", "coder", "variable", "value")
CODER_COLUMN = "coder"
RECORD_COLUMNS = [
    *("unit", "coder", "variable", "value", "missing", "file", "sheet", "cell"),
    *("_line", "_invalid"),
]


def collect_files(paths: Sequence[str | Path] | str | Path) -> list[Path]:
    """Expand folders into their data files (sorted, not recursive); keep files as given.

    One path may be given as it is (``"sheets"``), not only in a list.

    Raises
    ------
    UsageError
        When no path is given, a path does not exist, or a folder holds no data file.
    """
    if isinstance(paths, str | PathLike):  # one path, not a sequence of one-letter paths
        paths = [paths]
    if not paths:
        raise UsageError("give at least one coding sheet or folder (DATA)")
    files: list[Path] = []
    for raw in paths:
        path = Path(raw)
        if path.is_dir():
            found = sorted(
                p
                for p in path.iterdir()
                if (p.is_file() or (p.is_symlink() and not p.exists()))  # a dangling link too
                and p.suffix.lower() in DATA_SUFFIXES + UNREAD_SUFFIXES
                and not p.name.startswith(("~$", "."))
            )
            if not found:
                raise UsageError(f"the folder {path.name!r} holds no .xlsx, .csv or .parquet file")
            files.extend(found)
        elif path.is_file() or (path.is_symlink() and not path.exists()):  # refused when read
            files.append(path)
        else:
            raise UsageError(f"no such file or folder: {path.name!r}")
    unique: dict[Path, Path] = {}
    for f in files:
        unique.setdefault(f.resolve(), f)
    return list(unique.values())


@functools.lru_cache(maxsize=1 << 16)
def _str_text(raw: str) -> str | None:
    """:func:`_text_of` of a string: IDs and names repeat row after row, so it is cached."""
    # neutralised when coderel wrote it (a template's unit '-002; a CSV's 'a;'=b')
    return restore(raw.strip()) or None


def _text_of(raw: Any) -> str | None:
    """A unit ID, coder name or long-table name as text (``None`` when blank)."""
    if type(raw) is str:
        return _str_text(raw)
    if raw is None or isinstance(raw, CellError | FormulaNoValue):
        return None
    if isinstance(raw, bool):
        return str(raw).upper()
    if isinstance(raw, float):
        if raw != raw:
            return None
        if raw.is_integer():
            return str(int(raw))
    if isinstance(raw, dt.datetime) and raw.time() == dt.time(0):
        return raw.date().isoformat()  # a date cell, as the same date typed as text reads
    if isinstance(raw, dt.datetime | dt.date | dt.time):
        return raw.isoformat()
    return _str_text(str(raw))


def _closest(name: str, options: Iterable[str]) -> str | None:
    options = list(options)
    found = difflib.get_close_matches(name, options, n=1, cutoff=0.6)
    if not found:
        lowered = {o.casefold(): o for o in options}
        found = [
            lowered[m] for m in difflib.get_close_matches(name.casefold(), lowered, n=1, cutoff=0.6)
        ]
    return found[0] if found else None


@dataclass
class _Reader:
    """Accumulates records, texts and problems over all input files."""

    codebook: Codebook
    records: list[dict[str, Any]] = field(default_factory=list)
    texts: list[dict[str, Any]] = field(default_factory=list)
    problems: Problems = field(default_factory=Problems)
    #: coder -> (file, sheet) that first claimed it
    owners: dict[str, tuple[str, str | None]] = field(default_factory=dict)
    refused_coders: set[tuple[str, str, str | None]] = field(default_factory=set)
    #: long tables read so far: a coder's rows may be spread over several of them (the parts
    #: of one dataset); repeats across parts are found by :func:`merge_long_parts`
    long_sources: set[tuple[str, str | None]] = field(default_factory=set)
    #: coders whose rows came from more than one long table
    spread_coders: set[str] = field(default_factory=set)
    seen: dict[tuple[str, str, str | None], dict[Any, str]] = field(default_factory=dict)
    #: (variable, typed, type, raw) -> result: a cell's result depends on nothing else, and
    #: coded data repeat the same few values, so each distinct value is normalised once.
    memo: dict[tuple[Any, ...], tuple[Normalised, bool]] = field(default_factory=dict)
    #: record blocks read column by column (:mod:`coderel.io.long_columnar`), in reading order
    frames: list[pd.DataFrame] = field(default_factory=list)

    # ---- helpers ---------------------------------------------------------------------------
    def claim(
        self, coder: str, table: RawTable, cell: str | None = None, *, long: bool = False
    ) -> bool:
        """May ``table`` hold rows of ``coder``? Report ``duplicate-coder`` once otherwise.

        A coder belongs to one file or sheet, except that long tables (``long``) are parts of
        one dataset: a coder first seen in a long table may have rows in every long table.
        """
        source = (table.file, table.sheet)
        if long:
            self.long_sources.add(source)
        owner = self.owners.setdefault(coder, source)
        if owner == source:
            return True
        if long and owner in self.long_sources:
            self.spread_coders.add(coder)
            return True
        key = (coder, table.file, table.sheet)
        if key not in self.refused_coders:
            self.refused_coders.add(key)
            where = owner[0] + (f"!{owner[1]}" if owner[1] else "")
            self.problems.add(
                "duplicate-coder",
                f"coder {coder!r} already comes from {where}; these rows were not read",
                hint="give each coder one file (or one sheet); rename the file or sheet of the "
                "second coder",
                file=table.file,
                sheet=table.sheet,
                cell=cell,
                coder=coder,
            )
        return False

    def add_findings(self, findings: Iterable[Finding], **place: Any) -> None:
        for f in findings:
            self.problems.add(f.code, f.message, hint=f.hint, **place)

    def place(self, table: RawTable, row: RawRow | None, position: int | None) -> dict[str, Any]:
        cell = None
        if position is not None and row is not None:
            cell = table.cell_ref(position, row.number)
        elif position is not None:
            cell = table.cell_ref(position, table.header_row)
        line = row.line if row is not None else table.header_line
        return {"file": table.file, "sheet": table.sheet, "cell": cell, "line": line}

    def first_unit(self, key: tuple[str, str, str | None], unit_key: Any, cell: str) -> str | None:
        """Record where a unit was first seen; return that cell when it was seen before."""
        seen = self.seen.setdefault(key, {})
        if unit_key in seen:
            return seen[unit_key]
        seen[unit_key] = cell
        return None

    def add_record(
        self,
        unit: str,
        coder: str,
        variable: Variable,
        raw: Any,
        *,
        typed: bool,
        place: dict[str, Any],
        present: bool = True,
    ) -> None:
        if present:
            try:
                key = (variable.name, typed, type(raw), raw)
                hit = self.memo.get(key)
            except TypeError:  # an unhashable cell value: no memo
                key, hit = None, None
            if hit is None:
                result = normalise_cell(variable, raw, typed=typed)
                hit = (result, result.invalid)
                if key is not None:
                    self.memo[key] = hit
            result, invalid = hit
            if result.findings:
                self.add_findings(
                    result.findings, unit=unit, coder=coder, variable=variable.name, **place
                )
            value, missing = result.value, result.missing
        else:
            value, missing, invalid = None, None, False
        self.records.append(
            {
                "unit": unit,
                "coder": coder,
                "variable": variable.name,
                "value": value,
                "missing": missing,
                "file": place.get("file"),
                "sheet": place.get("sheet"),
                "cell": place.get("cell") if present else None,
                "_line": place.get("line"),
                "_invalid": invalid,
            }
        )

    def add_frame(self, frame: pd.DataFrame) -> None:
        """Records read column by column, kept in order with the records read row by row."""
        if self.records:
            self.frames.append(pd.DataFrame(self.records, columns=RECORD_COLUMNS))
            self.records = []
        self.frames.append(frame[RECORD_COLUMNS])

    def add_text(self, unit: str, coder: str, column: str, raw: Any) -> None:
        text = None if raw is None or isinstance(raw, CellError | FormulaNoValue) else str(raw)
        self.texts.append({"unit": unit, "coder": coder, "column": column, "text": text})

    # ---- one table ---------------------------------------------------------------------------
    def read_table(self, table: RawTable, default_coder: str) -> None:
        for problem in table.problems:
            self.problems.append(problem)
        if not table.header:
            return
        folded = [h.casefold() for h in table.header]
        while folded and folded[-1] == "":
            folded.pop()
        if is_round_table(folded):  # rounds in a column: folded into unit IDs (io/rounds.py)
            known = len(table.problems)
            table = tag_rounds(table, _text_of)
            self.problems.extend(table.problems[known:])
            folded = [h.casefold() for h in table.header if h]
        if tuple(folded) == LONG_HEADER:
            self.read_long(table)
            return
        if tuple(folded) == (*LONG_HEADER, OCCASION_COLUMN):
            self.read_long(tag_occasions(table))
            return
        names = {v.casefold() for v in self.codebook.names}
        looks_long = {"variable", "value"} <= set(folded) and not {"variable", "value"} & names
        if looks_long:
            self.problems.add(
                "long-format",
                "this looks like a long table, but its header is not exactly "
                f"unit, coder, variable, value (found: {', '.join(h for h in folded if h)})",
                hint="name the four columns unit, coder, variable, value, in that order",
                file=table.file,
                sheet=table.sheet,
                line=table.header_line,
            )
            return
        self.read_wide(table, default_coder)

    def _map_columns(
        self, table: RawTable
    ) -> tuple[int | None, int | None, dict[str, int], dict[str, int]]:
        cb = self.codebook
        by_fold_var = {v.casefold(): v for v in cb.names}
        by_fold_text = {t.casefold(): t for t in cb.text_columns}
        unit_pos: int | None = None
        coder_pos: int | None = None
        variables: dict[str, int] = {}
        texts: dict[str, int] = {}
        known = [cb.unit, *cb.names, *cb.text_columns]
        for pos, name in enumerate(table.header):
            fold = name.casefold()
            place = self.place(table, None, pos)
            if name == "":
                if any(pos < len(r.cells) and r.cells[pos] is not None for r in table.rows):
                    self.problems.add(
                        "unknown-column",
                        "a column holds values but has no header",
                        hint=f"give it a header ({cb.unit}, a variable or a text column) "
                        "or delete it",
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
                close = _closest(name, known)
                self.problems.add(
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
                self.problems.add(
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

    def read_wide(self, table: RawTable, default_coder: str) -> None:
        cb = self.codebook
        unit_pos, coder_pos, variables, texts = self._map_columns(table)
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
            self.problems.add(
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
                self.problems.add(
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
                self.problems.add(
                    "hidden-column",
                    "this column is hidden; its values were read",
                    hint="unhide it and check its values",
                    variable=column_names.get(pos - 1),
                    **self.place(table, None, pos - 1),
                )
        if not table.rows:
            self.problems.add(
                "empty-sheet",
                "the sheet has a header but no data rows",
                hint="check that the right file was given, or remove it",
                file=table.file,
                sheet=table.sheet,
                line=table.header_line,
            )
            return
        if coder_pos is None and not self.claim(default_coder, table):
            return
        units: dict[int, str] = {}
        for row in table.rows:
            unit = self._wide_row(table, row, unit_pos, coder_pos, variables, texts, default_coder)
            if unit is not None:
                units[row.number] = unit
        self._merged(table, units, column_names)

    def _merged(self, table: RawTable, units: dict[int, str], names: dict[int, str]) -> None:
        """One ``merged-cells`` warning per merged range, placed at its top-left cell."""
        for rng in table.merged:
            min_col, min_row, _, _ = range_boundaries(rng)
            self.problems.add(
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
        self,
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
        unit_place = self.place(table, row, unit_pos)
        raw_unit = cells[unit_pos]
        unit = _text_of(raw_unit)
        if unit is None:
            if isinstance(raw_unit, CellError | FormulaNoValue):
                error = isinstance(raw_unit, CellError)
                code = "spreadsheet-error" if error else "formula-no-value"
                self.problems.add(
                    code,
                    "the unit ID cell holds no usable value; the row was not read",
                    hint="type the unit ID",
                    **unit_place,
                )
            else:
                self.problems.add(
                    "missing-unit-id",
                    "this row has values but no unit ID; the row was not read",
                    hint=f"fill in the {self.codebook.unit!r} cell",
                    **unit_place,
                )
            return None
        if isinstance(raw_unit, dt.datetime | dt.date | dt.time):
            self.problems.add(
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
            coder_text = _text_of(cells[coder_pos])
            if coder_text is None:
                self.problems.add(
                    "missing-coder",
                    "this row has no coder name; the row was not read",
                    hint="fill in the coder cell",
                    unit=unit,
                    **self.place(table, row, coder_pos),
                )
                return None
            coder = coder_text
            if not self.claim(coder, table, unit_place["cell"]):
                return None
        first = self.first_unit((coder, table.file, table.sheet), unit, unit_place["cell"])
        if first is not None:
            self.problems.add(
                "duplicate-unit",
                f"unit {unit} appears again (first in {first}); this row was not read",
                hint="delete the repeated row, or fix its unit ID",
                unit=unit,
                coder=coder,
                **unit_place,
            )
            return None
        if row.number in table.hidden_rows:
            self.problems.add(
                "hidden-row",
                "this row is hidden; its values were read",
                hint="unhide the row and check it",
                unit=unit,
                coder=coder,
                **unit_place,
            )
        for variable in self.codebook.variables:
            pos = variables.get(variable.name)
            if pos is None:
                self.records.append(
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
            self.add_record(
                unit,
                coder,
                variable,
                cells[pos],
                typed=table.is_typed(pos),
                place=self.place(table, row, pos),
            )
        for column, pos in texts.items():
            self.add_text(unit, coder, column, cells[pos])
        return unit

    def read_long(self, table: RawTable) -> None:
        cb = self.codebook
        text_columns = {t.casefold(): t for t in cb.text_columns}
        by_fold_var = {v.casefold(): v for v in cb.names}
        given: dict[tuple[str, str], set[str]] = {}
        order: list[tuple[str, str, dict[str, Any]]] = []
        if not table.rows:
            self.problems.add(
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
            unit = _text_of(cells[0])
            coder = _text_of(cells[1])
            name = _text_of(cells[2])
            if unit is None:
                self.problems.add(
                    "missing-unit-id",
                    "this row has no unit ID; it was not read",
                    hint="fill in the unit cell",
                    coder=coder,
                    **self.place(table, row, 0),
                )
                continue
            if coder is None:
                self.problems.add(
                    "missing-coder",
                    "this row has no coder name; it was not read",
                    hint="fill in the coder cell",
                    unit=unit,
                    **self.place(table, row, 1),
                )
                continue
            if self.owners.get(coder) != source and not self.claim(
                coder, table, table.cell_ref(1, row.number), long=True
            ):
                continue
            variable_name = by_fold_var.get(name.casefold()) if name else None
            text_name = text_columns.get(name.casefold()) if name else None
            if variable_name is None and text_name is None:
                close = _closest(name or "", [*cb.names, *cb.text_columns])
                self.problems.add(
                    "unknown-variable",
                    f"{quote(name) if name else 'a blank name'} is not a variable of the codebook",
                    hint=(f"did you mean {close!r}? " if close else "")
                    + "use the variable names of the codebook",
                    unit=unit,
                    coder=coder,
                    **self.place(table, row, 2),
                )
                continue
            key_name = variable_name or text_name or ""
            value_place = self.place(table, row, 3)
            first = self.first_unit(
                (coder, table.file, table.sheet), (unit, key_name), value_place["cell"]
            )
            if first is not None:
                self.problems.add(
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
                self.add_text(unit, coder, text_name, cells[3])
                continue
            pair = (unit, coder)
            if pair not in given:
                given[pair] = set()
                order.append((unit, coder, {"file": table.file, "sheet": table.sheet}))
            given[pair].add(key_name)
            self.add_record(
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
                    self.add_record(
                        unit,
                        coder,
                        variable,
                        None,
                        typed=table.typed,
                        place={**place, "cell": None, "line": None},
                        present=False,
                    )

    # ---- after all files -------------------------------------------------------------------
    def check_skip_logic(self, frame: pd.DataFrame) -> pd.DataFrame:
        """Apply ``should-not-apply`` until stable, then report ``should-apply``."""
        cb = self.codebook
        for _ in range(len(cb.variables) + 1):
            applies = applicability(cb, frame)
            frame["applies"] = applies
            given = frame["value"].notna().to_numpy() | frame["missing"].notna().to_numpy()
            bad = np.flatnonzero(_is_false(applies) & given).tolist()
            if not bad:
                break
            for i in bad:
                row = frame.iloc[i]
                variable = cb.variable(row["variable"])
                cond = variable.applies_when
                if cond is None:  # applies is False only under a condition
                    continue
                given = row["value"] if row["value"] is not None else row["missing"]
                includes = ", ".join(cb.variable(cond.variable).display(c) for c in cond.includes)
                self.problems.add(
                    "should-not-apply",
                    f"{variable.name} is coded ({_short(given)}) but does not apply here: it "
                    f"applies only when {cond.variable} is {includes}",
                    hint=f"leave {variable.name} blank, or check the code of {cond.variable}",
                    **_row_place(row),
                )
                frame.at[frame.index[i], "value"] = None
                frame.at[frame.index[i], "missing"] = None
                frame.at[frame.index[i], "_invalid"] = True
        conditional = [v.name for v in cb.variables if v.applies_when is not None]
        applies = frame["applies"].to_numpy(dtype=object)
        is_true = np.fromiter((a is True for a in applies), bool, len(applies))
        blank = frame["value"].isna().to_numpy() & frame["missing"].isna().to_numpy()
        valid = ~frame["_invalid"].astype(bool).to_numpy()
        asked = frame["variable"].isin(conditional).to_numpy() & is_true & blank & valid
        for i in np.flatnonzero(asked):
            row = frame.iloc[i]
            variable = cb.variable(row["variable"])
            cond = variable.applies_when
            if cond is None:
                continue
            missing = (
                f", or the missing code {variable.display(variable.missing_codes[0])}"
                if variable.missing_codes
                else ""
            )
            includes = ", ".join(cb.variable(cond.variable).display(c) for c in cond.includes)
            self.problems.add(
                "should-apply",
                f"{variable.name} is blank, but it applies here ({cond.variable} is one of "
                f"{includes})",
                hint=f"code {variable.name}{missing}",
                **_row_place(row),
            )
        return frame

    def check_blank_variables(self, frame: pd.DataFrame) -> None:
        """``blank-variable``: a coder left a variable blank on every unit where it applies.

        Agreement then rests on the other coders alone, which no number shows; a column filled
        in the wrong sheet, or not yet coded, is the usual cause. Needs two or more such units,
        and only coders with at least one valid value count (a sheet not yet begun is no news).
        """
        empty = frame["value"].isna().to_numpy() & frame["missing"].isna().to_numpy()
        blank = empty & ~frame["_invalid"].astype(bool).to_numpy()
        begun = set(frame.loc[~empty, "coder"])
        # None: no condition; False (Python's or numpy's): the condition says it does not apply.
        applies = ~_is_false(frame["applies"].to_numpy(dtype=object))
        applies &= frame["coder"].isin(begun).to_numpy()
        cols = frame.loc[applies, ["coder", "variable"]].assign(_blank=blank[applies])
        if cols.empty:
            return
        groups = cols.groupby(["coder", "variable"], sort=False)["_blank"].agg(["all", "size"])
        first = (
            frame.loc[applies]
            .drop_duplicates(["coder", "variable"])
            .set_index(["coder", "variable"])
        )
        nobody = {
            variable
            for variable, rows in groups.groupby(level="variable", sort=False)
            if len(rows) > 1 and bool(rows["all"].all())
        }
        for variable in nobody:  # one problem for the variable, not one per coder
            self.problems.add(
                "blank-variable",
                f"no coder coded {variable}: it is blank on every unit in every sheet, so it has "
                "no agreement",
                hint=f"code {variable}, or check that its column (in a long table, its name) is "
                f"{variable!r} in every sheet",
                variable=variable,
            )
        for (coder, variable), row in groups.iterrows():
            if not row["all"] or row["size"] < 2 or variable in nobody:
                continue
            where = first.loc[(coder, variable)]
            self.problems.add(
                "blank-variable",
                f"{coder} left {variable} blank on all {row['size']} units where it applies; "
                f"agreement on {variable} rests on the other coders",
                hint=f"code {variable} in {coder}'s sheet, or check that the values are in the "
                "column the codebook names (not in another sheet or a renamed column)",
                file=where["file"],
                sheet=where["sheet"],
                coder=coder,
                variable=variable,
            )

    def check_partial_units(self, frame: pd.DataFrame) -> None:
        unit_codes, unit_index = pd.factorize(frame["unit"])
        coder_codes, coder_index = pd.factorize(frame["coder"])
        units, coders = list(unit_index), list(coder_index)
        n_coders = len(coders)
        if n_coders < 2:
            return
        pairs = np.unique(unit_codes.astype(np.int64) * n_coders + coder_codes)
        pair_unit, pair_coder = pairs // n_coders, pairs % n_coders
        per_unit = np.bincount(pair_unit, minlength=len(units))
        partial = np.flatnonzero(per_unit < n_coders)
        if not len(partial):
            return
        # IDs that differ only in leading zeros, case or inner spaces ("001" and 1, once a
        # spreadsheet has turned the text into a number) are most likely one unit.
        loose = [_loose_id(u) for u in units]
        alike: dict[str, list[str]] = {}
        for key, unit in zip(loose, units, strict=True):
            alike.setdefault(key, []).append(unit)
        starts = np.searchsorted(pair_unit, partial)
        # coder names that differ only in case or spaces: "did you mean" (io/coverage.py)
        keys = [coder_key(c) for c in coders]
        twins = {
            i: sorted(c for j, c in enumerate(coders) if j != i and keys[j] == keys[i])
            for i in range(n_coders)
        }
        twins = {i: names for i, names in twins.items() if names}
        for u, start in zip(partial.tolist(), starts.tolist(), strict=True):
            unit = units[u]
            present_codes = set(pair_coder[start : start + per_unit[u]].tolist())
            present = [c for i, c in enumerate(coders) if i in present_codes]
            absent_codes = [i for i in range(n_coders) if i not in present_codes]
            absent = [coders[i] for i in absent_codes]
            others = [x for x in alike[loose[u]] if x != unit]
            hint = "code the unit by every coder, or accept that agreement for it uses fewer coders"
            meant = []
            for i in absent_codes:
                if i in twins:
                    found = next((c for c in twins[i] if c in present), None)
                    if found is not None:
                        meant.append((coders[i], found))
            if meant:
                hint = (
                    "; ".join(f"did you mean {m!r} for {c!r}?" for c, m in meant)
                    + " coder names that differ only in case or spaces are two coders; "
                    + hint
                )
            if others:
                hint = (
                    f"the unit ID {', '.join(repr(x) for x in others)} differs only in "
                    "leading zeros, a .0 ending, case or spaces: if it is the same unit, "
                    "write the ID the same way in every sheet (format the unit column as Text "
                    f"so that leading zeros stay); otherwise {hint}"
                )
            self.problems.add(
                "partial-unit",
                f"unit {unit} is coded by {', '.join(present)} but not by {', '.join(absent)}",
                hint=hint,
                unit=unit,
            )


def _is_false(applies: Any) -> np.ndarray:
    """Rows whose applicability is False (Python's or numpy's); None and True are not."""
    values = np.asarray(applies, dtype=object)
    return np.fromiter((a is not None and not a for a in values), bool, len(values))


def _loose_id(unit: str) -> str:
    """A unit ID without case, spaces, leading zeros of its numbers and a ``.0`` ending
    (``ENC-007`` ~ ``enc-7``, ``12.0`` ~ ``12``)."""
    folded = "".join(str(unit).casefold().split())
    folded = re.sub(r"^([0-9]+)\.0+$", r"\1", folded)  # 12.0, as a float column writes 12
    return re.sub(r"(?<![0-9])0+(?=[0-9])", "", folded)


def _row_place(row: pd.Series) -> dict[str, Any]:
    """The place of a long-table row, as problem keyword arguments."""
    return {
        "file": row["file"],
        "sheet": row["sheet"],
        "cell": row["cell"],
        "line": row["_line"],
        "unit": row["unit"],
        "coder": row["coder"],
        "variable": row["variable"],
    }


def _short(value: Any) -> str:
    if isinstance(value, tuple):
        return ";".join(str(v) for v in value)
    return str(value)


def own_output(tables: Sequence[RawTable], codebook: Codebook) -> str | None:
    """What coderel output a file is (``"a merged dataset"``), or None for anything else.

    Recognised by the headers and sheet names coderel writes: such a file left in the folder of
    coders' sheets must not be read as one more coder (a merged dataset agrees with everyone).
    """
    sheets = {t.sheet for t in tables if t.sheet}
    if {"methods", "reproducibility"} <= sheets:
        return "a reliability report"
    for t in tables:
        header = [h.casefold() for h in t.header]
        if {"unit", "variable", "kind", "decision", "key"} <= set(header):
            return "an adjudication list"
        if header[:3] == ["code", "severity", "message"]:
            return "a problem list"
        if header[:2] == ["variable", "kind"] and "coefficient" in header:
            return "an agreement table"
        if (
            header[:1] == [codebook.unit.casefold()]
            and codebook.names
            and all(f"{n}_status".casefold() in header for n in codebook.names)
        ):
            return "a merged dataset"
    return None


def _skip_own_output(reader: _Reader, path: Path, tables: Sequence[RawTable]) -> bool:
    """Add an ``own-output`` warning and return True when ``tables`` are a coderel output."""
    kind = own_output(tables, reader.codebook)
    if kind is None:
        return False
    reader.problems.add(
        "own-output",
        f"{path.name} is {kind} written by coderel, not a coder's sheet; it was not read",
        hint="keep coderel's outputs out of the folder of coders' sheets, or name the coders' "
        "files one by one",
        file=path.name,
    )
    return True


def _read_long_columns(reader: _Reader, path: Path, limits: Limits) -> bool:
    """Read a long CSV or Parquet table column by column; False when it must go the row way."""
    from coderel.io import long_columnar

    if path.suffix.lower() == ".csv":
        columns = long_columnar.read_csv_columns(path, limits)
    else:
        columns = long_columnar.read_parquet_columns(path, limits)
    if columns is None:
        return False
    long_columnar.apply_columns(reader, columns, _text_of, _closest)
    return True


def _read_file(reader: _Reader, path: Path, limits: Limits) -> bool:
    """Read one file into ``reader``; return False when it was refused or skipped."""
    from coderel.io.xlsx import read_workbook

    suffix = path.suffix.lower()
    try:
        text_name(path)
        if suffix == ".xlsx":
            workbook = read_workbook(path, limits)
            if _skip_own_output(reader, path, workbook.tables):
                return False
            if not workbook.tables:
                reader.problems.add(
                    "empty-sheet",
                    f"{path.name} holds no data in any visible sheet",
                    hint="check that the right file was given, or remove it",
                    file=path.name,
                )
            several = len(workbook.tables) > 1
            for table in workbook.tables:
                reader.read_table(table, table.sheet if several and table.sheet else path.stem)
        elif suffix == ".csv":
            if _read_long_columns(reader, path, limits):
                return True
            check_text(path, limits)
            table = read_csv(path, limits)
            if _skip_own_output(reader, path, [table]):
                return False
            reader.read_table(table, path.stem)
        elif suffix == ".parquet":
            if _read_long_columns(reader, path, limits):
                return True
            check_parquet(path, limits)
            try:
                table = read_parquet(path)
            except Exception as exc:  # pyarrow raises many types on damaged files
                raise InputRefused(
                    f"{path.name} cannot be read as Parquet ({type(exc).__name__})"
                ) from None
            if _skip_own_output(reader, path, [table]):
                return False
            reader.read_table(table, path.stem)
        else:
            with open(path, "rb") as fh:
                head = fh.read(limits.max_file_bytes)
            if head[:8] == OLE2_MAGIC:
                raise InputRefused(describe_ole2(head, path))
            raise InputRefused(
                f"{path.name}: the format {suffix or '(none)'} is not read; {SUPPORTED}"
            )
    except InputRefused as exc:
        reader.problems.add(
            "input-refused",
            str(exc),
            hint=f"{SUPPORTED}; no other file was skipped because of this one",
            file=shown_name(path),
        )
        return False
    except OSError as exc:
        reader.problems.add(
            "input-refused",
            f"{shown_name(path)} cannot be opened ({type(exc).__name__})",
            hint="check that the file exists and you may read it",
            file=shown_name(path),
        )
        return False
    return True


def read_codings(
    codebook: Codebook,
    paths: Sequence[str | Path] | str | Path,
    *,
    limits: Limits = DEFAULT_LIMITS,
    progress: Callable[[int, int], None] | None = None,
) -> Codings:
    """Read coders' sheets (files or folders) into one long table, collecting every problem.

    Parameters
    ----------
    codebook
        The codebook that defines variables, codes, the unit column and text columns.
    paths
        Files (``.xlsx``, ``.csv``, ``.parquet``) or folders holding them; one path may be
        given alone.
    limits
        Safety limits applied before a file is parsed.
    progress
        Called as ``progress(done, total)`` after each file and each check of the whole table.

    Returns
    -------
    Codings
        The long table (one row per unit, coder and variable for every row a coder filled in),
        the narrative texts apart, all problems, and the SHA-256 of every file read.

    Raises
    ------
    UsageError
        When no path is given, a path does not exist, or a folder holds no data file.
    """
    files = collect_files(paths)
    reader = _Reader(codebook)
    sources: list[SourceFile] = []
    steps = len(files) + 3

    def step(done: int) -> None:
        if progress is not None:
            progress(done, steps)

    for done, path in enumerate(files, 1):
        if _read_file(reader, path, limits):
            sources.append(
                SourceFile(path=str(path), sha256=sha256_file(path), size=path.stat().st_size)
            )
        step(done)
    return _assemble(codebook, reader, sources, lambda k: step(len(files) + k))


def read_long_parts(codebook: Codebook, parts: Sequence[Any]) -> Codings:
    """Codings from long tables already read column by column, in reading order: the parts of one
    dataset, e.g. the rows of a group of units gathered from several files on a cluster's worker
    (:mod:`coderel.engine.shuffle`). Values and problems (with each row's own file and cell) are
    those of :func:`read_codings` on the files, for these rows. ``parts`` are
    :class:`coderel.io.long_columnar.Columns`."""
    from coderel.io import long_columnar

    reader = _Reader(codebook)
    for cols in parts:
        long_columnar.apply_columns(reader, cols, _text_of, _closest)
    return _assemble(codebook, reader, [], lambda _k: None)


def _assemble(
    codebook: Codebook,
    reader: _Reader,
    sources: list[SourceFile],
    step: Callable[[int], None],
) -> Codings:
    """The long table from everything read: parts merged, whole-table checks, Codings."""
    frame = pd.DataFrame(reader.records, columns=RECORD_COLUMNS)
    if reader.frames:
        frame = pd.concat([*reader.frames, frame], ignore_index=True)
    frame = frame.astype(object)
    frame = frame.where(frame.notna(), None) if len(frame) else frame
    if reader.spread_coders:
        frame = merge_long_parts(frame, reader.spread_coders, reader.problems)
    frame = drop_uncoded(frame, reader.problems)  # one rule for every path: see io/coverage.py
    step(1)
    occasions = None
    if len(frame):
        frame = reader.check_skip_logic(frame)
        frame, occasions = split_occasions(frame, reader.problems)
        warn_alike_coders(frame, reader.problems)
        reader.check_blank_variables(frame)
        step(2)
        reader.check_partial_units(frame)
    else:
        frame["applies"] = []
    step(3)
    texts = pd.DataFrame(reader.texts, columns=list(TEXT_COLUMNS)).astype(object)
    return Codings.from_records(
        codebook,
        frame.drop(columns=["_line", "_invalid"]),
        texts=texts,
        occasions=occasions.drop(columns=["_line", "_invalid"]) if occasions is not None else None,
        problems=reader.problems,
        sources=sources,
    )


def missing_count(codings: Codings) -> dict[str, int]:
    """How many cells hold a missing code, per variable (only variables with any)."""
    counts: dict[str, int] = {}
    for name, missing in zip(codings.frame["variable"], codings.frame["missing"], strict=True):
        if missing is not None:
            counts[name] = counts.get(name, 0) + 1
    return counts


__all__ = ["DATA_SUFFIXES", "LONG_HEADER", "Code", "collect_files", "missing_count", "read_codings"]
