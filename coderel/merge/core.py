"""The merge: one final value per unit and variable (see :mod:`coderel.merge`)."""

from __future__ import annotations

import os
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from coderel.adjudicate import (
    Decision,
    Decisions,
    Token,
    read_decisions,
    shown_values,
    sorted_units,
)
from coderel.adjudicate.cell_table import cell_table
from coderel.adjudicate.rules import Rule, Settling
from coderel.codebook import Codebook
from coderel.codings import Codings, SourceFile
from coderel.merge.cells import MARKED, final_missing, final_value, stale_reason
from coderel.merge.columns import (
    check_skip_logic,
    has_missing_column,
    missing_codes_column,
    missing_column,
    output_columns,
    status_column,
    value_column,
)
from coderel.merge.result import STATUSES, AdjudicatedCell
from coderel.merge.settlement import cell_grid, settle_variable
from coderel.merge.tables import (
    DATA_SHEET,
    DICTIONARY_SHEET,
    LABELS_SHEET,
    dictionary_frame,
    labels_frame,
    spread_multiselect,
)
from coderel.problems import Problems


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
    #: variable -> tolerance (interval and ratio variables settled ``within_tolerance``)
    tolerance: Mapping[str, float] = field(default_factory=dict)
    #: decisions not used because they do not match the current data or wait to be re-confirmed:
    #: ``{"unit", "variable", "cell", "reason"}`` each (also ``stale-decision`` problems)
    stale: tuple[Mapping[str, Any], ...] = ()

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
            **{
                k: v
                for k, v in Settling(self.rule, self.tolerance).to_dict().items()
                if k != "rule"
            },
            "units": self.units,
            "variables": len(self.codebook.variables),
            "cells": self.cells,
            "coders": list(self.coders),
            "totals": self.totals(),
            "status_counts": {v: dict(c) for v, c in self.status_counts.items()},
            "unresolved": self.unresolved_records(),
            "adjudicated": [a.to_dict() for a in self.adjudicated],
            "stale_decisions": [dict(s) for s in self.stale],
            **self.problems.to_dict(),
        }


# ---- the merge -----------------------------------------------------------------------------
def merge(
    codings: Codings,
    decisions: Decisions | str | os.PathLike[str] | None = None,
    rule: Rule = "unanimous",
    tolerance: Mapping[str, float] | None = None,
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
    tolerance
        variable -> largest difference between numbers that still counts as agreeing (interval
        and ratio variables); such a cell is ``within_tolerance`` with the median of the numbers.
        See :mod:`coderel.adjudicate.rules`; agreement coefficients never use it.

    Returns
    -------
    MergeResult
        The dataset, status counts, unresolved and adjudicated cells, and problems.

    Notes
    -----
    Consensus by majority vote and adjudication of the remaining disagreements by a third person
    is the usual way of reconciling independent codings (common practice, no source).
    """
    settling = Settling(rule, dict(tolerance or {}))
    cb = codings.codebook
    columns = output_columns(cb)
    if decisions is not None and not isinstance(decisions, Decisions):
        decisions = read_decisions(decisions, cb, codings.coders)
    problems = Problems()
    if decisions is not None:
        problems.extend(decisions.problems)
    table = cell_table(codings)
    shown_cache: dict[Any, str] = {}  # each variable's tokens as shown, formatted once
    units = sorted_units(codings.frame["unit"].tolist())  # codings.units, sorted once
    unit_set = set(units)
    usable: dict[tuple[str, str], Decision] = {}
    stale: list[dict[str, Any]] = []
    place = {}
    if decisions is not None and decisions.source is not None:
        place["file"] = Path(decisions.source.path).name
    for (unit, name), decision in (decisions.decisions if decisions is not None else {}).items():
        if name not in cb:
            problems.add(
                "bad-decision", "a decision for a variable the codebook lacks", unit=unit, **place
            )
            continue
        cell = table.index.get((unit, name))
        tokens = table.tokens(cell) if cell is not None else {}
        var = cb.variable(name)
        shown = shown_values(var, tokens, shown_cache)
        reason = stale_reason(decision, tokens, shown, unit in unit_set)
        if reason is None:
            usable[(unit, name)] = decision
            continue
        stale.append({"unit": unit, "variable": name, "cell": decision.cell, "reason": reason})
        problems.add(
            "stale-decision",
            f"the decision is not used: {reason}",
            hint=(
                "check the decision against the coders' current values on the list, then clear "
                "its 'check' cell"
                if reason == MARKED
                else "run 'coderel adjudicate' again with the same output to update the list; "
                "decisions are carried over by unit and variable (a changed one is marked there "
                "for checking)"
            ),
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
    grid = cell_grid(table, units, cb.names)
    at_unit = {u: i for i, u in enumerate(units)}
    decided_by_var: dict[str, dict[int, Decision]] = {}
    for (unit, name), decision in usable.items():
        decided_by_var.setdefault(name, {})[at_unit[unit]] = decision
    for j, var in enumerate(cb.variables):
        cells = grid[:, j].tolist()
        decided = decided_by_var.get(var.name, {})
        statuses, finals, used = settle_variable(var, cells, table, decided, settling)
        tokens_by_var[var.name] = finals
        values = [None if token is None else final_value(var, token) for token in finals]
        missing = [final_missing(token) for token in finals]
        for i in used:
            decision = decided[i]
            adjudicated.append(
                AdjudicatedCell(
                    unit=units[i],
                    variable=var.name,
                    values=shown_values(var, table.tokens(cells[i]), shown_cache),
                    decision=decision.text,
                    value=values[i] if missing[i] is None else missing[i],
                    adjudicator=decision.adjudicator,
                    note=decision.note,
                    cell=decision.cell,
                )
            )
        data[var.name] = value_column(var, values)
        data[status_column(var.name)] = pd.Series(statuses, dtype=object)
        if has_missing_column(var):
            data[missing_column(var.name)] = missing_codes_column(var, missing)
        counts = Counter(statuses)
        status_counts[var.name] = {s: counts.get(s, 0) for s in STATUSES}
        statuses_by_var[var.name] = statuses
    is_open = np.array(
        [[s == "unresolved" for s in statuses_by_var[n]] for n in cb.names], dtype=bool
    ).reshape(len(cb.names), len(units))
    open_rows, open_cols = np.nonzero(is_open.T)  # by unit, then codebook order
    for i, j in zip(open_rows.tolist(), open_cols.tolist(), strict=True):
        var = cb.variables[j]
        unresolved.append((units[i], var.name))
        cell = int(grid[i, j])
        tokens = table.tokens(cell) if cell >= 0 else {}
        unresolved_values.append(shown_values(var, tokens, shown_cache))
    check_skip_logic(cb, units, tokens_by_var, statuses_by_var, problems)
    frame = pd.DataFrame(data, columns=columns)
    return MergeResult(
        frame=frame,
        rule=rule,
        tolerance=dict(settling.tolerance),
        stale=tuple(stale),
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
