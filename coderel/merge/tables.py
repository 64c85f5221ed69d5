"""Tables derived from the dataset: spread columns, labels, the data dictionary."""

from __future__ import annotations

from typing import Any

import pandas as pd

from coderel.codebook import MULTI_SEPARATOR, Codebook, Variable
from coderel.merge.columns import has_missing_column, missing_column, status_column
from coderel.merge.result import SPREAD_SEPARATOR, STATUS_MEANINGS, STATUSES

#: Sheets of the xlsx form of the dataset.
DATA_SHEET = "merged"
LABELS_SHEET = "labels"
DICTIONARY_SHEET = "dictionary"


# ---- derived tables ------------------------------------------------------------------------
def spread_column(name: str, code: Any) -> str:
    return f"{name}{SPREAD_SEPARATOR}{code}"


def spread_multiselect(frame: pd.DataFrame, codebook: Codebook) -> pd.DataFrame:
    """Add one 0/1 column ``<variable>__<code>`` per category of every multi-select variable.

    The columns follow the variable's status column (and its ``_missing`` column). They are empty
    where the value is empty (unresolved, not applicable, a missing code).
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
        last = missing_column(var.name)
        last = last if last in out.columns else status_column(var.name)
        position = out.columns.get_loc(last) + 1
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
            known = (*var.codes, *var.missing_codes, *([var.none_code] if var.none else []))
            code = next((c for c in known if str(c) == part), part)
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
        name = missing_column(var.name)
        if name in out.columns:
            out[name] = pd.Series(
                [_missing_label(var, v) for v in out[name].astype(object)], dtype=object
            )
    return out


def _missing_label(var: Variable, code: Any) -> Any:
    if code is None or code is pd.NA or (isinstance(code, float) and code != code):
        return None
    known = next((c for c in var.missing_codes if str(c) == str(code)), code)
    return var.label_of(known) or str(code)


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
        status = {"column": status_column(var.name), "variable": var.name, "label": "status"}
        for s in STATUSES:
            rows.append(
                {**status, "level": "", "code": s, "meaning": STATUS_MEANINGS[s], "notes": ""}
            )
        if has_missing_column(var):
            miss_base = {
                "column": missing_column(var.name),
                "variable": var.name,
                "label": f"{var.title}: missing code",
                "level": "",
            }
            rows.append(
                {
                    **miss_base,
                    "code": "",
                    "meaning": "",
                    "notes": f"the missing code where {var.name} is missing (its value column "
                    "is then empty); empty otherwise",
                }
            )
            for miss in var.missing:
                rows.append(
                    {
                        **miss_base,
                        "code": str(miss.code),
                        "meaning": miss.label,
                        "notes": "missing code",
                    }
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
