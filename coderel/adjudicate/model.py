"""The list: its rows, its sheets and columns, and the list as one table."""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from coderel.adjudicate.decisions import parse_decision
from coderel.adjudicate.rules import Settling
from coderel.codebook import Codebook
from coderel.problems import Problems

#: Sheet names of the adjudication workbook.
MAIN_SHEET = "to decide"
RETIRED_SHEET = "no longer needed"
SUMMARY_SHEET = "summary"
ABOUT_SHEET = "about"
LISTS_SHEET = "lists"

#: Fixed column names (coder and text columns sit between ``kind`` and ``decision``).
FIXED_COLUMNS: tuple[str, ...] = (
    "unit",
    "variable",
    "kind",
    "decision",
    "note",
    "adjudicator",
    "check",
    "key",
    "reason",
    "list",
)
KEY_SEPARATOR = "|"
#: What follows a coder's name in its column header when the name is a fixed column's.
CODER_SUFFIX = " (coder)"
#: What the ``check`` column says on a row whose decision was made on other coders' values.
STALE_CHECK = "coders' values changed since this decision: confirm it by clearing this cell"


@dataclass(frozen=True)
class AdjudicationRow:
    """One row of the list: a cell, the coders' values as shown, and what the adjudicator wrote."""

    unit: str
    variable: str
    kind: str
    values: Mapping[str, str]
    decision: str | None = None
    note: str | None = None
    adjudicator: str | None = None
    reason: str | None = None
    #: set while a decision waits to be re-confirmed (:data:`STALE_CHECK`); cleared by the
    #: adjudicator. A decision with a check is not used by ``merge``.
    check: str | None = None
    #: what the row holds in columns an adjudicator added (header -> text), kept on rewrite
    extra: Mapping[str, str] = field(default_factory=dict)

    @property
    def key(self) -> str:
        return f"{self.unit}{KEY_SEPARATOR}{self.variable}"

    @property
    def decided(self) -> bool:
        return bool(self.decision and str(self.decision).strip())

    @property
    def to_check(self) -> bool:
        """A decision waiting to be re-confirmed (its ``check`` cell is filled)."""
        return self.decided and bool(self.check and str(self.check).strip())

    def to_dict(self) -> dict[str, Any]:
        return {
            "unit": self.unit,
            "variable": self.variable,
            "kind": self.kind,
            "values": dict(self.values),
            "decision": self.decision,
            "note": self.note,
            "adjudicator": self.adjudicator,
            "check": self.check,
            "reason": self.reason,
            "extra": dict(self.extra),
        }


@dataclass(frozen=True)
class Adjudication:
    """The adjudication list: open and decided rows, and rows that are no longer needed."""

    codebook: Codebook
    coders: tuple[str, ...]
    rows: tuple[AdjudicationRow, ...]
    retired: tuple[AdjudicationRow, ...] = ()
    text_columns: tuple[str, ...] = ()
    narratives: Mapping[str, Mapping[str, str]] = field(default_factory=dict, repr=False)
    problems: Problems = field(default_factory=Problems)
    kept: int = 0
    added: int = 0
    moved: int = 0
    #: the rule and tolerances that chose the rows (cells they settle are not listed)
    settling: Settling = field(default_factory=Settling)
    #: columns an adjudicator added to the list, kept (after coderel's own) when it is rewritten
    extra_columns: tuple[str, ...] = ()

    def summary(self) -> pd.DataFrame:
        """Per variable (codebook order): disagreements, decided, open, to check, no longer needed.

        Only valid decisions that are not waiting to be re-confirmed count as decided; a cell with
        an invalid decision or a decision to check is still open (``to check`` counts the latter).
        """
        out = []
        listed = Counter(r.variable for r in self.rows)
        retired = Counter(r.variable for r in self.retired)
        decided_rows: dict[str, list[AdjudicationRow]] = {}
        for r in self.rows:
            if r.decided:
                decided_rows.setdefault(r.variable, []).append(r)
        for var in self.codebook.variables:
            rows = decided_rows.get(var.name, [])
            # A decision that is not a valid value (a bad-decision problem) leaves the cell open.
            valid = [r for r in rows if parse_decision(var, r.decision)[1] is None]
            check = sum(r.to_check for r in valid)
            decided = len(valid) - check
            out.append(
                {
                    "variable": var.name,
                    "disagreements": listed[var.name],
                    "decided": decided,
                    "open": listed[var.name] - decided,
                    "to_check": check,
                    "no_longer_needed": retired[var.name],
                }
            )
        columns = ["variable", "disagreements", "decided", "open", "to_check", "no_longer_needed"]
        return pd.DataFrame(out, columns=columns)

    def to_frame(self) -> pd.DataFrame:
        """The list as one table (both sheets; ``list`` tells which), without narrative text."""
        return rows_frame(
            self.rows, self.retired, self.coders, text_columns=(), extra_columns=self.extra_columns
        )

    def to_dict(self) -> dict[str, Any]:
        summary = self.summary()
        return {
            "codebook": {"title": self.codebook.title, "version": self.codebook.version},
            "coders": list(self.coders),
            **self.settling.to_dict(),
            "disagreements": len(self.rows),
            "decided": int(summary["decided"].sum()),
            "open": int(summary["open"].sum()),
            "to_check": int(summary["to_check"].sum()),
            "no_longer_needed": len(self.retired),
            "kept": self.kept,
            "added": self.added,
            "moved": self.moved,
            "kept_columns": list(self.extra_columns),
            "per_variable": summary.to_dict(orient="records"),
            "rows": [r.to_dict() for r in self.rows],
            **self.problems.to_dict(),
        }


