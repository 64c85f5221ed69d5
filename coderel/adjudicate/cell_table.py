"""Every cell's tokens grouped once, with each cell's kind of disagreement worked out on arrays.

A cell is one unit x one variable (see :mod:`coderel.adjudicate`). :func:`cell_table` reduces each
row of the long table to its token once, groups the rows by cell with numpy and, from integer ids
of the tokens, counts per cell the coders, the distinct tokens and whether one of them says the
variable does not apply: :func:`coderel.adjudicate.tokens.classify` for every cell at once.
A cell's tokens per coder (a dict, as :func:`cell_tokens` gives them for every cell)
are made only for the cells that need them (the disagreements, the decided cells).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
import pandas as pd

from coderel.adjudicate.tokens import BLANK_TOKEN, Kind, Token, token_rows
from coderel.codings import Codings

#: Kinds of disagreement by their code in :attr:`CellTable.kind_code` (0: the coders agree).
KINDS: tuple[Kind | None, ...] = (None, "values differ", "applies?", "no value")


@dataclass(frozen=True)
class CellTable:
    """The cells of a long table in the order of their first row.

    Attributes
    ----------
    unit, variable
        Per cell, its unit and variable (cells of a variable the codebook lacks are left out).
    kind_code
        Per cell, the code of its kind of disagreement in :data:`KINDS` (0 where coders agree).
    coders
        Per cell, how many coders have a row for it.
    first
        Per cell, the row whose token stands for the cell where every coder gave the same token
        (the latest row of the cell's first coder, as a set of the cell's tokens keeps it).
    """

    unit: list[str]
    variable: list[str]
    kind_code: np.ndarray
    coders: np.ndarray
    first: np.ndarray
    _row_coder: list[str] = field(repr=False)
    _row_token: list[Token | None] = field(repr=False)
    _rows: list[int] = field(repr=False)
    _start: list[int] = field(repr=False)
    _end: list[int] = field(repr=False)

    def __len__(self) -> int:
        return len(self.unit)

    def kind(self, i: int) -> Kind | None:
        return KINDS[int(self.kind_code[i])]

    def tokens(self, i: int) -> dict[str, Token]:
        """Cell ``i``'s token per coder, coders in the order of their rows (a coder's later row
        for the same cell replaces the earlier token)."""
        coder, token = self._row_coder, self._row_token
        return {coder[r]: token[r] for r in self._rows[self._start[i] : self._end[i]]}

    def token(self, i: int) -> Token:
        """The token every coder of cell ``i`` gave (meaningful where :attr:`kind_code` is 0)."""
        return self._row_token[int(self.first[i])]  # type: ignore[return-value]

    @cached_property
    def index(self) -> dict[tuple[str, str], int]:
        """``(unit, variable)`` -> cell."""
        return {key: i for i, key in enumerate(zip(self.unit, self.variable, strict=True))}

    def items(self) -> Iterator[tuple[tuple[str, str], dict[str, Token]]]:
        for i in range(len(self)):
            yield (self.unit[i], self.variable[i]), self.tokens(i)


def cell_table(codings: Codings) -> CellTable:
    """The cells of ``codings`` with their kinds of disagreement (see the module docstring)."""
    f = codings.frame
    if f.empty:
        empty = np.zeros(0, dtype=np.int64)
        return CellTable([], [], empty, empty, empty, [], [], [], [], [])
    units, coders, names, tokens = token_rows(codings)
    n = len(tokens)
    unit_codes, _ = pd.factorize(f["unit"], use_na_sentinel=False)
    name_codes, name_ids = pd.factorize(f["variable"], use_na_sentinel=False)
    coder_codes, coder_ids = pd.factorize(f["coder"], use_na_sentinel=False)
    cell = unit_codes.astype(np.int64) * max(len(name_ids), 1) + name_codes
    order = np.argsort(cell, kind="stable")
    ordered = cell[order]
    new_cell = np.r_[True, ordered[1:] != ordered[:-1]]
    starts = np.flatnonzero(new_cell)
    ends = np.r_[starts[1:], n]
    group = np.cumsum(new_cell) - 1  # each sorted row's cell
    # A coder's latest row in each cell: the last of each run of (cell, coder) in row order.
    n_coders = max(len(coder_ids), 1)
    key = group * n_coders + coder_codes[order]
    by_key = np.argsort(key, kind="stable")
    sorted_key = key[by_key]
    last = np.r_[sorted_key[1:] != sorted_key[:-1], True]
    kept_key = sorted_key[last]
    kept_row = order[by_key[last]]
    kept_group = kept_key // n_coders
    # Tokens as integer ids: equal tokens (as a set sees them) share one id.
    ids: dict[Any, int] = {t: i for i, t in enumerate(dict.fromkeys(tokens))}
    token_id = np.fromiter(map(ids.__getitem__, tokens), dtype=np.int64, count=n)
    is_na = np.zeros(len(ids), dtype=bool)
    for t, i in ids.items():
        is_na[i] = t is not None and t[0] == "na"
    kept_token = token_id[kept_row]
    n_groups = len(starts)
    pairs = np.unique(kept_group * len(ids) + kept_token)
    distinct = np.bincount(pairs // len(ids), minlength=n_groups)
    na_rows = is_na[kept_token].astype(np.float64)
    has_na = np.bincount(kept_group, weights=na_rows, minlength=n_groups) > 0
    per_cell = np.bincount(kept_group, minlength=n_groups)
    # the latest row of each cell's first coder
    first_key = np.arange(n_groups) * n_coders + coder_codes[order[starts]]
    first_row = kept_row[np.searchsorted(kept_key, first_key)]
    blank = token_id[first_row] == ids.get(BLANK_TOKEN, -1)
    kind = np.where(distinct > 1, np.where(has_na, 2, 1), np.where(blank, 3, 0))
    # cells in the order of their first row; a variable the codebook lacks has no tokens
    shown = np.argsort(order[starts], kind="stable")
    shown = shown[[tokens[r] is not None for r in order[starts[shown]].tolist()]]
    rows = order.tolist()
    first_rows = order[starts[shown]].tolist()
    return CellTable(
        unit=[units[r] for r in first_rows],
        variable=[names[r] for r in first_rows],
        kind_code=kind[shown],
        coders=per_cell[shown],
        first=first_row[shown],
        _row_coder=coders,
        _row_token=tokens,
        _rows=rows,
        _start=starts[shown].tolist(),
        _end=ends[shown].tolist(),
    )


def cell_tokens(codings: Codings) -> dict[tuple[str, str], dict[str, Token]]:
    """Every cell's tokens per coder, for coders who have a row for that unit and variable.

    Cells come in the order of their first row, each cell's coders in the order of their rows (a
    coder's later row for the same cell replaces the earlier token).
    """
    return dict(cell_table(codings).items())


__all__ = ["KINDS", "CellTable", "cell_table", "cell_tokens"]
