"""Every cell's status and final token, one variable at a time, over the grouped cells.

:func:`coderel.merge.cells.decide_cell` defines the status of one cell. Here the same statuses are
reached for a whole variable from the cells' kinds of disagreement, worked out once on arrays by
:func:`coderel.adjudicate.cell_table.cell_table`: a cell the coders agree on takes its one token
without a set of its tokens being made, a disagreement without a decision stays ``unresolved``
without a call of the rules when only unanimity settles a cell, and only the cells a decision, a
majority or a tolerance may settle go through :func:`coderel.adjudicate.rules.settle`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from coderel.adjudicate import NA_TOKEN, Decision, Token
from coderel.adjudicate.cell_table import CellTable
from coderel.adjudicate.rules import Settling, settle
from coderel.codebook import Variable


def cell_grid(table: CellTable, units: Sequence[str], names: Sequence[str]) -> np.ndarray:
    """Units x variables: the cell of ``table`` at each unit (``units`` order) and variable
    (``names`` order), -1 where no coder has a row for it."""
    grid = np.full((len(units), len(names)), -1, dtype=np.int64)
    if len(table):
        at_unit = {u: i for i, u in enumerate(units)}
        at_name = {n: j for j, n in enumerate(names)}
        rows = np.fromiter((at_unit[u] for u in table.unit), np.int64, len(table))
        cols = np.fromiter((at_name.get(n, -1) for n in table.variable), np.int64, len(table))
        known = cols >= 0
        grid[rows[known], cols[known]] = np.flatnonzero(known)
    return grid


def settle_variable(
    var: Variable,
    cells: Sequence[int],
    table: CellTable,
    decisions: Mapping[int, Decision],
    settling: Settling,
) -> tuple[list[str], list[Token | None], list[int]]:
    """Statuses and final tokens of one variable's cells, and where a decision was used.

    ``cells``: the variable's cell per unit (-1: no coder coded it); ``decisions``: unit position
    -> a usable decision. Each cell gets what :func:`coderel.merge.cells.decide_cell` gives it.
    """
    kinds = table.kind_code.tolist()
    coders = table.coders.tolist()
    may_settle = settling.rule != "unanimous" or var.name in settling.tolerance
    statuses: list[str] = []
    finals: list[Token | None] = []
    used: list[int] = []
    for u, c in enumerate(cells):
        if c < 0:
            statuses.append("unresolved")
            finals.append(None)
        elif not kinds[c]:  # the coders agree (or all find the variable does not apply)
            token = table.token(c)
            if token == NA_TOKEN:
                statuses.append("not_applicable")
                finals.append(None)
            else:
                statuses.append("single" if coders[c] == 1 else "agreed")
                finals.append(token)
        elif u in decisions:
            statuses.append("adjudicated")
            finals.append(decisions[u].token)
            used.append(u)
        else:
            settled = settle(var, table.tokens(c), settling) if may_settle else None
            if settled is None:
                statuses.append("unresolved")
                finals.append(None)
            else:
                statuses.append(settled[0])
                finals.append(None if settled[0] == "not_applicable" else settled[1])
    return statuses, finals, used


__all__ = ["cell_grid", "settle_variable"]
