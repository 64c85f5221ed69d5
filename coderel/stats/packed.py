"""A plan's dense per-unit contributions, held exactly in fewer bytes than units x M float64.

Most columns of a plan (:mod:`coderel.stats.plan`) are whole numbers (value counts, 0/1
indicators of coder pairs) and, for a categorical variable, each unit's row is one of few
distinct rows: it depends only on the values its coders gave (with 3 coders and 5 categories, at
most 6^3 = 216 rows). Held as units x M float64 they cost 8 M bytes per unit (about 0.5 KB for a
categorical variable with 3 coders). :func:`pack` keeps the same numbers, bit for bit, as one of:

:class:`RowTable`
    the distinct rows (D x M float64) and, per unit, the position of its row (one byte, or two);
:class:`TypedColumns`
    each column in the smallest type that gives its float64 values back exactly (int8, int16,
    int32, float32, else float64), when the rows are too many to list.

Both give back the float64 rows of any block of units (:meth:`Packed.toarray`), the very array
that was packed, so every product and sum made from a block is the one the float64 array gives:
the bootstrap (:mod:`coderel.stats.bootstrap`) converts block by block and its numbers do not
move.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

#: Rows hashed, checked or converted at a time (their scratch arrays stay small).
_CHUNK = 8192
#: The most distinct rows a :class:`RowTable` lists (its codes take at most two bytes).
_MOST_ROWS = 65536
#: Whole-number and single-precision types tried in order for a column (:class:`TypedColumns`).
_NARROW = (np.int8, np.int16, np.int32, np.float32)


class Packed:
    """Units x M float64 columns held in fewer bytes; ``w @ packed`` is ``w @ packed.toarray()``."""

    __array_ufunc__ = None  # ``w @ packed`` calls __rmatmul__ rather than numpy's matmul

    @property
    def shape(self) -> tuple[int, int]:
        raise NotImplementedError

    @property
    def nbytes(self) -> int:
        """Bytes held by the arrays of this object."""
        raise NotImplementedError

    def __getitem__(self, rows: Any) -> Packed:
        """The units ``rows`` (a slice or positions), still packed."""
        raise NotImplementedError

    def toarray(self) -> np.ndarray:
        """The float64 units x M array (C order), exactly as packed."""
        raise NotImplementedError

    def distinct_rows(self) -> np.ndarray:
        """Float64 rows holding every value of every column of these units (all rows, or each
        distinct row once): what column-wise tests (whole numbers, largest value) need."""
        raise NotImplementedError

    def nonzero_rows(self) -> np.ndarray:
        """Positions of the units with a non-zero contribution."""
        raise NotImplementedError

    def column_sums(self) -> np.ndarray:
        """The column sums of ``toarray()`` (:func:`dense_column_sums`)."""
        return dense_column_sums(self.toarray())

    def __rmatmul__(self, w: np.ndarray) -> np.ndarray:
        return w @ self.toarray()


@dataclass(frozen=True)
class RowTable(Packed):
    """Each unit's row named by its position ``codes[u]`` in ``table`` (D x M distinct rows).

    ``total`` holds the column sums of all units when known at packing (``None`` for a subset).
    """

    codes: np.ndarray
    table: np.ndarray
    total: np.ndarray | None = None

    @property
    def shape(self) -> tuple[int, int]:
        return len(self.codes), self.table.shape[1]

    @property
    def nbytes(self) -> int:
        return self.codes.nbytes + self.table.nbytes

    def __getitem__(self, rows: Any) -> RowTable:
        return RowTable(self.codes[rows], self.table)

    def toarray(self) -> np.ndarray:
        return self.table[self.codes]

    def distinct_rows(self) -> np.ndarray:
        used = np.bincount(self.codes, minlength=len(self.table)) > 0
        return self.table[used]

    def nonzero_rows(self) -> np.ndarray:
        return np.flatnonzero(np.any(self.table != 0, axis=1)[self.codes])

    def column_sums(self) -> np.ndarray:
        return self.total.copy() if self.total is not None else super().column_sums()


@dataclass(frozen=True)
class TypedColumns(Packed):
    """Columns in groups of one type: ``positions[g]`` are the columns of ``values[g]``
    (units x len(positions[g])); ``n_units`` x ``width`` in all."""

    positions: tuple[np.ndarray, ...]
    values: tuple[np.ndarray, ...]
    n_units: int
    width: int
    total: np.ndarray | None = None

    @property
    def shape(self) -> tuple[int, int]:
        return self.n_units, self.width

    @property
    def nbytes(self) -> int:
        return sum(v.nbytes for v in self.values)

    def __getitem__(self, rows: Any) -> TypedColumns:
        n = len(np.empty((self.n_units, 0))[rows])
        return TypedColumns(self.positions, tuple(v[rows] for v in self.values), n, self.width)

    def toarray(self) -> np.ndarray:
        out = np.empty(self.shape)
        for pos, vals in zip(self.positions, self.values, strict=True):
            out[:, pos] = vals
        return out

    def distinct_rows(self) -> np.ndarray:
        return self.toarray()

    def nonzero_rows(self) -> np.ndarray:
        nonzero = np.zeros(self.shape[0], dtype=bool)
        for vals in self.values:
            nonzero |= np.any(vals != 0, axis=1)
        return np.flatnonzero(nonzero)

    def column_sums(self) -> np.ndarray:
        return self.total.copy() if self.total is not None else super().column_sums()


#: Units per block of :func:`dense_column_sums`.
_SUM_ROWS = 4096


def dense_column_sums(d: np.ndarray) -> np.ndarray:
    """Column sums of units x M numbers by pairwise summation over the units (numpy's, on each
    block's transposed copy, then over the blocks' sums; Higham 1993, *SIAM J. Sci. Comput.*
    14(4), 783-799): the rounding error grows with log(units), not with units as in a row-by-row
    sum, so the same numbers summed part by part (the dask engine's partitions) agree to about
    1e-16 relative."""
    n, m = d.shape
    if n <= _SUM_ROWS:
        return np.ascontiguousarray(d.T).sum(axis=1, dtype=np.float64)
    partial = np.empty((m, -(-n // _SUM_ROWS)))
    for j, start in enumerate(range(0, n, _SUM_ROWS)):
        block = np.ascontiguousarray(d[start : start + _SUM_ROWS].T)
        partial[:, j] = block.sum(axis=1, dtype=np.float64)
    return partial.sum(axis=1)


def as_array(columns: Any) -> Any:
    """Float64 rows of packed columns; any other array as it is."""
    return columns.toarray() if isinstance(columns, Packed) else columns


def pack(dense: np.ndarray) -> Packed:
    """The units x M float64 array ``dense`` held exactly in the fewer bytes of
    :class:`RowTable` (at most 65,536 distinct rows) or :class:`TypedColumns`.

    >>> x = np.tile([[1.0, 1 / 3], [0.0, 0.5]], (500, 1))  # 1,000 units, two distinct rows
    >>> p = pack(x)
    >>> type(p).__name__, p.nbytes, x.nbytes, np.array_equal(p.toarray(), x)
    ('RowTable', 1032, 16000, True)
    """
    dense = np.ascontiguousarray(dense, dtype=float)
    n, m = dense.shape
    total = dense_column_sums(dense)
    bits = dense.view(np.uint64)
    _, first, codes = np.unique(_row_keys(bits), return_index=True, return_inverse=True)
    typed = None
    if len(first) <= _MOST_ROWS:
        row_bytes = len(first) * m * 8 + n * (1 if len(first) <= 256 else 2)
        if row_bytes > n * m:  # more than one byte per number: see what columns by type take
            typed = _typed(dense, total)
        if typed is None or row_bytes < typed.nbytes:
            if not _rows_equal(bits, first, codes):  # two rows with one key: compare whole rows
                _, first, codes = np.unique(
                    _row_bytes(dense), return_index=True, return_inverse=True
                )
            if len(first) <= _MOST_ROWS:
                small = np.uint8 if len(first) <= 256 else np.uint16
                return RowTable(codes.reshape(-1).astype(small), dense[first], total)
    return typed if typed is not None else _typed(dense, total)


def _row_keys(bits: np.ndarray) -> np.ndarray:
    """A 64-bit key per row of 64-bit words: each word mixed (xor-shift, a multiplier per
    column, xor-shift) and the words' results added modulo 2^64. Equal rows have equal keys;
    unequal rows almost never do (:func:`pack` checks with :func:`_rows_equal`)."""
    n, m = bits.shape
    multipliers = np.random.Generator(np.random.PCG64(m)).integers(
        0, 2**63, size=m, dtype=np.uint64
    ) * np.uint64(2) + np.uint64(1)
    keys = np.empty(n, dtype=np.uint64)
    for start in range(0, n, _CHUNK):
        z = bits[start : start + _CHUNK] ^ (bits[start : start + _CHUNK] >> np.uint64(32))
        z *= multipliers
        z ^= z >> np.uint64(29)
        keys[start : start + _CHUNK] = z.sum(axis=1, dtype=np.uint64)
    return keys


def _rows_equal(bits: np.ndarray, first: np.ndarray, codes: np.ndarray) -> bool:
    """Whether every row is bit for bit the first row of its key."""
    table = bits[first]
    codes = codes.reshape(-1)
    return all(
        np.array_equal(table[codes[start : start + _CHUNK]], bits[start : start + _CHUNK])
        for start in range(0, len(codes), _CHUNK)
    )


def _row_bytes(dense: np.ndarray) -> np.ndarray:
    """Each row as one opaque item of its bytes (rows compared byte for byte)."""
    return dense.view(np.dtype((np.void, dense.shape[1] * dense.itemsize))).reshape(-1)


def _typed(dense: np.ndarray, total: np.ndarray) -> TypedColumns:
    """Each column in the first type of :data:`_NARROW` that gives it back bit for bit, else
    float64; columns of one type grouped."""
    kinds: dict[Any, list[int]] = {}
    for start in range(0, dense.shape[1], 16):  # a few columns at a time, each contiguous
        part = np.ascontiguousarray(dense[:, start : start + 16].T)
        for j, column in enumerate(part, start):
            kinds.setdefault(_narrowest(column), []).append(j)
    positions, values = [], []
    for kind, cols in kinds.items():
        pos = np.array(cols, dtype=np.intp)
        positions.append(pos)
        values.append(dense[:, pos].astype(kind))
    return TypedColumns(tuple(positions), tuple(values), *dense.shape, total)


def _narrowest(column: np.ndarray) -> Any:
    bits = column.view(np.uint64)
    finite = bool(np.all(np.isfinite(column)))
    for kind in _NARROW:
        if np.issubdtype(kind, np.integer):
            info = np.iinfo(kind)
            if not finite or not np.all((column >= info.min) & (column <= info.max)):
                continue
        elif not finite or not np.all(np.abs(column) <= np.finfo(np.float32).max):
            continue
        if np.array_equal(column.astype(kind).astype(float).view(np.uint64), bits):
            return kind
    return np.float64
