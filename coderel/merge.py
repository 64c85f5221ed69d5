"""The reconciled dataset: one final value per unit and variable, and how it was reached.

Every unit that any coder coded becomes one row. For each variable the dataset holds a value column
(named as the variable) and a status column ``<variable>_status``:

``agreed``
    every coder who coded the unit gave the same value (a missing code such as 99 counts as a value
    like any other);
``majority``
    only under ``rule="majority"``: more than half of the coders who coded the unit gave the same
    value (a tie, or a plurality short of half, is ``unresolved``);
``adjudicated``
    an adjudicator's decision settled the cell (see :mod:`coderel.adjudicate`);
``single``
    only one coder coded the unit;
``unresolved``
    the coders disagree (or all left the cell blank) and no decision settled it; the value is empty;
``not_applicable``
    every coder's own ``applies_when`` condition says the variable does not apply; value empty.

An empty value under ``majority`` or ``adjudicated`` means the majority or the adjudicator judged
that the variable does not apply. A decision is used only while it matches the current
disagreement: a decision for a cell the coders now agree on, for a unit no longer in the data, or
made when the coders' values were different (as recorded on the list) is a ``stale-decision``
warning and is not used. Run ``coderel adjudicate`` again to carry decisions over to the current
list.

Value columns hold codes exactly as in the codebook: whole-number codes as a nullable integer
column, text codes as text (a variable mixing number and text codes as text throughout), numbers
of interval and ratio variables as floats (whole numbers for ``integer`` variables), missing codes
as they are. A multi-select value is its codes joined with
``;`` in codebook order (``1;3``) in every form, csv, xlsx and parquet alike; :func:`spread` adds
one 0/1 column ``<variable>__<code>`` per category.
"""

from __future__ import annotations

import os
from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, get_args

import pandas as pd

from coderel.adjudicate import (
    NA_TOKEN,
    Decision,
    Decisions,
    Token,
    cell_tokens,
    classify,
    display_token,
    read_decisions,
    sorted_units,
)
from coderel.codebook import MULTI_SEPARATOR, Codebook, Variable
from coderel.codings import Codings, SourceFile, condition_holds
from coderel.errors import UsageError
from coderel.problems import Problems

Status = Literal["agreed", "majority", "adjudicated", "single", "unresolved", "not_applicable"]
STATUSES: tuple[str, ...] = get_args(Status)
Rule = Literal["unanimous", "majority"]
RULES: tuple[str, ...] = get_args(Rule)
STATUS_SUFFIX = "_status"
SPREAD_SEPARATOR = "__"

