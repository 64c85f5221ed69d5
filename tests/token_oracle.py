"""Each cell's tokens by their definition, one row at a time: the oracle of the array paths of
:mod:`coderel.adjudicate` (tests/test_list_reader.py, tests/test_cell_table.py)."""

from __future__ import annotations

from coderel.adjudicate.tokens import _as_code, token_of
from coderel.codings import Codings


def tokens_row_by_row(codings: Codings) -> dict:
    """The tokens as their definition gives them, one row at a time (:func:`token_of`, codes as
    the codebook writes them), per (unit, variable) cell and coder; a coder's later row for a
    cell replaces the earlier one."""
    cb = codings.codebook
    cells: dict = {}
    for row in codings.frame.itertuples(index=False):
        if row.variable not in cb:
            continue
        var = cb.variable(row.variable)
        token = token_of(row.value, row.missing, row.applies)
        if token[0] == "missing":
            token = ("missing", _as_code(var, token[1], var.missing_codes))
        elif token[0] == "value" and isinstance(token[1], float) and var.is_categorical:
            token = ("value", _as_code(var, token[1], var.codes))
        cells.setdefault((row.unit, row.variable), {})[row.coder] = token
    return cells
