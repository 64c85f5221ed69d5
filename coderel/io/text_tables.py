"""Reading CSV and Parquet files into :class:`RawTable`, the neutral grid every reader produces.

A :class:`RawTable` is one sheet or file as it stands: the header row, then the data rows, each
cell exactly as stored (text for CSV; typed values for workbooks and Parquet), with the row and
column numbers needed to name a cell like ``C14``. Interpreting the grid (wide or long form,
codes, units) is the job of :mod:`coderel.io.read`.

CSV files are read as text with the standard :mod:`csv` module: ``"NA"`` is a value, not a
missing marker. They must be UTF-8 (a byte-order mark is allowed); any other encoding is reported
as an ``encoding`` problem naming the first line that is not UTF-8, and never guessed.
"""

from __future__ import annotations

import contextlib
import csv
import datetime as dt
import io
import math
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from openpyxl.utils import get_column_letter

from coderel.errors import InputRefused
from coderel.io.archive import DEFAULT_LIMITS, Limits, raise_hint
from coderel.io.safe_text import restore
from coderel.problems import Problem, make_problem


@dataclass(frozen=True, slots=True)
class RawRow:
    """One data row: its row number (header is row ``header_row``), CSV line, and cells."""

    number: int
    cells: tuple[Any, ...]
    line: int | None = None


@dataclass(frozen=True)
class RawTable:
    """One sheet or file as a grid of raw cells, before any interpretation."""

    file: str
    sheet: str | None
    header: tuple[str, ...]
    rows: tuple[RawRow, ...]
    #: 1-based spreadsheet column number of each header position.
    columns: tuple[int, ...]
    header_row: int = 1
    header_line: int | None = None
    #: True for workbooks and Parquet (cells keep their types), False for CSV (all text).
    typed: bool = True
    hidden_rows: frozenset[int] = frozenset()
    hidden_columns: frozenset[int] = frozenset()
    merged: tuple[str, ...] = ()
    problems: tuple[Problem, ...] = field(default=())
    #: Header positions of columns that hold text by the file's own type (a Parquet string
    #: column): their cells are read like CSV cells, so ``"40"`` there is no "number as text".
    text_positions: frozenset[int] = frozenset()

    def is_typed(self, position: int) -> bool:
        """Do the cells at ``position`` keep their own types (see :attr:`typed`)?"""
        return self.typed and position not in self.text_positions

    def cell_ref(self, position: int, row_number: int) -> str:
        """``C14``-style name of the cell at header position ``position`` in row ``row_number``."""
        return f"{get_column_letter(self.columns[position])}{row_number}"


def _header_text(value: Any) -> str:
    """A header cell as text; a name coderel neutralised when it wrote it (``'-v`` for a
    variable ``-v``, see :mod:`coderel.io.safe_text`) reads as the name itself."""
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return restore(str(value).strip())


