"""Deciding one cell: its status, its final token, and whether a decision still holds."""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from typing import Any

from coderel.adjudicate import NA_TOKEN, Decision, Token, classify
from coderel.codebook import MULTI_SEPARATOR, Variable


def final_value(var: Variable, token: Token) -> Any:
    """The value a token puts into the dataset (``None`` for not applicable or blank)."""
    kind, value = token
    if kind in ("na", "blank"):
        return None
    if kind == "value" and var.multiple:
        return MULTI_SEPARATOR.join(str(c) for c in value)
    if kind == "missing" and var.multiple:
        return str(value)
    return value


def _majority(tokens: Mapping[str, Token]) -> Token | None:
    """The token more than half of the coders gave, if any and if it is not a blank."""
    counts = Counter(tokens.values())
    token, n = max(counts.items(), key=lambda item: item[1])
    if 2 * n <= len(tokens) or token[0] == "blank":
        return None
    return token


def decide_cell(
    tokens: Mapping[str, Token], rule: str, decision: Decision | None
) -> tuple[str, Token | None, bool]:
    """Status, final token and whether a decision was used, for one cell."""
    if not tokens:
        return "unresolved", None, False
    kind = classify(tokens)
    if decision is not None and kind is not None:
        return "adjudicated", decision.token, True
    distinct = set(tokens.values())
    if distinct == {NA_TOKEN}:
        return "not_applicable", None, False
    if kind is None:
        token = next(iter(distinct))
        return ("single" if len(tokens) == 1 else "agreed"), token, False
    if rule == "majority":
        winner = _majority(tokens)
        if winner is not None:
            return "majority", winner, False
    return "unresolved", None, False


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
    return None
