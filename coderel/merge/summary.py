"""Per-unit summaries of one variable: what the merge keeps of the long table, in integer arrays.

The merge reads the long table once per variable (:func:`row_index` finds each variable's rows,
each row's unit and coder) and reduces it to :class:`VariableCells`: per unit, its coders' latest
tokens as integer ids in the order of the coders' first rows, and from them each cell's kind of
disagreement (as :func:`coderel.adjudicate.tokens.classify` defines it) and the token that stands
for it. No Python object is made per label: a token is made once per distinct value, missing code
and type of a variable (:func:`coderel.adjudicate.tokens.token_of` with codes as the codebook
writes them), and a cell's tokens per coder (a dict) only for the cells that need them.

Equal values of different types (``2`` and ``2.0``) are one token to the comparison, as in a set
of tokens, but keep their own token for the final value and for how they are shown, as they do
cell by cell (tests/test_cell_table.py checks both against the one-cell definitions).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from coderel.adjudicate.tokens import BLANK_TOKEN, NA_TOKEN, Token, _absent, _as_code, sorted_units
from coderel.codebook import Codebook, Variable
from coderel.codings import Codings

#: Token ids every variable shares: the variable does not apply, and a blank entry.
NA_ID, BLANK_ID = 0, 1
#: pandas' inferred kinds of an object column that hold one Python type only (or nothing).
_ONE_TYPE = frozenset({"integer", "floating", "string", "boolean", "empty", "bytes"})


@dataclass(frozen=True)
class RowIndex:
    """The long table's rows as integers: each row's unit (position in :attr:`units`, -1 for
    none) and coder (position in :attr:`coders`), and each codebook variable's rows in row order.

    ``units`` are in the merge's natural order (:func:`coderel.adjudicate.tokens.sorted_units`);
    ``values``, ``missing`` and ``applies`` are the table's own columns (no copy where pandas
    gives one without)."""

    units: list[str]
    coders: list[str]
    unit: np.ndarray
    coder: np.ndarray
    rows_of: dict[str, np.ndarray]
    values: np.ndarray
    missing: np.ndarray
    applies: np.ndarray


def _codes(column: pd.Series) -> tuple[np.ndarray, list[Any]]:
    """Each row's code among the column's distinct names (-1: none) and those names."""
    if isinstance(column.dtype, pd.CategoricalDtype):
        return column.cat.codes.to_numpy(), list(column.cat.categories)
    codes, distinct = pd.factorize(column.to_numpy(dtype=object), use_na_sentinel=True)
    return codes, list(distinct)


def row_index(codings: Codings) -> RowIndex:
    """The rows of ``codings`` by unit, coder and variable (see :class:`RowIndex`)."""
    f = codings.frame
    cb: Codebook = codings.codebook
    unit_codes, unit_names = _codes(f["unit"])
    used = np.bincount(unit_codes[unit_codes >= 0].astype(np.int64), minlength=len(unit_names))
    units = sorted_units(n for n, u in zip(unit_names, used, strict=True) if u)
    at = {u: i for i, u in enumerate(units)}
    position = np.array([at.get(n, -1) for n in unit_names] + [-1], dtype=np.int64)
    unit = position[unit_codes]  # code -1 takes the last entry
    coder, coders = _codes(f["coder"])
    var_codes, var_names = _codes(f["variable"])
    order = np.argsort(var_codes, kind="stable")
    bounds = np.searchsorted(var_codes[order], np.arange(len(var_names) + 1))
    rows_of = {
        str(name): order[bounds[i] : bounds[i + 1]]
        for i, name in enumerate(var_names)
        if str(name) in cb
    }
    del order, var_codes
    applies = f["applies"]
    return RowIndex(
        units=units,
        coders=[str(c) for c in coders],
        unit=unit,
        coder=coder.astype(np.int64, copy=False),
        rows_of=rows_of,
        values=f["value"].to_numpy(dtype=object),
        missing=f["missing"].to_numpy(dtype=object),
        applies=applies.to_numpy() if applies.dtype == bool else applies.to_numpy(dtype=object),
    )


def _exact_codes(values: np.ndarray) -> tuple[np.ndarray, list[Any]]:
    """Each value's code among the distinct values, equal values of different types apart
    (-1: absent, as :func:`coderel.adjudicate.tokens._absent` sees it), and one value of each."""
    try:
        codes, distinct = pd.factorize(values, use_na_sentinel=True)
    except TypeError:  # an unhashable value (a list): as the tuple its token holds
        values = np.array(
            [tuple(v) if isinstance(v, list) else v for v in values.tolist()] + [None],
            dtype=object,
        )[:-1]
        codes, distinct = pd.factorize(values, use_na_sentinel=True)
    present = codes >= 0
    _, at = np.unique(codes[present], return_index=True)
    first = np.flatnonzero(present)[at]  # each code's first row
    if len(distinct) and pd.api.types.infer_dtype(values, skipna=True) not in _ONE_TYPE:
        # factorising folds equal values of different types (2 and 2.0): split them again
        kinds = np.frompyfunc(type, 1, 1)(values[present])
        kind_codes, kinds_seen = pd.factorize(kinds)
        if len(kinds_seen) > 1:
            combined = codes[present].astype(np.int64) * len(kinds_seen) + kind_codes
            _, first_present, inverse = np.unique(combined, return_index=True, return_inverse=True)
            codes = np.full(len(values), -1, dtype=np.int64)
            codes[present] = inverse.reshape(-1)
            first = np.flatnonzero(present)[first_present]
    distinct_values = [values[i] for i in first.tolist()]
    # pandas sees some objects as missing that a token does not (NaT): none in normalised data
    return codes, distinct_values


def _not_applicable(applies: np.ndarray) -> np.ndarray:
    """Rows whose variable does not apply, as :func:`coderel.adjudicate.tokens.token_of` judges
    ``applies`` (``False``, or any other false value that is not absent), once per distinct."""
    if applies.dtype == bool:
        return ~applies
    codes, distinct = pd.factorize(applies, use_na_sentinel=False)
    flags = [a is False or (not _absent(a) and a is not True and not a) for a in distinct.tolist()]
    return np.array([*flags, False], dtype=bool)[codes]


def _value_token(var: Variable, value: Any) -> Token:
    if isinstance(value, list):
        value = tuple(value)
    if isinstance(value, float) and var.is_categorical:
        value = _as_code(var, value, var.codes)
    return ("value", value)


def row_tokens(var: Variable, ix: RowIndex, rows: np.ndarray) -> tuple[np.ndarray, list[Token]]:
    """Each of ``rows``' token as an id into the returned tokens (ids :data:`NA_ID` and
    :data:`BLANK_ID` first): the variable does not apply, else the missing code, else the
    value, else blank, as :func:`coderel.adjudicate.tokens.token_of` reduces one entry."""
    na = _not_applicable(ix.applies[rows])
    miss_codes, miss_values = _exact_codes(ix.missing[rows])
    value_codes, values = _exact_codes(ix.values[rows])
    tokens: list[Token] = [NA_TOKEN, BLANK_TOKEN]
    tokens += [("missing", _as_code(var, m, var.missing_codes)) for m in miss_values]
    tokens += [_value_token(var, v) for v in values]
    ids = np.where(value_codes >= 0, value_codes + 2 + len(miss_values), BLANK_ID)
    ids = np.where(miss_codes >= 0, miss_codes + 2, ids)
    ids = np.where(na, NA_ID, ids)
    return ids.astype(np.int32), tokens


@dataclass(frozen=True)
class VariableCells:
    """One variable's cells, one per unit of :attr:`RowIndex.units`.

    Attributes
    ----------
    tokens
        The variable's tokens by id (:func:`row_tokens`); ``same`` maps each id to the id of the
        first equal token (``2`` and ``2.0`` are equal), the identity a set of tokens uses.
    start
        Per unit, where its entries begin (``start[u]:start[u + 1]``; none: no coder coded it).
    entry_coder, entry_token
        Per entry, the coder (position in :attr:`RowIndex.coders`) and the token of that coder's
        latest row for the unit; a unit's entries in the order of its coders' first rows.
    kind
        Per unit, the code of its kind of disagreement in
        :data:`coderel.adjudicate.cell_table.KINDS` (0: the coders agree, or no coder coded it).
    token
        Per unit, the token id that stands for the cell where the coders agree: the latest row
        of the cell's first coder (as a set of the cell's tokens keeps it); -1 without coders.
    """

    variable: Variable
    coders: Sequence[str]
    tokens: list[Token]
    same: np.ndarray
    start: np.ndarray
    entry_coder: np.ndarray
    entry_token: np.ndarray
    kind: np.ndarray
    token: np.ndarray

    @property
    def per_unit(self) -> np.ndarray:
        """How many coders coded each unit."""
        return np.diff(self.start)

    def cell_tokens(self, u: int) -> dict[str, Token]:
        """Unit ``u``'s token per coder, coders in the order of their first rows."""
        a, b = int(self.start[u]), int(self.start[u + 1])
        coders, tokens = self.coders, self.tokens
        return {
            coders[c]: tokens[t]
            for c, t in zip(
                self.entry_coder[a:b].tolist(), self.entry_token[a:b].tolist(), strict=True
            )
        }


