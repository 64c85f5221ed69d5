"""Columns of the dataset: value columns of a stable type, status columns, skip-logic check."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from coderel.adjudicate import Token
from coderel.codebook import Codebook, Variable
from coderel.codings import condition_holds
from coderel.errors import UsageError
from coderel.merge.result import MISSING_SUFFIX, STATUS_SUFFIX
from coderel.problems import Problems


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


def missing_column(name: str) -> str:
    """``distance_m_missing``: the missing code of a cell whose final value is missing."""
    return f"{name}{MISSING_SUFFIX}"


def has_missing_column(var: Variable) -> bool:
    """Variables whose codebook lists missing codes get a ``<variable>_missing`` column."""
    return bool(var.missing_codes)


def missing_codes_column(var: Variable, codes: Sequence[Any]) -> pd.Series:
    """The missing codes of a variable's cells (empty where the value is not missing), typed by
    the codebook's missing codes alone: whole numbers as a nullable integer column, else text."""
    if all(isinstance(c, int) and not isinstance(c, bool) for c in var.missing_codes):
        return pd.Series([None if c is None else int(c) for c in codes], dtype="Int64")
    return pd.Series([None if c is None else str(c) for c in codes], dtype=object)


def output_columns(codebook: Codebook) -> list[str]:
    """Columns of the dataset: unit column, then value and status column per variable, and
    ``<variable>_missing`` for variables with missing codes."""
    cols = [codebook.unit]
    for var in codebook.variables:
        cols += [var.name, status_column(var.name)]
        if has_missing_column(var):
            cols.append(missing_column(var.name))
    if len(set(cols)) != len(cols):
        raise UsageError(
            "a column '<variable>_status' or '<variable>_missing' clashes with a variable or the "
            "unit column; rename the variable in the codebook"
        )
    return cols


def check_skip_logic(
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
