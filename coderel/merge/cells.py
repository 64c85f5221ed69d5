"""Deciding one cell: its status, its final token, and whether a decision still holds."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from coderel.adjudicate import Decision, Token, classify
from coderel.adjudicate.rules import Settling, settle
from coderel.codebook import MULTI_SEPARATOR, Variable


def final_value(var: Variable, token: Token) -> Any:
    """The value a token puts into the value column: ``None`` for not applicable, blank and a
    missing code (its code goes to the ``<variable>_missing`` column, see :func:`final_missing`)."""
    kind, value = token
    if kind in ("na", "blank", "missing"):
        return None
    if var.multiple:
        if not value:  # the coded empty set: its code, as the codebook gives it
            return str(var.none_code) if var.none is not None else ""
        return MULTI_SEPARATOR.join(str(c) for c in value)
    return value


def final_missing(token: Token | None) -> Any:
    """The missing code a final token holds, else ``None``."""
    return token[1] if token is not None and token[0] == "missing" else None


def decide_cell(
    var: Variable,
    tokens: Mapping[str, Token],
    settling: Settling,
    decision: Decision | None,
) -> tuple[str, Token | None, bool]:
    """Status, final token and whether a decision was used, for one cell.

    A decision settles a cell the coders disagree on; otherwise the rules of
    :func:`coderel.adjudicate.rules.settle` (the same ones that choose the adjudication list's
    rows) settle it, or it stays ``unresolved``.
    """
    if not tokens:
        return "unresolved", None, False
    if decision is not None and classify(tokens) is not None:
        return "adjudicated", decision.token, True
    settled = settle(var, tokens, settling)
    if settled is None:
        return "unresolved", None, False
    status, token = settled
    return status, (None if status == "not_applicable" else token), False


#: Why a decision marked in its list's ``check`` cell is not used.
MARKED = (
    "it is marked for checking on the list (the coders' values changed after it was made); "
    "it is used once its 'check' cell is cleared"
)


def stale_reason(
    decision: Decision, tokens: Mapping[str, Token], shown: Mapping[str, str], known_unit: bool
) -> str | None:
    """Why a decision does not match the current disagreement, or ``None`` when it does."""
    if not known_unit:
        return "the unit is not in the data any more"
    if not tokens or classify(tokens) is None:
        return "the coders no longer disagree on this cell"
    if decision.values is not None:
        recorded = {c: v for c, v in decision.values.items() if v}
        if recorded != dict(shown):
            return "the coders' values changed since the decision was made"
    if decision.check:
        return MARKED
    return None
