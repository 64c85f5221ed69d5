"""The state shared while coders' files are read: records, texts and problems.

:class:`SheetReader` gathers what every reader adds (one record per unit, coder and variable;
narrative texts; problems), remembers which file each coder and unit came from, and normalises
each distinct cell value once. The readers of each table shape (:mod:`coderel.io.wide`,
:mod:`coderel.io.long_rows`, :mod:`coderel.io.long_columnar`) add to it; it imports none of them.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from coderel.codebook import Codebook, Variable
from coderel.io.text_tables import RawRow, RawTable
from coderel.normalise import CellError, Finding, FormulaNoValue, Normalised, normalise_cell
from coderel.problems import Problems

LONG_HEADER: tuple[str, ...] = ("unit", "coder", "variable", "value")
RECORD_COLUMNS = [
    *("unit", "coder", "variable", "value", "missing", "file", "sheet", "cell"),
    *("_line", "_invalid"),
]


@dataclass
class SheetReader:
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
