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

The work is shared by modules named for what they hold: :mod:`coderel.io.files` (which files),
:mod:`coderel.io.reader` (the records and problems gathered), :mod:`coderel.io.wide` and
:mod:`coderel.io.long_rows` (the two table shapes, row by row), :mod:`coderel.io.long_columnar`
(long CSV and Parquet column by column), :mod:`coderel.io.table_checks` (checks over the whole
table) and :mod:`coderel.io.names` (IDs and names as text). This module reads each file and
assembles :class:`coderel.codings.Codings`.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from pandas.api.types import union_categoricals

from coderel.codebook import Codebook
from coderel.codings import TEXT_COLUMNS, Codings, SourceFile, cell_text, text_category
from coderel.errors import InputRefused
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
from coderel.io.coverage import drop_uncoded, warn_alike_coders
from coderel.io.files import DATA_SUFFIXES, UNREAD_SUFFIXES, collect_files
from coderel.io.long_parts import merge_long_parts
from coderel.io.long_rows import read_long
from coderel.io.names import closest, text_of
from coderel.io.occasions import OCCASION_COLUMN, split_occasions, tag_occasions
from coderel.io.reader import LONG_HEADER, RECORD_COLUMNS, SheetReader
from coderel.io.rounds import is_round_table, tag_rounds
from coderel.io.table_checks import check_blank_variables, check_partial_units, check_skip_logic
from coderel.io.text_tables import RawTable, read_csv, read_parquet
from coderel.io.wide import read_wide
from coderel.progress import Progress, report


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


def _skip_own_output(reader: SheetReader, path: Path, tables: Sequence[RawTable]) -> bool:
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


def _read_table(reader: SheetReader, table: RawTable, default_coder: str) -> None:
    """Send one table to the long-table or the wide-sheet reader, by its header."""
    for problem in table.problems:
        reader.problems.append(problem)
    if not table.header:
        return
    folded = [h.casefold() for h in table.header]
    while folded and folded[-1] == "":
        folded.pop()
    if is_round_table(folded):  # rounds in a column: folded into unit IDs (io/rounds.py)
        known = len(table.problems)
        table = tag_rounds(table, text_of)
        reader.problems.extend(table.problems[known:])
        folded = [h.casefold() for h in table.header if h]
    if tuple(folded) == LONG_HEADER:
        read_long(reader, table)
        return
    if tuple(folded) == (*LONG_HEADER, OCCASION_COLUMN):
        read_long(reader, tag_occasions(table))
        return
    names = {v.casefold() for v in reader.codebook.names}
    looks_long = {"variable", "value"} <= set(folded) and not {"variable", "value"} & names
    if looks_long:
        reader.problems.add(
            "long-format",
            "this looks like a long table, but its header is not exactly "
            f"unit, coder, variable, value (found: {', '.join(h for h in folded if h)})",
            hint="name the four columns unit, coder, variable, value, in that order",
            file=table.file,
            sheet=table.sheet,
            line=table.header_line,
        )
        return
    read_wide(reader, table, default_coder)


def _read_long_columns(reader: SheetReader, path: Path, limits: Limits) -> bool:
    """Read a long CSV or Parquet table column by column; False when it must go the row way."""
    from coderel.io import long_columnar

    if path.suffix.lower() == ".csv":
        columns = long_columnar.read_csv_columns(path, limits)
    else:
        columns = long_columnar.read_parquet_columns(path, limits)
    if columns is None:
        return False
    long_columnar.apply_columns(reader, columns, text_of, closest)
    return True


