"""Columns of the dataset: value columns of a stable type, status columns, skip-logic check."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook import Codebook, Variable
from coderel.codings import condition_holds
from coderel.errors import UsageError
from coderel.merge.result import MISSING_SUFFIX, STATUS_SUFFIX
from coderel.merge.settlement import STATUS_CODE, Settled
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


def value_column_of(var: Variable, values: Sequence[Any], ids: np.ndarray) -> pd.Series:
    """:func:`value_column` of ``[values[i] for i in ids]`` (``None`` where ``i`` is -1), each
    distinct value converted once: ``values`` are the final values by token id."""
    used = np.unique(ids[ids >= 0]).tolist()
    present = [values[i] for i in used if values[i] is not None]
    if var.multiple or not all(_is_number(v) for v in present):
        text = [None if v is None else str(v) for v in values]
        return pd.Series(_lookup(text, used, None)[ids], dtype=object)
    whole = var.integer or (var.is_categorical and all(isinstance(v, int) for v in present))
    if whole and all(float(v).is_integer() for v in present):
        return _whole_numbers(values, used, ids)
    floats = np.full(len(values) + 1, np.nan)
    for i in used:
        if values[i] is not None:
            floats[i] = float(values[i])
    return pd.Series(floats[ids], dtype="float64")


def missing_codes_column_of(var: Variable, codes: Sequence[Any], ids: np.ndarray) -> pd.Series:
    """:func:`missing_codes_column` of ``[codes[i] for i in ids]`` (``None`` where ``i`` is
    -1), each distinct code converted once: ``codes`` are the missing codes by token id."""
    used = np.unique(ids[ids >= 0]).tolist()
    if all(isinstance(c, int) and not isinstance(c, bool) for c in var.missing_codes):
        return _whole_numbers(codes, used, ids)
    text = [None if c is None else str(c) for c in codes]
    return pd.Series(_lookup(text, used, None)[ids], dtype=object)


def _whole_numbers(values: Sequence[Any], used: Sequence[int], ids: np.ndarray) -> pd.Series:
    """``[values[i] for i in ids]`` as a nullable integer column (empty where the value is
    ``None`` or ``i`` is -1), each value used converted once."""
    ints = np.zeros(len(values) + 1, dtype=np.int64)
    empty = np.ones(len(values) + 1, dtype=bool)
    for i in used:
        if values[i] is not None:
            ints[i], empty[i] = int(values[i]), False
    return pd.Series(pd.arrays.IntegerArray(ints[ids], empty[ids]))


def _lookup(objects: Sequence[Any], used: Sequence[int], absent: Any) -> np.ndarray:
    """An object array of ``objects`` at ``used`` (``absent`` elsewhere), one longer: index -1
    gives ``absent``."""
    out = np.full(len(objects) + 1, absent, dtype=object)
    for i in used:
        out[i] = objects[i]
    return out


def check_skip_logic(
    cb: Codebook,
    units: Sequence[str],
    settled: Mapping[str, Settled],
    problems: Problems,
) -> None:
    """Warn where a conditional variable's final value contradicts its condition's final value.

    Each coder's sheet obeys the skip logic on its own, but final values are settled cell by cell
    (an adjudicator may drop code 3 from ``actions`` yet keep a ``spray_worked`` value), so the
    merged row is checked once more. Each distinct final token is judged once; the units are
    compared on arrays.
    """
    for var in cb.variables:
        cond = var.applies_when
        if cond is None or cond.variable not in cb:
            continue
        cond_var = cb.variable(cond.variable)
        given = settled[cond.variable]
        # id -1 (no final token) takes the last entry of each lookup
        is_value = np.array([t[0] == "value" for t in given.tokens] + [False])[given.final]
        holds = np.array(
            [
                t[0] == "value" and bool(condition_holds(cond_var, t[1], cond.includes))
                for t in given.tokens
            ]
            + [False]
        )[given.final]
        own = settled[var.name]
        has_value = np.array([t[0] in ("value", "missing") for t in own.tokens] + [False])
        is_na = np.array([t[0] == "na" for t in own.tokens] + [False])[own.final] | (
            own.status == STATUS_CODE["not_applicable"]
        )
        has_value = has_value[own.final]
        flagged = is_value & ((~holds & has_value) | (holds & is_na))
        includes = ", ".join(cond_var.display(c) for c in cond.includes)
        for i in np.flatnonzero(flagged).tolist():
            given_value = bool(has_value[i])
            problems.add(
                "merged-skip-logic",
                f"the final {var.name} is {'given' if given_value else 'not applicable'}, but "
                f"the final {cond.variable} {'is' if holds[i] else 'is not'} one of {includes}",
                hint=f"settle {cond.variable} and {var.name} of this unit together (adjudication "
                "list), so that the skip logic holds",
                unit=units[i],
                variable=var.name,
            )
