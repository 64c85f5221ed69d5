"""Statuses of a merged cell, rules, and the record of an adjudicated cell."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal, get_args

Status = Literal[
    "agreed",
    "within_tolerance",
    "majority",
    "adjudicated",
    "single",
    "unresolved",
    "not_applicable",
]
STATUSES: tuple[str, ...] = get_args(Status)
#: Statuses whose final value counts as settled.
SETTLED: tuple[str, ...] = ("agreed", "within_tolerance", "majority", "adjudicated", "single")
STATUS_SUFFIX = "_status"
MISSING_SUFFIX = "_missing"
SPREAD_SEPARATOR = "__"

#: What each status means, for the data dictionary and the documentation.
STATUS_MEANINGS: dict[str, str] = {
    "agreed": "every coder who coded the unit gave this value",
    "within_tolerance": "the coders' numbers lie within the variable's tolerance; the value is "
    "their median",
    "majority": "more than half of the coders gave this value (rule 'majority')",
    "adjudicated": "an adjudicator's decision; empty means judged not applicable",
    "single": "only one coder coded the unit",
    "unresolved": "coders disagree and no decision settled it; the value is empty",
    "not_applicable": "the variable does not apply (applies_when) for every coder",
}


@dataclass(frozen=True)
class AdjudicatedCell:
    """One cell settled by a decision, for the audit log: never holds narrative text."""

    unit: str
    variable: str
    values: Mapping[str, str]
    decision: str
    value: Any
    adjudicator: str | None
    note: str | None
    cell: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "unit": self.unit,
            "variable": self.variable,
            "coders": dict(self.values),
            "decision": self.decision,
            "value": self.value,
            "adjudicator": self.adjudicator,
            "note": self.note,
            "cell": self.cell,
        }
