"""Every cell's status and final token, one variable at a time, over its per-unit summary.

:func:`coderel.merge.cells.decide_cell` defines the status of one cell. Here the same statuses are
reached for a whole variable from the cells' kinds of disagreement, worked out on arrays by
:func:`coderel.merge.summary.variable_cells`: a cell the coders agree on takes its one token
without a set of its tokens being made, a disagreement without a decision stays ``unresolved``
without a call of the rules when only unanimity settles a cell, and only the cells a decision, a
majority or a tolerance may settle go through :func:`coderel.adjudicate.rules.settle`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from coderel.adjudicate import Decision, Token
from coderel.adjudicate.rules import Settling, settle
from coderel.merge.result import STATUSES
from coderel.merge.summary import NA_ID, VariableCells

#: Status codes: positions in :data:`coderel.merge.result.STATUSES`.
STATUS_CODE = {s: i for i, s in enumerate(STATUSES)}


@dataclass(frozen=True)
class Settled:
    """One variable's cells settled: per unit a status code (:data:`STATUS_CODE`) and the id of
    its final token in ``tokens`` (-1: none), and the units where a decision was used."""

    status: np.ndarray
    final: np.ndarray
    tokens: list[Token]
    used: np.ndarray

    def statuses(self) -> list[str]:
        return [STATUSES[s] for s in self.status.tolist()]

    def finals(self) -> list[Token | None]:
        tokens = self.tokens
        return [None if t < 0 else tokens[t] for t in self.final.tolist()]


def settle_cells(
    cells: VariableCells, decisions: Mapping[int, Decision], settling: Settling
) -> Settled:
    """Statuses and final tokens of one variable's cells, and where a decision was used.

    ``decisions``: unit position -> a usable decision. Each cell gets what
    :func:`coderel.merge.cells.decide_cell` gives it.
    """
    var = cells.variable
    n = len(cells.kind)
    per_unit = cells.per_unit
    coded = per_unit > 0
    status = np.full(n, STATUS_CODE["unresolved"], dtype=np.int8)
    final = np.full(n, -1, dtype=np.int32)
    # the coders agree (or all find the variable does not apply)
    agree = coded & (cells.kind == 0)
    token = cells.token
    not_applicable = agree & (cells.same[np.maximum(token, 0)] == NA_ID)
    status[not_applicable] = STATUS_CODE["not_applicable"]
    settled = agree & ~not_applicable
    status[settled] = np.where(per_unit[settled] == 1, STATUS_CODE["single"], STATUS_CODE["agreed"])
    final[settled] = token[settled]
    tokens = list(cells.tokens)
    is_open = coded & (cells.kind != 0)
    used = np.array(sorted(u for u in decisions if is_open[u]), dtype=np.int64)
    for u in used.tolist():
        status[u] = STATUS_CODE["adjudicated"]
        final[u] = len(tokens)
        tokens.append(decisions[u].token)
    if settling.rule != "unanimous" or var.name in settling.tolerance:
        is_open[used] = False
        for u in np.flatnonzero(is_open).tolist():
            outcome = settle(var, cells.cell_tokens(u), settling)
            if outcome is None:
                continue
            status[u] = STATUS_CODE[outcome[0]]
            if outcome[0] != "not_applicable":
                final[u] = len(tokens)
                tokens.append(outcome[1])
    return Settled(status, final, tokens, used)


__all__ = ["STATUS_CODE", "Settled", "settle_cells"]
