"""Long tables (unit, coder, variable, value) read column by column with pyarrow.

The row-by-row reader (:func:`coderel.io.long_rows.read_long`) turns every cell into a Python
value and checks it in a loop: fine for a coder's sheet, far too slow for millions of labels. This
path reads the four columns with pyarrow, works on the **distinct** values of each column (a unit
ID, coder name, variable name or raw value is turned into text, looked up and normalised once, by
the same functions as the row reader) and maps the results back onto the rows with vectorised
integer indexing. Problems are the same as the row reader's, with the same place (file, cell such
as ``D17``, line) and in the same order; places are made only for rows that have a problem.

A file takes this path only when the row reader would read it exactly as here:

* Parquet: the header is exactly ``unit, coder, variable, value`` and each column holds text,
  whole or decimal numbers, booleans or nothing (other types, e.g. dates, go the row way);
* CSV: UTF-8 without byte-order mark, the same delimiter rule as :func:`read_csv`, exactly four
  columns on every line, no quote character, no carriage return and no blank line (so that line
  and row numbers are plain line counts).

Every other file is read by the row reader, with the same result. Safety limits: the same checks
as the row reader (:func:`coderel.io.archive.check_text`, :func:`check_parquet`), with the
limits that stand for a spreadsheet's size raised (:func:`long_limits`: file and unpacked size
:data:`LONG_FILE_BYTES`, rows :data:`LONG_ROWS`), since this path holds only compact column arrays,
not a Python object per cell.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from coderel.io.archive import Limits, check_parquet, check_text
from coderel.io.text_tables import _header_text
from coderel.normalise import normalise_cell, quote
from coderel.problems import Problems

if TYPE_CHECKING:
    import pyarrow as pa

LONG_HEADER: tuple[str, ...] = ("unit", "coder", "variable", "value")
#: Size limit of one long table read column by column (memory, not parse time, is the bound).
LONG_FILE_BYTES = 4 * 1024**3
#: Row limit of one long table read column by column (a label per row, about 60 bytes of memory
#: each while read, more when rows have problems); raised with ``CODEREL_MAX_ROWS``.
LONG_ROWS = 20_000_000


def long_limits(limits: Limits) -> Limits:
    """``limits`` for a long table read column by column: a spreadsheet's row and cell counts are
    no bound here, its memory is; limits set higher (``CODEREL_MAX_ROWS``...) stay higher."""
    return dataclasses.replace(
        limits,
        max_file_bytes=max(limits.max_file_bytes, LONG_FILE_BYTES),
        max_uncompressed_bytes=max(limits.max_uncompressed_bytes, LONG_FILE_BYTES),
        max_rows=max(limits.max_rows, LONG_ROWS),
        max_cells=max(limits.max_cells, 5 * LONG_ROWS),
    )


_LETTERS = "ABCD"


@dataclasses.dataclass
class Columns:
    """A long table's four columns as distinct Python values and per-row integer codes."""

    file: str
    #: distinct values per column, as the row reader would see the cells (``None`` for blank)
    distinct: list[list[Any]]
    #: per-row index into ``distinct`` (int32 arrays, one per column)
    codes: list[np.ndarray]
    #: spreadsheet-style row number of each row (header is row 1)
    numbers: np.ndarray
    #: CSV line of each row, or None for Parquet
    lines: np.ndarray | None
    #: do the value column's cells keep their own type (Parquet non-text), or are they text
    typed_value: bool
    csv: bool


# ---- reading ---------------------------------------------------------------------------------
def _encode(column: pa.ChunkedArray | pa.Array) -> tuple[list[Any], np.ndarray]:
    import pyarrow as pa
    import pyarrow.compute as pc

    if pa.types.is_dictionary(column.type):
        column = column.cast(column.type.value_type)
    # distinct values in order of first appearance (null included), and each row's index
    encoded = pc.dictionary_encode(column, null_encoding="encode")
    if isinstance(encoded, pa.ChunkedArray):
        encoded = encoded.combine_chunks() if encoded.num_chunks else pa.array([], column.type)
    if not pa.types.is_dictionary(encoded.type):  # an empty column
        return [], np.empty(0, dtype=np.int32)
    codes = encoded.indices.to_numpy(zero_copy_only=False)
    return encoded.dictionary.to_pylist(), np.asarray(codes, dtype=np.int32)


