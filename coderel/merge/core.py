"""The merge: one final value per unit and variable (see :mod:`coderel.merge`)."""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from coderel.adjudicate import Decision, Decisions, read_decisions, shown_values
from coderel.adjudicate.rules import Rule, Settling
from coderel.codebook import Codebook
from coderel.codings import Codings, SourceFile
from coderel.merge.cells import MARKED, final_missing, final_value, stale_reason
from coderel.merge.columns import (
    check_skip_logic,
    has_missing_column,
    missing_codes_column_of,
    missing_column,
    output_columns,
    status_column,
    value_column_of,
)
from coderel.merge.result import STATUSES, AdjudicatedCell
from coderel.merge.settlement import STATUS_CODE, Settled, settle_cells
from coderel.merge.summary import VariableCells, row_index, variable_cells
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

    def unresolved_records(self, limit: int | None = None) -> list[dict[str, Any]]:
        """Every unresolved cell (the first ``limit`` of them): unit, variable and the coders'
        values (codes, never text)."""
        cells = self.unresolved[:limit] if limit is not None else self.unresolved
        values = self.unresolved_values or tuple({} for _ in self.unresolved)
        return [
            {"unit": u, "variable": v, "coders": dict(shown)}
            for (u, v), shown in zip(cells, values[: len(cells)], strict=True)
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
    ix = row_index(codings)
    units = ix.units
    at_unit = {u: i for i, u in enumerate(units)}
    place = {}
    if decisions is not None and decisions.source is not None:
        place["file"] = Path(decisions.source.path).name
    # Each decision is checked against its cell when its variable is settled; its problem (a
    # variable the codebook lacks, or a stale decision) keeps the decisions' order.
    outcome: list[tuple[str, Any] | None] = []
    decided_by_var: dict[str, list[tuple[int, str, Decision]]] = {}
    for k, ((unit, name), decision) in enumerate(
        (decisions.decisions if decisions is not None else {}).items()
    ):
        outcome.append(None)
        if name not in cb:
            outcome[k] = ("bad", unit)
            continue
        decided_by_var.setdefault(name, []).append((k, unit, decision))

    shown_cache: dict[Any, str] = {}  # each variable's tokens as shown, formatted once
    data: dict[str, Any] = {cb.unit: pd.Series(units, dtype=object)}
    status_counts: dict[str, dict[str, int]] = {}
    adjudicated: list[AdjudicatedCell] = []
    settled_by_var: dict[str, Settled] = {}
    open_keys: list[np.ndarray] = []
    open_shown: list[list[dict[str, str]]] = []
    status_text = np.array(STATUSES, dtype=object)
    for j, var in enumerate(cb.variables):
        cells = variable_cells(var, ix)
        usable: dict[int, Decision] = {}
        for k, unit, decision in decided_by_var.get(var.name, []):
            u = at_unit.get(unit)
            tokens = cells.cell_tokens(u) if u is not None else {}
            shown = shown_values(var, tokens, shown_cache)
            reason = stale_reason(decision, tokens, shown, u is not None)
            if reason is None:
                usable[u] = decision  # type: ignore[index]
            else:
                outcome[k] = ("stale", reason)
        settled = settle_cells(cells, usable, settling)
        values = [final_value(var, t) for t in settled.tokens]
        missing = [final_missing(t) for t in settled.tokens]
        for i in settled.used.tolist():
            t = int(settled.final[i])
            decision = usable[i]
            adjudicated.append(
                AdjudicatedCell(
                    unit=units[i],
                    variable=var.name,
                    values=shown_values(var, cells.cell_tokens(i), shown_cache),
                    decision=decision.text,
                    value=values[t] if missing[t] is None else missing[t],
                    adjudicator=decision.adjudicator,
                    note=decision.note,
                    cell=decision.cell,
                )
            )
        data[var.name] = value_column_of(var, values, settled.final)
        data[status_column(var.name)] = pd.Series(status_text[settled.status], dtype=object)
        if has_missing_column(var):
            data[missing_column(var.name)] = missing_codes_column_of(var, missing, settled.final)
        counts = np.bincount(settled.status, minlength=len(STATUSES)).tolist()
        status_counts[var.name] = dict(zip(STATUSES, counts, strict=True))
        is_open = np.flatnonzero(settled.status == STATUS_CODE["unresolved"])
        open_keys.append(is_open * len(cb.variables) + j)
        open_shown.append(_shown_cells(cells, is_open, shown_cache))
        settled_by_var[var.name] = settled
        del cells
    stale: list[dict[str, Any]] = []
    for k, ((unit, name), decision) in enumerate(
        (decisions.decisions if decisions is not None else {}).items()
    ):
        if outcome[k] is None:
            continue
        kind, what = outcome[k]  # type: ignore[misc]
        if kind == "bad":
            problems.add(
                "bad-decision", "a decision for a variable the codebook lacks", unit=unit, **place
            )
            continue
        reason = what
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
    # unresolved cells by unit, then in codebook order
    keys = np.concatenate(open_keys) if open_keys else np.zeros(0, dtype=np.int64)
    shown_all = [shown for per_var in open_shown for shown in per_var]
    del open_shown
    order = np.argsort(keys, kind="stable").tolist()
    n_vars = max(len(cb.variables), 1)
    names = cb.names
    unresolved = tuple((units[q // n_vars], names[q % n_vars]) for q in keys[order].tolist())
    unresolved_values = tuple(shown_all[i] for i in order)
    del shown_all, order, keys
    check_skip_logic(cb, units, settled_by_var, problems)
    del settled_by_var
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


def _shown_cells(
    cells: VariableCells, units: np.ndarray, cache: dict[Any, str]
) -> list[dict[str, str]]:
    """The coders' values as the list shows them (:func:`shown_values`), for each of ``units``:
    each token shown once, each cell's dict made from its entries."""
    if not len(units):
        return []
    var = cells.variable
    shown = [shown_values(var, {"": t}, cache)[""] for t in cells.tokens]
    coder = np.array(cells.coders, dtype=object)[cells.entry_coder].tolist()
    text = np.array(shown, dtype=object)[cells.entry_token].tolist()
    start = cells.start[units].tolist()
    end = cells.start[units + 1].tolist()
    return [dict(zip(coder[a:b], text[a:b], strict=True)) for a, b in zip(start, end, strict=True)]


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
    from coderel.io.tables import table_format, write_table

    cb = codebook if codebook is not None else result.codebook
    # the dataset is only read here: no copy of it unless spread columns are added
    frame = spread_multiselect(result.frame, result.codebook) if spread else result.frame
    extra = None
    if table_format(path) == "xlsx":  # the other forms have no room for more sheets
        extra = {
            LABELS_SHEET: labels_frame(frame, cb),
            DICTIONARY_SHEET: dictionary_frame(cb, spread=spread),
        }
    return write_table(frame, path, extra_sheets=extra, sheet=DATA_SHEET)
