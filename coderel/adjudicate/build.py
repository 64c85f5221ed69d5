"""Building the list from the codings, keeping the decisions of an earlier list."""

from __future__ import annotations

import math
import os
from collections.abc import Sequence
from dataclasses import replace
from typing import Any

import numpy as np

from coderel.adjudicate.cell_table import CellTable, cell_table
from coderel.adjudicate.decisions import hint, parse_decision
from coderel.adjudicate.model import (
    MAIN_SHEET,
    STALE_CHECK,
    Adjudication,
    AdjudicationRow,
    coder_column,
    column_letter,
    main_columns,
)
from coderel.adjudicate.read import read_adjudication
from coderel.adjudicate.rules import Settling, settle
from coderel.adjudicate.tokens import shown_values, unit_sort_key
from coderel.codings import Codings
from coderel.problems import Problems


def _first_texts(codings: Codings) -> tuple[tuple[str, ...], dict[str, dict[str, str]]]:
    """Per unit, the first coder's text in each text column (coders in order of appearance)."""
    texts = codings.texts
    if texts is None or texts.empty:
        return (), {}
    order = {c: i for i, c in enumerate(codings.coders)}
    columns = list(dict.fromkeys(texts["column"]))
    out: dict[str, dict[str, tuple[int, str]]] = {}
    for unit, coder, column, text in zip(
        texts["unit"], texts["coder"], texts["column"], texts["text"], strict=True
    ):
        if text is None or (isinstance(text, float) and math.isnan(text)) or str(text) == "":
            continue
        rank = order.get(coder, len(order))
        slot = out.setdefault(str(unit), {})
        if column not in slot or rank < slot[column][0]:
            slot[column] = (rank, str(text))
    return tuple(columns), {u: {c: t for c, (_, t) in d.items()} for u, d in out.items()}


def disagreements(
    codings: Codings,
    settling: Settling | None = None,
    table: CellTable | None = None,
) -> list[AdjudicationRow]:
    """Rows for every cell that needs a decision, sorted by unit then codebook variable order.

    A cell the coders disagree on needs no decision when ``settling`` (rule and tolerances, see
    :mod:`coderel.adjudicate.rules`) settles it; by default only unanimity settles a cell.
    ``table``: the cells already grouped (:func:`coderel.adjudicate.cell_table.cell_table`).
    """
    cb = codings.codebook
    settling = settling or Settling()
    var_order = {name: i for i, name in enumerate(cb.names)}
    variables = {name: cb.variable(name) for name in cb.names}
    rows = []
    shown: dict[Any, str] = {}
    table = table if table is not None else cell_table(codings)
    for i in np.flatnonzero(table.kind_code).tolist():  # the cells whose coders disagree
        unit, name = table.unit[i], table.variable[i]
        tokens = table.tokens(i)
        var = variables[name]
        # only a majority rule or a tolerance settles a cell whose coders disagree
        may_settle = settling.rule != "unanimous" or name in settling.tolerance
        if may_settle and settle(var, tokens, settling) is not None:
            continue
        values = shown_values(var, tokens, shown)
        kind = table.kind(i)
        rows.append(AdjudicationRow(unit=unit, variable=name, kind=kind, values=values))
    unit_keys = {u: unit_sort_key(u) for u in {r.unit for r in rows}}
    rows.sort(key=lambda r: (unit_keys[r.unit], r.unit, var_order[r.variable]))
    return rows


def build_adjudication(
    codings: Codings,
    previous: Adjudication | str | os.PathLike[str] | None = None,
    settling: Settling | None = None,
) -> Adjudication:
    """Build the adjudication list, keeping the decisions of a previous list.

    Parameters
    ----------
    codings
        The coders' current codings.
    previous
        An earlier list (object or path of an earlier ``adjudicate`` output). Its decisions are
        kept by unit and variable; rows no longer disagreeing move to ``retired``; rows already
        retired stay retired unless they disagree again, in which case they return with their
        decision. Nothing is dropped.
    settling
        The rule (``unanimous`` or ``majority``) and numeric tolerances: cells they settle are
        not listed (see :mod:`coderel.adjudicate.rules`; ``merge`` must use the same settling).
    """
    settling = settling or Settling()
    table = cell_table(codings)
    current = disagreements(codings, settling, table)
    columns, narratives = _first_texts(codings)
    if previous is not None and not isinstance(previous, Adjudication):
        previous = read_adjudication(previous, codings.codebook, codings.coders)
    old_rows: dict[str, AdjudicationRow] = {}
    old_retired: dict[str, AdjudicationRow] = {}
    problems = Problems()
    extra_columns: tuple[str, ...] = ()
    if previous is not None:
        previous = _clear_of(previous, [*codings.coders, *columns])
        old_rows = {r.key: r for r in previous.rows}
        old_retired = {r.key: r for r in previous.retired}
        problems.extend(previous.problems)
        extra_columns = previous.extra_columns
    rows: list[AdjudicationRow] = []
    kept = added = 0
    changed: list[int] = []
    now_keys: set[str] = set()
    for row in current:
        key = row.key
        now_keys.add(key)
        old = old_rows.get(key) or old_retired.get(key)
        if old is not None:
            kept += 1
            check = old.check if old.to_check else None  # until the adjudicator clears it
            if old.decided and {c: v for c, v in old.values.items() if v} != dict(row.values):
                changed.append(len(rows))
                check = STALE_CHECK
            row = AdjudicationRow(
                unit=row.unit,
                variable=row.variable,
                kind=row.kind,
                values=row.values,
                decision=old.decision,
                note=old.note,
                adjudicator=old.adjudicator,
                check=check,
                extra=old.extra,
            )
        else:
            added += 1
        rows.append(row)
    units_now = set(codings.frame["unit"].tolist())  # codings.units, without its sorting
    retired: list[AdjudicationRow] = [r for k, r in old_retired.items() if k not in now_keys]
    moved = 0
    for key, old in old_rows.items():
        if key in now_keys:
            continue
        moved += 1
        reason = _retired_reason(old, table, units_now, settling)
        retired.append(
            AdjudicationRow(
                unit=old.unit,
                variable=old.variable,
                kind=old.kind,
                values=old.values,
                decision=old.decision,
                note=old.note,
                adjudicator=old.adjudicator,
                reason=reason,
                extra=old.extra,
            )
        )
    var_order = {name: i for i, name in enumerate(codings.codebook.names)}
    unit_keys = {u: unit_sort_key(u) for u in {r.unit for r in retired}}
    retired.sort(
        key=lambda r: (unit_keys[r.unit], r.unit, var_order.get(r.variable, len(var_order)))
    )
    adjudication = Adjudication(
        codebook=codings.codebook,
        coders=tuple(codings.coders),
        rows=tuple(rows),
        retired=tuple(retired),
        text_columns=columns,
        narratives=narratives,
        problems=problems,
        kept=kept if previous is not None else 0,
        added=added,
        moved=moved,
        settling=settling,
        extra_columns=extra_columns,
    )
    problems.extend(check_decisions(adjudication))
    problems.extend(_changed_since_decision(adjudication, changed))
    return adjudication