def _accepted(kind: pa.DataType) -> bool:
    import pyarrow as pa

    if pa.types.is_dictionary(kind):
        kind = kind.value_type
    return bool(
        pa.types.is_string(kind)
        or pa.types.is_large_string(kind)
        or pa.types.is_integer(kind)
        or pa.types.is_floating(kind)
        or pa.types.is_boolean(kind)
        or pa.types.is_null(kind)
    )


def _python_cells(values: list[Any], kind: pa.DataType) -> tuple[list[Any], bool]:
    """Distinct values as :func:`coderel.io.text_tables.read_parquet` gives cells, and whether
    the column is text (every present value a string)."""
    import pyarrow as pa

    out = [None if isinstance(v, float) and v != v else v for v in values]
    present = [v for v in out if v is not None]
    if present and all(isinstance(v, float) and v.is_integer() for v in present):
        out = [None if v is None else int(v) for v in out]
    base = kind.value_type if pa.types.is_dictionary(kind) else kind
    text = bool(present) and (pa.types.is_string(base) or pa.types.is_large_string(base))
    return out, text


def read_parquet_columns(path: Path, limits: Limits) -> Columns | None:
    """The four columns of a long Parquet table, or None when the file is not one."""
    import pyarrow.parquet as pq

    check_parquet(path, long_limits(limits))
    try:
        schema = pq.read_schema(path)
    except Exception:  # damaged: the row reader reports it
        return None
    # pandas keeps a named index as a column of the file; the row reader does not see it
    # (a RangeIndex is kept as metadata only, given as a dict instead of a column name)
    stored = (schema.pandas_metadata or {}).get("index_columns", []) if schema.metadata else []
    index = {name for name in stored if isinstance(name, str)}
    names = [n for n in schema.names if n not in index]
    header = tuple(_header_text(n) for n in names)
    if tuple(h.casefold() for h in header) != LONG_HEADER:
        return None
    if not all(_accepted(schema.field(n).type) for n in names):
        return None
    try:
        table = pq.read_table(path, columns=names)
    except Exception:
        return None
    if table.num_rows == 0:
        return None  # the row reader reports the empty table
    distinct, codes = [], []
    typed_value = True
    for i in range(4):
        values, code = _encode(table.column(i))
        cells, text = _python_cells(values, table.schema.field(i).type)
        distinct.append(cells)
        codes.append(code)
        if i == 3:
            typed_value = not text
    numbers = np.arange(2, table.num_rows + 2, dtype=np.int64)
    return Columns(path.name, distinct, codes, numbers, None, typed_value, csv=False)