def read_csv(path: Path, limits: Limits = DEFAULT_LIMITS) -> RawTable:
    """Read a CSV file as text cells; problems (``encoding``, ``empty-sheet``) in the table.

    The delimiter is a comma, or a semicolon when the header holds semicolons and no comma (as
    spreadsheet programs in many locales write), or a tab when the header holds tabs and neither.
    A quote that is never closed swallows the rest of the file into one cell; that is reported
    as ``unclosed-quote`` with the line where the quote opened.

    Bounds (:class:`coderel.io.archive.Limits`): every row is cut to the header's width, so one
    line of 20,000 commas widens nothing. A row with more cells than the header is a ragged row
    (``ragged-row``, with its line; RFC 4180, section 2.4: every line holds the same number of
    fields), and one with more cells than ``max_columns`` is ``too-many-columns``: a line without
    quotes is cut after ``max_columns`` separators before the :mod:`csv` module splits it, so
    its cells are never built. A field longer than ``max_field_chars`` characters, more than
    ``max_rows`` rows or more than ``max_cells`` cells refuse the file (:class:`InputRefused`).
    """
    data = path.read_bytes()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        problem = make_problem(
            "encoding",
            f"{path.name} is not UTF-8 (first non-UTF-8 byte on line {line})",
            hint="save the file again as 'CSV UTF-8' in your spreadsheet program; coderel does "
            "not guess encodings",
            file=path.name,
            line=line,
        )
        return RawTable(path.name, None, (), (), (), typed=False, problems=(problem,))
    first_line = text.split("\n", 1)[0]
    delimiter = ";" if ";" in first_line and "," not in first_line else ","
    if "\t" in first_line and "," not in first_line and ";" not in first_line:
        delimiter = "\t"
    cut: dict[int, int] = {}  # physical line -> its cells, for lines cut before splitting
    reader = csv.reader(
        _capped_lines(text, delimiter, limits.max_columns, cut), delimiter=delimiter
    )
    header: tuple[str, ...] | None = None
    header_line: int | None = None
    rows: list[RawRow] = []
    record = 0
    header_row = 1
    previous_end = 0
    start_line = 1
    too_wide: list[Problem] = []
    ragged: list[tuple[int, int, int, int]] = []  # (line, row, cells, cells with a value past it)
    with _field_limit(limits.max_field_chars):
        while True:
            try:
                cells = next(reader)
            except StopIteration:
                break
            except csv.Error:
                raise InputRefused(
                    f"{path.name}: a cell starting on line {previous_end + 1} is longer than "
                    f"{limits.max_field_chars} characters (or a quote opened there is never "
                    f"closed); {raise_hint('max_field_chars')}"
                ) from None
            record += 1
            start_line = previous_end + 1
            previous_end = reader.line_num
            # lines of this record cut before splitting (at most a few: they are popped here)
            counts = [cut.pop(n) for n in [n for n in cut if n <= previous_end]]
            if not any(c.strip() for c in cells):
                continue
            if header is None:
                header = tuple(_header_text(c) for c in cells[: limits.max_columns])
                header_line = start_line
                header_row = record
                continue
            if len(rows) >= limits.max_rows:
                raise InputRefused(
                    f"{path.name} has more than {limits.max_rows} rows (line {start_line}); "
                    f"split it, or {raise_hint('max_rows')}"
                )
            if counts or len(cells) > limits.max_columns:
                count = max([len(cells), *counts])
                too_wide.append(_too_wide(path.name, start_line, count, limits))
                cells = cells[: len(header)]  # widening every row to the limit is the bomb
            elif len(cells) > len(header):
                filled = sum(1 for c in cells[len(header) :] if c.strip())
                ragged.append((start_line, record, len(cells), filled))
                cells = cells[: len(header)]
            rows.append(RawRow(number=record, cells=tuple(cells), line=start_line))
    problems: tuple[Problem, ...] = tuple(too_wide)
    if header is not None:
        problems += _ragged(path.name, len(header), ragged)
    # Only the last record can end inside a quote (it then runs to the end of the file).
    # Lines as the csv reader counts them (``\n``, ``\r`` or ``\r\n``; not ``str.splitlines``).
    lines = io.StringIO(text, newline="").readlines()
    opened = _open_quote_line("".join(lines[start_line - 1 :]), delimiter)
    if opened is not None:
        line = start_line + opened - 1
        problems += (
            make_problem(
                "unclosed-quote",
                f'a quote (") opened on line {line} is never closed: the rest of the file was '
                "read as one cell, and its rows are missing",
                hint=f'close the quote on line {line}, or remove it (write "" for a quote '
                "inside a quoted cell), and save the file again",
                file=path.name,
                line=line,
            ),
        )
    if header is None:
        return _empty(path.name, None, typed=False)
    width = max([len(header), *(len(r.cells) for r in rows)])
    if width * len(rows) > limits.max_cells:
        raise InputRefused(
            f"{path.name} spans {len(rows)} rows x {width} columns, over the limit of "
            f"{limits.max_cells} cells; {raise_hint('max_cells')}"
        )
    header = header + ("",) * (width - len(header))
    # a short row (a line with fewer separators than the header) has blank cells at its end
    rows = [
        RawRow(r.number, r.cells + (None,) * (width - len(r.cells)), r.line)
        if len(r.cells) < width
        else r
        for r in rows
    ]
    return RawTable(
        path.name,
        None,
        header,
        tuple(rows),
        tuple(range(1, width + 1)),
        header_row=header_row,
        header_line=header_line,
        typed=False,
        problems=problems,
    )


@contextlib.contextmanager
def _field_limit(chars: int) -> Iterator[None]:
    """Let the :mod:`csv` module read fields of up to ``chars`` characters (default 131,072)."""
    old = csv.field_size_limit()
    csv.field_size_limit(chars)
    try:
        yield
    finally:
        csv.field_size_limit(old)


def _capped_lines(
    text: str, delimiter: str, max_columns: int, cut: dict[int, int]
) -> Iterator[str]:
    """The lines of ``text`` for the :mod:`csv` module, a line without quotes cut after
    ``max_columns`` separators (its cell count is put in ``cut`` under its line number), so
    that a line of a million commas never becomes a million cells.

    Lines end at ``\n``, ``\r`` or ``\r\n``, as the :mod:`csv` module counts them. A line with
    a quote may hold separators inside a quoted cell and is passed whole (the file-size limit
    bounds it).
    """
    for number, line in enumerate(io.StringIO(text, newline=""), start=1):
        if len(line) > max_columns and '"' not in line:
            count = line.count(delimiter)
            if count >= max_columns:
                cut[number] = count + 1
                line = delimiter.join(line.split(delimiter, max_columns)[:max_columns]) + "\n"
        yield line


#: Ragged rows named one by one; past this many, one more problem counts the rest.
MAX_RAGGED_REPORTED = 20


