"""Rows of files that share units, repartitioned by a hash of the unit ID.

When several files hold rows of the same units (one file per coder, or a table split by
variable), the files are read column by column on the workers (:mod:`coderel.io.long_columnar`,
nothing normalised yet) and each file's rows are cut into ``n`` buckets by a 64-bit hash of the
unit ID as the reader reads it; bucket ``j`` of every file goes to one task, which reads its pieces
in file order with the in-process reader (:func:`coderel.io.read.read_long_parts`), so that all
rows of a unit are read together and every row keeps its own file and cell for problems. A piece
carries only the distinct values its rows use.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np

from coderel.codebook import Codebook
from coderel.engine.partitions import Summary, summarise_codings


def split_file(path: str, n: int) -> list | None:
    """The file's rows in ``n`` buckets by unit (``Columns`` each, possibly empty), or None when
    the file cannot be read column by column (dates in a column, a wide sheet...)."""
    from coderel.io.archive import DEFAULT_LIMITS
    from coderel.io.long_columnar import read_parquet_columns
    from coderel.io.names import text_of as _text_of
    from coderel.stats.bootstrap import unit_keys

    cols = read_parquet_columns(Path(path), DEFAULT_LIMITS)
    if cols is None:
        return None
    texts = [_text_of(v) for v in cols.distinct[0]]
    keys = unit_keys(["" if t is None else t for t in texts], 0)
    of_distinct = (keys % np.uint64(n)).astype(np.int64)
    of_distinct[[t is None for t in texts]] = 0
    bucket = of_distinct[cols.codes[0]] if len(of_distinct) else np.zeros(len(cols.numbers), int)
    return [_piece(cols, bucket == j) for j in range(n)]


def _piece(cols, keep: np.ndarray):
    """The rows ``keep`` of a file's columns, with only the distinct values they use."""
    distinct, codes = [], []
    for values, code in zip(cols.distinct, cols.codes, strict=True):
        used, inverse = np.unique(code[keep], return_inverse=True)
        distinct.append([values[i] for i in used])
        codes.append(inverse.astype(np.int64))
    return dataclasses.replace(
        cols,
        distinct=distinct,
        codes=codes,
        numbers=cols.numbers[keep],
        lines=cols.lines[keep] if cols.lines is not None else None,
    )


def is_split(parts: list | None) -> bool:
    return parts is not None


def bucket(parts: list | None, j: int):
    """Bucket ``j`` of a split file."""
    return parts[j] if parts is not None else None


def summarise_bucket(codebook: Codebook, pieces: list) -> Summary:
    """Read one bucket's pieces (in file order) and summarise it per unit (a task)."""
    from coderel.io.read import read_long_parts

    return summarise_codings(
        codebook, read_long_parts(codebook, [p for p in pieces if len(p.numbers)])
    )