def read_csv_columns(path: Path, limits: Limits) -> Columns | None:
    """The four columns of a long CSV table, or None when the file is not one (or not plain)."""
    import pyarrow as pa
    import pyarrow.csv as pacsv

    with open(path, "rb") as fh:
        first = fh.readline(1 << 16)
    try:
        first_text = first.decode("utf-8")
    except UnicodeDecodeError:
        return None
    if first_text.startswith("\ufeff") or not first_text.strip():
        return None
    first_line = first_text.rstrip("\n")
    delimiter = ";" if ";" in first_line and "," not in first_line else ","
    if "\t" in first_line and "," not in first_line and ";" not in first_line:
        delimiter = "\t"
    header = tuple(_header_text(c) for c in first_line.split(delimiter))
    if tuple(h.casefold() for h in header) != LONG_HEADER:
        return None
    check_text(path, long_limits(limits))
    data = path.read_bytes()
    if b'"' in data or b"\r" in data or b"\n\n" in data:
        return None
    try:
        data.decode("utf-8")
    except UnicodeDecodeError:
        return None
    del first
    names = [f"c{i}" for i in range(4)]
    try:
        table = pacsv.read_csv(
            pa.py_buffer(data),
            read_options=pacsv.ReadOptions(column_names=names, skip_rows=1, use_threads=True),
            parse_options=pacsv.ParseOptions(delimiter=delimiter, quote_char=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.string() for n in names},
                null_values=[],
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        return None  # ragged rows and the like: the row reader handles them
    del data
    if table.num_rows == 0:
        return None
    distinct, codes = [], []
    for i in range(4):
        values, code = _encode(table.column(i))
        distinct.append(values)
        codes.append(code)
    # read_csv skips records whose cells are all blank; numbering still counts them
    blank = np.ones(table.num_rows, dtype=bool)
    for values, code in zip(distinct, codes, strict=True):
        blank &= np.array([not v.strip() for v in values], dtype=bool)[code]
    numbers = np.arange(2, table.num_rows + 2, dtype=np.int64)
    if blank.any():
        keep = ~blank
        codes = [c[keep] for c in codes]
        numbers = numbers[keep]
        if not len(numbers):
            return None
    return Columns(path.name, distinct, codes, numbers, numbers.copy(), False, csv=True)


# ---- interpreting ----------------------------------------------------------------------------
class _Places:
    """Problem places of rows, made only for the rows that need one."""

    def __init__(self, cols: Columns) -> None:
        self.cols = cols

    def __call__(self, row: int, position: int) -> dict[str, Any]:
        number = int(self.cols.numbers[row])
        line = int(self.cols.lines[row]) if self.cols.lines is not None else None
        return {
            "file": self.cols.file,
            "sheet": None,
            "cell": f"{_LETTERS[position]}{number}",
            "line": line,
        }


def _texts(values: list[Any], text_of: Callable[[Any], str | None]) -> tuple[np.ndarray, list]:
    """Map distinct raw values to codes of their distinct texts (-1 for None)."""
    texts: dict[str, int] = {}
    out = np.empty(len(values), dtype=np.int32)
    for i, v in enumerate(values):
        t = text_of(v)
        out[i] = -1 if t is None else texts.setdefault(t, len(texts))
    return out, list(texts)


def apply_columns(
    reader: Any,
    cols: Columns,
    text_of: Callable[[Any], str | None],
    closest: Callable[[str, list[str]], str | None],
) -> None:
    """Add the long table's records, texts and problems to ``reader`` (a
    :class:`coderel.io.reader.SheetReader`), exactly as the row-by-row ``read_long`` would.
    ``text_of`` and ``closest`` are the row reader's own functions (:mod:`coderel.io.names`: an
    ID or name as text; the closest known name)."""
    cb = reader.codebook
    place = _Places(cols)
    n = len(cols.numbers)
    ucode, units = _texts(cols.distinct[0], text_of)
    ccode, coders = _texts(cols.distinct[1], text_of)
    unit = ucode[cols.codes[0]] if len(ucode) else np.full(n, -1)
    coder = ccode[cols.codes[1]] if len(ccode) else np.full(n, -1)
    pending: list[tuple[int, int, str, str, dict[str, Any]]] = []  # (row, order, code, msg, kw)

    def problem(row: int, code: str, message: str, **kw: Any) -> None:
        pending.append((row, len(pending), code, message, kw))

    if not cols.csv:  # rows whose four cells are all blank are skipped
        blank = np.ones(n, dtype=bool)
        for values, code in zip(cols.distinct, cols.codes, strict=True):
            blank &= np.array([v is None for v in values], dtype=bool)[code]
        alive = ~blank
    else:
        alive = np.ones(n, dtype=bool)

    for row in np.flatnonzero(alive & (unit < 0)):
        c = coder[row]
        problem(
            row,
            "missing-unit-id",
            "this row has no unit ID; it was not read",
            hint="fill in the unit cell",
            coder=coders[c] if c >= 0 else None,
            **place(row, 0),
        )
    alive &= unit >= 0
    for row in np.flatnonzero(alive & (coder < 0)):
        problem(
            row,
            "missing-coder",
            "this row has no coder name; it was not read",
            hint="fill in the coder cell",
            unit=units[unit[row]],
            **place(row, 1),
        )
    alive &= coder >= 0

    # coders: each claimed once, at its first row (as the row reader claims on first sight)
    source = (cols.file, None)
    rows_alive = np.flatnonzero(alive)
    present, first_rows = np.unique(coder[rows_alive], return_index=True)
    refused = np.zeros(len(coders), dtype=bool)
    claims: list[tuple[int, int]] = sorted(
        (int(rows_alive[f]), int(c)) for c, f in zip(present, first_rows, strict=True)
    )
    claimed_table = _ClaimTable(cols.file)
    for row, c in claims:
        name = coders[c]
        if reader.owners.get(name) == source:
            continue
        kept, reader.problems = reader.problems, Problems()
        try:
            ok = reader.claim(name, claimed_table, f"B{int(cols.numbers[row])}", long=True)
        finally:
            added, reader.problems = list(reader.problems), kept
        if not ok:
            refused[c] = True
        # the row reader adds the problem when it reaches this row: keep it in row order
        for p in added:
            pending.append((row, -1, "", "", {"_problem": p}))
    alive &= ~refused[np.maximum(coder, 0)]

    # variable names
    var_by_fold = {v.casefold(): v for v in cb.names}
    text_by_fold = {t.casefold(): t for t in cb.text_columns}
    names_raw = cols.distinct[2]
    kinds = np.zeros(len(names_raw), dtype=np.int8)  # 0 unknown, 1 variable, 2 text
    key_names: list[str | None] = []
    shown: list[str | None] = []
    for v in names_raw:
        name = text_of(v)
        shown.append(name)
        var = var_by_fold.get(name.casefold()) if name else None
        txt = text_by_fold.get(name.casefold()) if name else None
        key_names.append(var or txt)
        kinds[len(key_names) - 1] = 1 if var else (2 if txt else 0)
    kind = kinds[cols.codes[2]]
    unknown_msg: dict[int, tuple[str, str]] = {}
    for row in np.flatnonzero(alive & (kind == 0)):
        d = int(cols.codes[2][row])
        if d not in unknown_msg:
            name = shown[d]
            close = closest(name or "", [*cb.names, *cb.text_columns])
            unknown_msg[d] = (
                f"{quote(name) if name else 'a blank name'} is not a variable of the codebook",
                (f"did you mean {close!r}? " if close else "")
                + "use the variable names of the codebook",
            )
        message, hint = unknown_msg[d]
        problem(
            row,
            "unknown-variable",
            message,
            hint=hint,
            unit=units[unit[row]],
            coder=coders[coder[row]],
            **place(row, 2),
        )
    alive &= kind > 0

    # one row per (coder, unit, variable): later repeats are reported and skipped
    # variable and text names may share a key text; map keys to distinct key texts
    key_text: dict[str, int] = {}
    key_ids = np.array(
        [-1 if k is None else key_text.setdefault(k, len(key_text)) for k in key_names],
        dtype=np.int64,
    )
    idx = np.flatnonzero(alive)
    triple = _triple_codes(coder[idx], unit[idx], key_ids[cols.codes[2][idx]], len(units))
    dup = _duplicated(triple)
    if dup.any():
        first_row = pd.Series(idx).groupby(triple).transform("first").to_numpy()
        for pos in np.flatnonzero(dup):
            row = int(idx[pos])
            d = int(cols.codes[2][row])
            key_name = key_names[d]
            problem(
                row,
                "duplicate-unit",
                f"unit {units[unit[row]]}, variable {key_name} appears again "
                f"(first in D{int(cols.numbers[first_row[pos]])}); this row was not read",
                hint="delete the repeated row",
                unit=units[unit[row]],
                coder=coders[coder[row]],
                variable=key_name if kinds[d] == 1 else None,
                **place(row, 3),
            )
        alive[idx[dup]] = False
    del idx, triple, dup

    # narrative texts, in row order
    for row in np.flatnonzero(alive & (kind == 2)):
        raw = cols.distinct[3][cols.codes[3][row]]
        reader.add_text(units[unit[row]], coders[coder[row]], key_names[cols.codes[2][row]], raw)
    rows = np.flatnonzero(alive & (kind == 1))

    # values: each distinct (variable, raw value) normalised once
    var_of_name = np.array(
        [cb.names.index(k) if kinds[i] == 1 else -1 for i, k in enumerate(key_names)],
        dtype=np.int64,
    )
    var_idx = var_of_name[cols.codes[2][rows]]
    raw_idx = cols.codes[3][rows]
    n_raw = max(len(cols.distinct[3]), 1)
    pair = var_idx * n_raw + raw_idx
    # factorised by hashing, in order of first appearance (the order of rows does not matter:
    # each distinct pair is normalised once, and problems are sorted by row below)
    inverse, pairs = _first_seen(pair, len(cb.variables) * n_raw)
    del pair, raw_idx
    variables = cb.variables
    values: list[Any] = []
    missings: list[Any] = []
    invalid = np.zeros(len(pairs), dtype=bool)
    findings: dict[int, tuple] = {}
    for j, p in enumerate(pairs.tolist()):
        variable = variables[p // n_raw]
        result = normalise_cell(variable, cols.distinct[3][p % n_raw], typed=cols.typed_value)
        values.append(result.value)
        missings.append(result.missing)
        invalid[j] = result.invalid
        if result.findings:
            findings[j] = result.findings
    if findings:
        with_findings = np.flatnonzero(np.isin(inverse, list(findings)))
        for pos in with_findings:
            row = int(rows[pos])
            name = variables[var_idx[pos]].name
            for f in findings[int(inverse[pos])]:
                problem(
                    row,
                    f.code,
                    f.message,
                    hint=f.hint,
                    unit=units[unit[row]],
                    coder=coders[coder[row]],
                    variable=name,
                    **place(row, 3),
                )

    # problems in the order the row reader finds them
    pending.sort(key=lambda t: (t[0], t[1]))
    for _row, _order, code, message, kw in pending:
        if "_problem" in kw:
            reader.problems.append(kw["_problem"])
        else:
            reader.problems.add(code, message, **kw)

    # records: given rows in row order, then each (unit, coder) pair's absent variables
    value_obj = np.empty(len(values), dtype=object)
    value_obj[:] = values
    missing_obj = np.empty(len(missings), dtype=object)
    missing_obj[:] = missings
    var_names = [v.name for v in variables]
    number = cols.numbers[rows]
    absent = _absent(unit[rows], coder[rows], var_idx, len(variables), len(coders))
    n_given, n_absent = len(rows), len(absent[0])
    given = pd.DataFrame(
        {
            "unit": _category(np.concatenate([unit[rows], absent[0]]), units),
            "coder": _category(np.concatenate([coder[rows], absent[1]]), coders),
            "variable": _category(np.concatenate([var_idx, absent[2]]), var_names),
            "value": _column(_objects(value_obj, inverse, n_absent)),
            "missing": _column(_objects(missing_obj, inverse, n_absent)),
            "file": _column(_repeat(cols.file, n_given + n_absent)),
            "sheet": _column(_repeat(None, n_given + n_absent)),
            "cell": _cells(number, n_absent),
            "_line": pd.Series(
                _objects(cols.lines[rows].astype(object), None, n_absent)
                if cols.lines is not None
                else _repeat(None, n_given + n_absent),
                dtype=object,
                copy=False,
            ),
            "_invalid": np.concatenate(
                [invalid[inverse] if n_given else np.empty(0, dtype=bool), np.zeros(n_absent, bool)]
            ),
        },
        copy=False,
    )
    reader.add_frame(given)


def _triple_codes(coder: np.ndarray, unit: np.ndarray, key: np.ndarray, n_units: int) -> np.ndarray:
    """One int64 per (coder, unit, key) triple, equal exactly when the triples are equal (the
    pair is coded first, so that no product of counts can overflow)."""
    n_coders = int(coder.max(initial=0)) + 1
    pair, _ = _first_seen(coder.astype(np.int64) * max(n_units, 1) + unit, n_coders * n_units)
    return pair * (int(key.max(initial=0)) + 2) + (key + 1)


def _duplicated(key: np.ndarray) -> np.ndarray:
    """Which entries repeat an earlier one (non-negative int keys)."""
    if len(key) and int(key.max()) < 4 * len(key) + 1024 and np.bincount(key).max() <= 1:
        return np.zeros(len(key), dtype=bool)
    return pd.Series(key, copy=False).duplicated(keep="first").to_numpy()


def _first_seen(key: np.ndarray, bound: int) -> tuple[np.ndarray, np.ndarray]:
    """Like ``pandas.factorize`` for int keys in ``[0, bound)``: each entry's code, codes given
    in order of first appearance, and the distinct keys in that order. Dense arrays when the
    bound is small (no hashing), pandas otherwise."""
    if bound > 4 * len(key) + 1024:
        codes, uniques = pd.factorize(key)
        return codes.astype(np.int64, copy=False), np.asarray(uniques)
    n = len(key)
    first = np.full(bound, n, dtype=np.int64)
    np.minimum.at(first, key, np.arange(n))
    uniques = np.flatnonzero(first < n)
    uniques = uniques[np.argsort(first[uniques], kind="stable")]
    rank = np.zeros(bound, dtype=np.int64)
    rank[uniques] = np.arange(len(uniques))
    return rank[key], uniques


def _category(codes: np.ndarray, names: list[str]) -> pd.Categorical:
    """Per-row codes into ``names`` as a categorical column: one small integer per row, and
    the names once."""
    return pd.Categorical.from_codes(codes, categories=pd.Index(names, dtype=str))


def _objects(distinct: np.ndarray, inverse: np.ndarray | None, n_none: int) -> np.ndarray:
    """``distinct[inverse]`` (or ``distinct`` itself) followed by ``n_none`` None, as one object
    array: the rows share the distinct Python objects, none is made per row."""
    head = distinct if inverse is None else distinct[inverse] if len(inverse) else distinct[:0]
    out = np.empty(len(head) + n_none, dtype=object)
    out[: len(head)] = head
    return out


def _column(values: np.ndarray) -> pd.Series:
    """An object column as it is (pandas would otherwise infer text from it)."""
    return pd.Series(values, dtype=object, copy=False)


def _repeat(value: Any, n: int) -> np.ndarray:
    out = np.empty(n, dtype=object)
    out[:] = [value] if n else []
    return out


def _cells(number: np.ndarray, n_absent: int) -> pd.Series:
    """The value cell (``D17``) of each given row, then ``n_absent`` missing cells: made by
    pyarrow as one compact text column, not a Python string per row."""
    import pyarrow as pa
    import pyarrow.compute as pc

    text = pc.binary_join_element_wise("D", pc.cast(pa.array(number), pa.string()), "")
    cells = pa.concat_arrays([text, pa.nulls(n_absent, pa.string())])
    return pd.Series(pd.arrays.ArrowStringArray(cells), copy=False)


def _absent(
    unit: np.ndarray, coder: np.ndarray, var: np.ndarray, n_vars: int, n_coders: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(unit, coder, variable) of every variable a (unit, coder) pair did not give, pairs in order
    of first appearance, variables in codebook order."""
    if not len(unit):
        empty = np.empty(0, dtype=np.int64)
        return empty, empty, empty
    pair = unit.astype(np.int64) * n_coders + coder
    rank, pairs = _first_seen(pair, n_coders * (int(unit.max()) + 1))
    has = np.zeros((len(pairs), n_vars), dtype=bool)
    has[rank, var] = True
    p_idx, v_idx = np.nonzero(~has)
    return pairs[p_idx] // n_coders, pairs[p_idx] % n_coders, v_idx


@dataclasses.dataclass(frozen=True)
class _ClaimTable:
    """What ``SheetReader.claim`` needs of a table: its file and sheet."""

    file: str
    sheet: str | None = None