def _ragged(file: str, width: int, ragged: list[tuple[int, int, int, int]]) -> tuple[Problem, ...]:
    """``ragged-row`` errors: each row with more cells than the header, up to
    :data:`MAX_RAGGED_REPORTED` of them, then one for the rest; the cell named is the first
    one past the header."""
    past = get_column_letter(width + 1)
    out = []
    for line, row, count, filled in ragged[:MAX_RAGGED_REPORTED]:
        held = (
            f"{filled} of the cells past the header hold a value, which was not read"
            if filled
            else "the cells past the header are blank"
        )
        out.append(
            make_problem(
                "ragged-row",
                f"line {line} has {count} cells, the header {width}; only the cells under the "
                f"header were read ({held})",
                hint="remove the extra separators at the end of this line, or quote a cell "
                'that holds a separator ("a, b")',
                file=file,
                cell=f"{past}{row}",
                line=line,
            )
        )
    rest = ragged[MAX_RAGGED_REPORTED:]
    if rest:
        filled = sum(1 for *_, f in rest if f)
        shown = ", ".join(str(r[0]) for r in rest[:5])
        out.append(
            make_problem(
                "ragged-row",
                f"{len(rest)} more lines have more cells than the header ({width}), starting "
                f"with lines {shown}; only the cells under the header were read"
                + (f" ({filled} of these lines hold values past it)" if filled else ""),
                hint="remove the extra separators at the ends of these lines",
                file=file,
                cell=f"{past}{rest[0][1]}",
                line=rest[0][0],
            )
        )
    return tuple(out)


def _too_wide(file: str, line: int, count: int, limits: Limits) -> Problem:
    return make_problem(
        "too-many-columns",
        f"line {line} has {count} cells, over the limit of {limits.max_columns} columns; only "
        "the cells under the header were read",
        hint="check the separators on this line (a column of commas?), or "
        + raise_hint("max_columns"),
        file=file,
        line=line,
    )


def _open_quote_line(text: str, delimiter: str) -> int | None:
    """The line (1-based, within ``text``) of a quote that ``text`` leaves open, else None.

    Follows the :mod:`csv` module's reading: a quote opens a quoted cell only at a cell's start;
    inside one, ``""`` is a quote and ``"`` ends it.
    """
    if '"' not in text:
        return None
    in_quotes, at_start, line, opened = False, True, 1, None
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if ch == "\n":
            line += 1
        if in_quotes:
            if ch == '"':
                if i + 1 < n and text[i + 1] == '"':
                    i += 2
                    continue
                in_quotes = False
        elif ch == '"' and at_start:
            in_quotes, opened = True, line
            at_start = False
        else:
            at_start = ch in (delimiter, "\n", "\r")
        i += 1
    return opened if in_quotes else None


def _empty(file: str, sheet: str | None, *, typed: bool) -> RawTable:
    problem = make_problem(
        "empty-sheet",
        f"{file}{'!' + sheet if sheet else ''} holds no data",
        hint="check that the right file was given, or remove it",
        file=file,
        sheet=sheet,
    )
    return RawTable(file, sheet, (), (), (), typed=typed, problems=(problem,))


def _python_value(value: Any) -> Any:
    """A Parquet cell as a plain Python value (``None`` for missing)."""
    if value is None:
        return None
    if hasattr(value, "to_pydatetime"):
        return value.to_pydatetime()
    if hasattr(value, "item") and not isinstance(value, str | bytes):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    if isinstance(value, dt.datetime | dt.date | str | int | float | bool):
        return value
    try:
        import pandas as pd

        if value is pd.NA or value is pd.NaT:
            return None
    except ImportError:  # pragma: no cover - pandas is a dependency
        pass
    return value


def read_parquet(path: Path) -> RawTable:
    """Read a Parquet file; float columns holding only whole numbers become integers.

    A column stored as text is read like CSV text (its numbers are not "stored as text" by
    mistake: a long table's ``value`` column must be text to hold codes of every variable).
    """
    import pandas as pd

    frame = pd.read_parquet(path)
    header = tuple(_header_text(c) for c in frame.columns)
    columns: list[list[Any]] = []
    text_positions: set[int] = set()
    for position, name in enumerate(frame.columns):
        values = [_python_value(v) for v in frame[name].tolist()]
        present = [v for v in values if v is not None]
        if present and all(isinstance(v, float) and v.is_integer() for v in present):
            values = [None if v is None else int(v) for v in values]
        if present and all(isinstance(v, str) for v in present):
            text_positions.add(position)
        columns.append(values)
    rows = tuple(
        RawRow(number=i + 2, cells=tuple(col[i] for col in columns)) for i in range(len(frame))
    )
    if not header:
        return _empty(path.name, None, typed=True)
    return RawTable(
        path.name,
        None,
        header,
        rows,
        tuple(range(1, len(header) + 1)),
        typed=True,
        text_positions=frozenset(text_positions),
    )