def _clear_of(previous: Adjudication, names: Sequence[str]) -> Adjudication:
    """``previous`` with each added column named like a coder or text column of the data now
    renamed ``NAME (kept)``, so that neither overwrites the other when the list is written."""
    taken = {coder_column(n) for n in names}
    renames = {}
    for column in previous.extra_columns:
        if column in taken:
            new = f"{column} (kept)"
            while new in taken or new in previous.extra_columns:
                new += "'"
            renames[column] = new
    if not renames:
        return previous

    def moved(row: AdjudicationRow) -> AdjudicationRow:
        return replace(row, extra={renames.get(k, k): v for k, v in row.extra.items()})

    return replace(
        previous,
        rows=tuple(moved(r) for r in previous.rows),
        retired=tuple(moved(r) for r in previous.retired),
        extra_columns=tuple(renames.get(c, c) for c in previous.extra_columns),
    )


def _retired_reason(
    old: AdjudicationRow,
    table: CellTable,
    units_now: set[str],
    settling: Settling,
) -> str:
    """Why a row left the list: the unit is gone, the coders agree, or a rule settles it."""
    if old.unit not in units_now:
        return "unit no longer in the data"
    cell = table.index.get((old.unit, old.variable))
    if cell is not None and table.kind_code[cell]:
        return f"settled by the rule ({settling.describe()})"
    return "coders now agree"


def _changed_since_decision(adjudication: Adjudication, indexes: Sequence[int]) -> Problems:
    """``stale-decision`` warnings for kept decisions whose coders' values have changed.

    The row is also marked in the list itself (its ``check`` cell), so the mark outlives this run:
    ``merge`` does not use the decision until the adjudicator clears the cell.
    """
    problems = Problems()
    headers = main_columns(adjudication.coders, adjudication.text_columns)
    col = column_letter(headers.index("check") + 1)
    for i in indexes:
        row = adjudication.rows[i]
        problems.add(
            "stale-decision",
            "the coders' values changed since this decision was made; it is kept and marked in "
            "its 'check' cell, and merge does not use it until that cell is cleared",
            hint="read the coders' new values on the list; change the decision if it no longer "
            "holds, then clear the 'check' cell to confirm it",
            sheet=MAIN_SHEET,
            cell=f"{col}{i + 2}",
            unit=row.unit,
            variable=row.variable,
        )
    return problems


def check_decisions(adjudication: Adjudication, file: str | None = None) -> Problems:
    """``bad-decision`` problems for decisions on the main list that are not valid.

    Cell references follow the layout :func:`write_adjudication` gives the list (header in row 1);
    ``file`` names the list, and a ``.csv`` file has no sheet.
    """
    problems = Problems()
    cb = adjudication.codebook
    sheet = None if file is not None and file.lower().endswith(".csv") else MAIN_SHEET
    headers = main_columns(adjudication.coders, adjudication.text_columns)
    col = column_letter(headers.index("decision") + 1)
    for i, row in enumerate(adjudication.rows, start=2):
        if not row.decided:
            continue
        if row.variable not in cb:
            problems.add(
                "bad-decision",
                "a decision for a variable the codebook lacks",
                file=file,
                sheet=sheet,
                cell=f"{col}{i}",
                unit=row.unit,
                variable=row.variable,
            )
            continue
        _, reason = parse_decision(cb.variable(row.variable), row.decision)
        if reason is not None:
            problems.add(
                "bad-decision",
                f"the decision is not valid for {row.variable!r}: {reason}",
                file=file,
                sheet=sheet,
                cell=f"{col}{i}",
                unit=row.unit,
                variable=row.variable,
                hint=hint(cb.variable(row.variable)),
            )
    return problems