def _read_file(reader: SheetReader, path: Path, limits: Limits) -> bool:
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
                _read_table(reader, table, table.sheet if several and table.sheet else path.stem)
        elif suffix == ".csv":
            if _read_long_columns(reader, path, limits):
                return True
            check_text(path, limits)
            table = read_csv(path, limits)
            if _skip_own_output(reader, path, [table]):
                return False
            _read_table(reader, table, path.stem)
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
            _read_table(reader, table, path.stem)
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
    progress: Progress | None = None,
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
        Called as ``progress(done, total)`` after each file and each check of the whole table,
        and with a phase (``"reading coder_ana.xlsx"``, ``"checking values"``) as each begins
        (:mod:`coderel.progress`).

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
    reader = SheetReader(codebook)
    sources: list[SourceFile] = []
    steps = len(files) + 3

    def step(done: int, phase: str | None = None) -> None:
        report(progress, done, steps, phase)

    for done, path in enumerate(files, 1):
        step(done - 1, f"reading {path.name}")
        if _read_file(reader, path, limits):
            sources.append(
                SourceFile(path=str(path), sha256=sha256_file(path), size=path.stat().st_size)
            )
        step(done)
    step(len(files), "checking values")
    return _assemble(codebook, reader, sources, lambda k: step(len(files) + k))


def read_long_parts(codebook: Codebook, parts: Sequence[Any]) -> Codings:
    """Codings from long tables already read column by column, in reading order: the parts of one
    dataset, e.g. the rows of a group of units gathered from several files on a cluster's worker
    (:mod:`coderel.engine.shuffle`). Values and problems (with each row's own file and cell) are
    those of :func:`read_codings` on the files, for these rows. ``parts`` are
    :class:`coderel.io.long_columnar.Columns`."""
    from coderel.io import long_columnar

    reader = SheetReader(codebook)
    for cols in parts:
        long_columnar.apply_columns(reader, cols, text_of, closest)
    return _assemble(codebook, reader, [], lambda _k: None)


def _assemble(
    codebook: Codebook,
    reader: SheetReader,
    sources: list[SourceFile],
    step: Callable[[int], None],
) -> Codings:
    """The long table from everything read: parts merged, whole-table checks, Codings."""
    frame = _joined(reader)
    if reader.spread_coders:
        frame = merge_long_parts(frame, reader.spread_coders, reader.problems)
    frame = drop_uncoded(frame, reader.problems)  # one rule for every path: see io/coverage.py
    step(1)
    occasions = None
    if len(frame):
        frame = check_skip_logic(codebook, reader.problems, frame)
        frame, occasions = split_occasions(frame, reader.problems)
        warn_alike_coders(frame, reader.problems)
        check_blank_variables(reader.problems, frame)
        step(2)
        check_partial_units(reader.problems, frame)
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


def _joined(reader: SheetReader) -> pd.DataFrame:
    """The reader's records (read row by row) and record blocks (read column by column) as one
    table in reading order: unit, coder and variable categorical (:func:`text_category`), cells
    as compact text, the other columns objects with ``None`` for blank."""
    records = pd.DataFrame(reader.records, columns=RECORD_COLUMNS).astype(object)
    records = records.where(records.notna(), None) if len(records) else records
    parts = [f for f in reader.frames if len(f)]
    if len(records) or not parts:
        parts.append(records)
    if len(parts) == 1 and not len(records):
        return parts[0]
    names = ("unit", "coder", "variable")
    columns: dict[str, Any] = {
        col: union_categoricals([text_category(p[col]) for p in parts], ignore_order=True)
        for col in names
    }
    for col in RECORD_COLUMNS:
        if col in names:
            continue
        if col == "cell":
            columns[col] = pd.concat([cell_text(p[col]) for p in parts], ignore_index=True)
        elif col == "_invalid":
            columns[col] = np.concatenate([p[col].to_numpy(dtype=bool) for p in parts])
        else:
            values = np.concatenate([p[col].to_numpy(dtype=object) for p in parts])
            columns[col] = pd.Series(values, dtype=object, copy=False)
    return pd.DataFrame(columns, copy=False)[RECORD_COLUMNS]


def missing_count(codings: Codings) -> dict[str, int]:
    """How many cells hold a missing code, per variable (only variables with any)."""
    counts: dict[str, int] = {}
    given = codings.frame["missing"].notna().to_numpy()
    for name in codings.frame["variable"].to_numpy(dtype=object)[given]:
        counts[name] = counts.get(name, 0) + 1
    return counts


__all__ = [
    "DATA_SUFFIXES",
    "LONG_HEADER",
    "UNREAD_SUFFIXES",
    "collect_files",
    "missing_count",
    "own_output",
    "read_codings",
    "read_long_parts",
]