#: What each status means, for the data dictionary and the documentation.
STATUS_MEANINGS: dict[str, str] = {
    "agreed": "every coder who coded the unit gave this value",
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


@dataclass(frozen=True)
class MergeResult:
    """The reconciled dataset with its statuses, unresolved cells and adjudicated cells.

    Attributes
    ----------
    frame
        One row per unit (natural order of unit IDs): the codebook's unit column, then per variable
        its value column and ``<variable>_status``.
    rule
        ``"unanimous"`` or ``"majority"``.
    status_counts
        variable -> status -> number of units, every status listed (zeros included).
    unresolved
        ``(unit, variable)`` of every unresolved cell, in the frame's order.
    adjudicated
        Every cell a decision settled.
    problems
        ``stale-decision`` warnings and the decisions file's ``bad-decision`` errors.
    unresolved_values
        For each entry of ``unresolved``, the coders' values as shown on the adjudication list.
    """

    frame: pd.DataFrame
    rule: str
    codebook: Codebook
    coders: tuple[str, ...]
    status_counts: Mapping[str, Mapping[str, int]]
    unresolved: tuple[tuple[str, str], ...]
    adjudicated: tuple[AdjudicatedCell, ...]
    problems: Problems = field(default_factory=Problems)
    sources: tuple[SourceFile, ...] = ()
    decisions_source: SourceFile | None = None
    unresolved_values: tuple[Mapping[str, str], ...] = ()

    @property
    def units(self) -> int:
        return len(self.frame)

    @property
    def cells(self) -> int:
        """Units x variables: what the status counts add up to."""
        return len(self.frame) * len(self.codebook.variables)

    def to_frame(self, *, spread: bool = False) -> pd.DataFrame:
        """The dataset (a copy); ``spread=True`` adds 0/1 columns for multi-select variables."""
        return spread_multiselect(self.frame, self.codebook) if spread else self.frame.copy()

    def status_frame(self) -> pd.DataFrame:
        """Tidy counts: one row per variable and status."""
        rows = [
            {"variable": v, "status": s, "n": n}
            for v, counts in self.status_counts.items()
            for s, n in counts.items()
        ]
        return pd.DataFrame(rows, columns=["variable", "status", "n"])

    def labels_frame(self, *, spread: bool = False) -> pd.DataFrame:
        """The dataset with category labels instead of codes (the xlsx ``labels`` sheet)."""
        return labels_frame(self.to_frame(spread=spread), self.codebook)

    def totals(self) -> dict[str, int]:
        """Cells per status over all variables."""
        out = dict.fromkeys(STATUSES, 0)
        for counts in self.status_counts.values():
            for s, n in counts.items():
                out[s] += n
        return out

    def unresolved_records(self) -> list[dict[str, Any]]:
        """Every unresolved cell: unit, variable and the coders' values (codes, never text)."""
        values = self.unresolved_values or tuple({} for _ in self.unresolved)
        return [
            {"unit": u, "variable": v, "coders": dict(shown)}
            for (u, v), shown in zip(self.unresolved, values, strict=True)
        ]

    def to_dict(self) -> dict[str, Any]:
        return {
            "rule": self.rule,
            "units": self.units,
            "variables": len(self.codebook.variables),
            "cells": self.cells,
            "coders": list(self.coders),
            "totals": self.totals(),
            "status_counts": {v: dict(c) for v, c in self.status_counts.items()},
            "unresolved": self.unresolved_records(),
            "adjudicated": [a.to_dict() for a in self.adjudicated],
            **self.problems.to_dict(),
        }


# ---- deciding one cell ---------------------------------------------------------------------
def _final_value(var: Variable, token: Token) -> Any:
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


def _decide(
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


def _stale_reason(
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


# ---- columns -------------------------------------------------------------------------------
def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def value_column(var: Variable, values: Sequence[Any]) -> pd.Series:
    """A variable's final values as one column of a stable type (see the module docstring)."""
    present = [v for v in values if v is not None]
    if var.multiple or not all(_is_number(v) for v in present):
        return pd.Series([None if v is None else str(v) for v in values], dtype=object)
    whole = var.integer or (var.is_categorical and all(isinstance(v, int) for v in present))
    if whole and all(float(v).is_integer() for v in present):
        return pd.Series([None if v is None else int(v) for v in values], dtype="Int64")
    return pd.Series([float("nan") if v is None else float(v) for v in values], dtype="float64")


def status_column(name: str) -> str:
    return f"{name}{STATUS_SUFFIX}"


def output_columns(codebook: Codebook) -> list[str]:
    """Columns of the dataset: unit column, then value and status column per variable."""
    cols = [codebook.unit]
    for var in codebook.variables:
        cols += [var.name, status_column(var.name)]
    if len(set(cols)) != len(cols):
        raise UsageError(
            "a status column '<variable>_status' clashes with a variable or the unit column; "
            "rename the variable in the codebook"
        )
    return cols


def _check_skip_logic(
    cb: Codebook,
    units: Sequence[str],
    tokens_by_var: Mapping[str, Sequence[Token | None]],
    statuses_by_var: Mapping[str, Sequence[str]],
    problems: Problems,
) -> None:
    """Warn where a conditional variable's final value contradicts its condition's final value.

    Each coder's sheet obeys the skip logic on its own, but final values are settled cell by cell
    (an adjudicator may drop code 3 from ``actions`` yet keep a ``spray_worked`` value), so the
    merged row is checked once more.
    """
    for var in cb.variables:
        cond = var.applies_when
        if cond is None or cond.variable not in cb:
            continue
        cond_var = cb.variable(cond.variable)
        for i, unit in enumerate(units):
            cond_token = tokens_by_var[cond.variable][i]
            if cond_token is None or cond_token[0] != "value":
                continue  # condition unresolved, blank or missing: nothing to compare
            holds = condition_holds(cond_var, cond_token[1], cond.includes)
            token = tokens_by_var[var.name][i]
            has_value = token is not None and token[0] in ("value", "missing")
            is_na = statuses_by_var[var.name][i] == "not_applicable" or (
                token is not None and token[0] == "na"
            )
            if not ((not holds and has_value) or (holds and is_na)):
                continue
            includes = ", ".join(cond_var.display(c) for c in cond.includes)
            problems.add(
                "merged-skip-logic",
                f"the final {var.name} is {'given' if has_value else 'not applicable'}, but the "
                f"final {cond.variable} {'is' if holds else 'is not'} one of {includes}",
                hint=f"settle {cond.variable} and {var.name} of this unit together (adjudication "
                "list), so that the skip logic holds",
                unit=unit,
                variable=var.name,
            )


# ---- the merge -----------------------------------------------------------------------------
def merge(
    codings: Codings,
    decisions: Decisions | str | os.PathLike[str] | None = None,
    rule: Rule = "unanimous",
) -> MergeResult:
    """Reconcile the coders' codings into one value per unit and variable.

    Parameters
    ----------
    codings
        The coders' codings (:func:`coderel.io.read.read_codings`).
    decisions
        Decisions of an adjudication list (object or path of the list), or ``None``.
    rule
        ``"unanimous"``: a cell is settled when every coder agrees; ``"majority"``: also when more
        than half of the coders who coded the unit agree. A tie is left unresolved.

    Returns
    -------
    MergeResult
        The dataset, status counts, unresolved and adjudicated cells, and problems.

    Notes
    -----
    Consensus by majority vote and adjudication of the remaining disagreements by a third person
    is the usual way of reconciling independent codings (common practice, no source).
    """
    if rule not in RULES:
        raise UsageError(f"rule must be one of {', '.join(RULES)}, not {rule!r}")
    cb = codings.codebook
    columns = output_columns(cb)
    if decisions is not None and not isinstance(decisions, Decisions):
        decisions = read_decisions(decisions, cb)
    problems = Problems()
    if decisions is not None:
        problems.extend(decisions.problems)
    tokens_by_cell = cell_tokens(codings)
    units = sorted_units(codings.units)
    unit_set = set(units)
    usable: dict[tuple[str, str], Decision] = {}
    place = {}
    if decisions is not None and decisions.source is not None:
        place["file"] = Path(decisions.source.path).name
    for (unit, name), decision in (decisions.decisions if decisions is not None else {}).items():
        if name not in cb:
            problems.add(
                "bad-decision", "a decision for a variable the codebook lacks", unit=unit, **place
            )
            continue
        tokens = tokens_by_cell.get((unit, name), {})
        var = cb.variable(name)
        shown = {c: display_token(var, t) for c, t in tokens.items()}
        reason = _stale_reason(decision, tokens, shown, unit in unit_set)
        if reason is None:
            usable[(unit, name)] = decision
            continue
        problems.add(
            "stale-decision",
            f"the decision is not used: {reason}",
            hint="run 'coderel adjudicate' again with the same output to update the list; "
            "decisions are carried over by unit and variable",
            unit=unit,
            variable=name,
            cell=decision.cell,
            sheet=None if place.get("file", "").lower().endswith(".csv") else "to decide",
            **place,
        )

    data: dict[str, Any] = {cb.unit: pd.Series(units, dtype=object)}
    status_counts: dict[str, dict[str, int]] = {}
    unresolved: list[tuple[str, str]] = []
    unresolved_values: list[dict[str, str]] = []
    adjudicated: list[AdjudicatedCell] = []
    statuses_by_var: dict[str, list[str]] = {}
    tokens_by_var: dict[str, list[Token | None]] = {}
    for var in cb.variables:
        values: list[Any] = []
        statuses: list[str] = []
        finals: list[Token | None] = []
        tokens_by_var[var.name] = finals
        for unit in units:
            tokens = tokens_by_cell.get((unit, var.name), {})
            decision = usable.get((unit, var.name))
            status, token, used = _decide(tokens, rule, decision)
            finals.append(token)
            values.append(None if token is None else _final_value(var, token))
            statuses.append(status)
            if used and decision is not None:
                adjudicated.append(
                    AdjudicatedCell(
                        unit=unit,
                        variable=var.name,
                        values={c: display_token(var, t) for c, t in tokens.items()},
                        decision=decision.text,
                        value=values[-1],
                        adjudicator=decision.adjudicator,
                        note=decision.note,
                        cell=decision.cell,
                    )
                )
        data[var.name] = value_column(var, values)
        data[status_column(var.name)] = pd.Series(statuses, dtype=object)
        counts = Counter(statuses)
        status_counts[var.name] = {s: counts.get(s, 0) for s in STATUSES}
        statuses_by_var[var.name] = statuses
    for i, unit in enumerate(units):
        for var in cb.variables:
            if statuses_by_var[var.name][i] == "unresolved":
                unresolved.append((unit, var.name))
                tokens = tokens_by_cell.get((unit, var.name), {})
                unresolved_values.append({c: display_token(var, t) for c, t in tokens.items()})
    _check_skip_logic(cb, units, tokens_by_var, statuses_by_var, problems)
    frame = pd.DataFrame(data, columns=columns)
    return MergeResult(
        frame=frame,
        rule=rule,
        codebook=cb,
        coders=tuple(codings.coders),
        status_counts=status_counts,
        unresolved=tuple(unresolved),
        unresolved_values=tuple(unresolved_values),
        adjudicated=tuple(adjudicated),
        problems=problems,
        sources=codings.sources,
        decisions_source=decisions.source if decisions is not None else None,
    )


# ---- derived tables ------------------------------------------------------------------------
def spread_column(name: str, code: Any) -> str:
    return f"{name}{SPREAD_SEPARATOR}{code}"


def spread_multiselect(frame: pd.DataFrame, codebook: Codebook) -> pd.DataFrame:
    """Add one 0/1 column ``<variable>__<code>`` per category of every multi-select variable.

    The columns follow the variable's status column. They are empty where the value is empty
    (unresolved, not applicable) or a missing code.
    """
    out = frame.copy()
    for var in codebook.variables:
        if not var.multiple or var.name not in out.columns:
            continue
        chosen: list[set[str] | None] = []
        for value in out[var.name]:
            if value is None or (isinstance(value, float) and value != value):
                chosen.append(None)
                continue
            parts = set(str(value).split(MULTI_SEPARATOR))
            if parts & {str(m) for m in var.missing_codes}:
                chosen.append(None)
            else:
                chosen.append(parts)
        position = out.columns.get_loc(status_column(var.name)) + 1
        for offset, code in enumerate(var.codes):
            flags = [None if c is None else int(str(code) in c) for c in chosen]
            out.insert(position + offset, spread_column(var.name, code), pd.array(flags, "Int64"))
    return out


def _label(var: Variable, value: Any) -> Any:
    if value is None or (isinstance(value, float) and value != value) or value is pd.NA:
        return None
    if var.multiple:
        labels = []
        for part in str(value).split(MULTI_SEPARATOR):
            code = next((c for c in (*var.codes, *var.missing_codes) if str(c) == part), part)
            labels.append(var.label_of(code) or part)
        return "; ".join(labels)
    if var.is_numeric:
        if value in var.missing_codes:
            return var.label_of(value)
        return value
    return var.label_of(value) or str(value)


def labels_frame(frame: pd.DataFrame, codebook: Codebook) -> pd.DataFrame:
    """The dataset with category and missing-code labels in place of codes."""
    out = frame.copy()
    for var in codebook.variables:
        if var.name in out.columns:
            out[var.name] = pd.Series(
                [_label(var, v) for v in out[var.name].astype(object)], dtype=object
            )
    return out


DICTIONARY_COLUMNS = ["column", "variable", "label", "level", "code", "meaning", "notes"]


def dictionary_frame(codebook: Codebook, *, spread: bool = False) -> pd.DataFrame:
    """The data dictionary: every column of the dataset, with codes and their meanings."""
    rows: list[dict[str, Any]] = [
        {
            "column": codebook.unit,
            "variable": "",
            "label": "unit ID",
            "level": "",
            "code": "",
            "meaning": "",
            "notes": f"codebook: {codebook.title}, version {codebook.version}",
        }
    ]
    for var in codebook.variables:
        notes = []
        if var.applies_when is not None:
            codes = ", ".join(map(str, var.applies_when.includes))
            notes.append(f"applies when {var.applies_when.variable} includes {codes}")
        if var.multiple:
            notes.append(f"several codes joined with '{MULTI_SEPARATOR}'")
        if var.is_numeric:
            if var.range is not None:
                notes.append(f"range {var.range[0]:g} to {var.range[1]:g}")
            if var.integer:
                notes.append("whole numbers")
        base = {"column": var.name, "variable": var.name, "label": var.title, "level": var.level}
        rows.append({**base, "code": "", "meaning": "", "notes": "; ".join(notes)})
        for cat in var.categories:
            rows.append({**base, "code": str(cat.code), "meaning": cat.label, "notes": "category"})
        for miss in var.missing:
            rows.append(
                {**base, "code": str(miss.code), "meaning": miss.label, "notes": "missing code"}
            )
        status = {"column": status_column(var.name), "variable": var.name, "label": "status"}
        for s in STATUSES:
            rows.append(
                {**status, "level": "", "code": s, "meaning": STATUS_MEANINGS[s], "notes": ""}
            )
        if spread and var.multiple:
            for cat in var.categories:
                rows.append(
                    {
                        "column": spread_column(var.name, cat.code),
                        "variable": var.name,
                        "label": f"{var.title}: {cat.label}",
                        "level": "",
                        "code": "0/1",
                        "meaning": f"1 when the value includes {var.display(cat.code)}",
                        "notes": "empty when the value is empty or a missing code",
                    }
                )
    return pd.DataFrame(rows, columns=DICTIONARY_COLUMNS)


# ---- writing -------------------------------------------------------------------------------
DATA_SHEET = "merged"
LABELS_SHEET = "labels"
DICTIONARY_SHEET = "dictionary"


def write_merged(
    result: MergeResult,
    path: str | os.PathLike[str],
    codebook: Codebook | None = None,
    *,
    spread: bool = False,
) -> str:
    """Write the dataset as csv, xlsx or parquet (by extension), atomically; return the form.

    The xlsx form adds a ``labels`` sheet (labels instead of codes) and a ``dictionary`` sheet.
    Text is neutralised against formula injection in csv and xlsx, stored as it is in parquet.
    The same result gives the same bytes in every form (no time stamps inside the files).
    """
    from coderel.io.tables import write_table

    cb = codebook if codebook is not None else result.codebook
    frame = result.to_frame(spread=spread)
    extra = {
        LABELS_SHEET: labels_frame(frame, cb),
        DICTIONARY_SHEET: dictionary_frame(cb, spread=spread),
    }
    return write_table(frame, path, extra_sheets=extra, sheet=DATA_SHEET)


__all__ = [
    "RULES",
    "STATUSES",
    "AdjudicatedCell",
    "MergeResult",
    "dictionary_frame",
    "labels_frame",
    "merge",
    "spread_multiselect",
    "write_merged",
]