def variable_cells(var: Variable, ix: RowIndex) -> VariableCells:
    """The cells of ``var`` over ``ix``'s units (see :class:`VariableCells`)."""
    n_units = len(ix.units)
    rows = ix.rows_of.get(var.name, np.zeros(0, dtype=np.int64))
    rows = rows[ix.unit[rows] >= 0]
    ids, tokens = row_tokens(var, ix, rows)
    # equal tokens share the id of the first of them (a dict folds them as a set does)
    first_equal: dict[Token, int] = {}
    same = np.array([first_equal.setdefault(t, i) for i, t in enumerate(tokens)], dtype=np.int32)
    unit, coder = ix.unit[rows], ix.coder[rows]
    n_coders = max(len(ix.coders), 1)
    key = unit * n_coders + coder
    by_key = np.argsort(key, kind="stable")  # rows of a key stay in row order
    sorted_key = key[by_key]
    edge = sorted_key[1:] != sorted_key[:-1]
    run_first = by_key[np.r_[True, edge]] if len(key) else by_key
    run_last = by_key[np.r_[edge, True]] if len(key) else by_key
    run_key = key[run_first]
    run_unit = run_key // n_coders
    # a unit's entries in the order of its coders' first rows
    order = np.lexsort((run_first, run_unit))
    entry_unit = run_unit[order]
    entry_coder = (run_key % n_coders)[order].astype(np.int32)
    entry_token = ids[run_last[order]]
    del by_key, sorted_key, edge, run_first, run_last, run_key, run_unit, order, key
    counts = np.bincount(entry_unit, minlength=n_units)
    start = np.zeros(n_units + 1, dtype=np.int64)
    np.cumsum(counts, out=start[1:])
    coded = counts > 0
    token = np.full(n_units, -1, dtype=np.int32)
    token[coded] = entry_token[start[:-1][coded]]
    # more than one distinct token (as a set sees them): an entry unlike its unit's first; and
    # whether one of them says "does not apply"
    entry_same = same[entry_token]
    unlike = entry_same != same[np.maximum(token, 0)][entry_unit]
    differ = np.bincount(entry_unit, weights=unlike, minlength=n_units) > 0
    has_na = np.bincount(entry_unit, weights=(entry_same == NA_ID), minlength=n_units) > 0
    blank = same[np.maximum(token, 0)] == BLANK_ID
    kind = np.where(differ, np.where(has_na, 2, 1), np.where(coded & blank, 3, 0))
    return VariableCells(
        variable=var,
        coders=ix.coders,
        tokens=tokens,
        same=same,
        start=start,
        entry_coder=entry_coder,
        entry_token=entry_token,
        kind=kind.astype(np.int8),
        token=token,
    )


__all__ = ["BLANK_ID", "NA_ID", "RowIndex", "VariableCells", "row_index", "row_tokens"]