# ---- tables --------------------------------------------------------------------------------
def coder_column(coder: str) -> str:
    """The column of a coder: the coder's name, unless it is one of the fixed column names."""
    return f"{coder}{CODER_SUFFIX}" if coder in FIXED_COLUMNS else coder


def main_columns(
    coders: Sequence[str], text_columns: Sequence[str], extra_columns: Sequence[str] = ()
) -> list[str]:
    """Columns of the main list: the header convention :mod:`coderel.adjudicate.list_headers`
    relies on.

    ``unit``, ``variable``, ``kind``; one column per coder; the text columns; ``decision``,
    ``note``, ``adjudicator``, ``check``, ``key``; then the columns an adjudicator added.
    """
    return [
        "unit",
        "variable",
        "kind",
        *[coder_column(c) for c in coders],
        *text_columns,
        "decision",
        "note",
        "adjudicator",
        "check",
        "key",
        *extra_columns,
    ]


def retired_columns(coders: Sequence[str], extra_columns: Sequence[str] = ()) -> list[str]:
    return [
        "unit",
        "variable",
        "kind",
        *[coder_column(c) for c in coders],
        "decision",
        "note",
        "adjudicator",
        "reason",
        "key",
        *extra_columns,
    ]


def row_record(
    row: AdjudicationRow, coders: Sequence[str], texts: Mapping[str, str] | None = None
) -> dict[str, Any]:
    record: dict[str, Any] = {"unit": row.unit, "variable": row.variable, "kind": row.kind}
    for c in coders:
        record[coder_column(c)] = row.values.get(c, "")
    for column, text in (texts or {}).items():
        record[column] = text
    record.update(
        decision=row.decision,
        note=row.note,
        adjudicator=row.adjudicator,
        check=row.check,
        reason=row.reason,
        key=row.key,
    )
    for column, text in row.extra.items():
        record.setdefault(column, text)
    return record


def retired_coders(adjudication: Adjudication) -> list[str]:
    coders = list(adjudication.coders)
    for r in adjudication.retired:
        coders.extend(c for c in r.values if c not in coders)
    return coders


def rows_frame(
    rows: Sequence[AdjudicationRow],
    retired: Sequence[AdjudicationRow],
    coders: Sequence[str],
    *,
    text_columns: Sequence[str],
    narratives: Mapping[str, Mapping[str, str]] | None = None,
    extra_columns: Sequence[str] = (),
) -> pd.DataFrame:
    """Both lists in one table (the CSV form): main columns plus ``reason`` and ``list``, then
    the columns an adjudicator added."""
    all_coders = list(coders)
    for r in retired:
        all_coders.extend(c for c in r.values if c not in all_coders)
    columns = main_columns(all_coders, text_columns)
    columns += ["reason", "list", *extra_columns]
    records = []
    for r in rows:
        texts = {c: (narratives or {}).get(r.unit, {}).get(c, "") for c in text_columns}
        records.append({**row_record(r, all_coders, texts), "list": MAIN_SHEET})
    for r in retired:
        records.append({**row_record(r, all_coders), "list": RETIRED_SHEET})
    return pd.DataFrame(records, columns=columns)


def column_letter(index: int) -> str:
    from openpyxl.utils import get_column_letter

    return get_column_letter(index)
