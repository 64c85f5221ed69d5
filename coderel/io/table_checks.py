"""Checks over the whole long table once every file is read.

* skip logic both ways (``should-not-apply`` until stable, then ``should-apply``);
* ``blank-variable``: a coder left a variable blank on every unit where it applies;
* ``partial-unit``: units coded by only some coders, with hints for IDs or coder names that
  differ only in case, spaces or leading zeros.

Each function adds its problems to ``problems``; only :func:`check_skip_logic` changes the table
(values that must not be there become invalid).
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook import Codebook
from coderel.codings import applicability, none_for_na
from coderel.io.coverage import coder_key
from coderel.problems import Problems


def check_skip_logic(codebook: Codebook, problems: Problems, frame: pd.DataFrame) -> pd.DataFrame:
    """Apply ``should-not-apply`` until stable, then report ``should-apply``."""
    cb = codebook
    for _ in range(len(cb.variables) + 1):
        applies = applicability(cb, frame)
        frame["applies"] = applies
        false = _is_false(applies)
        if not false.any():
            break
        given = frame["value"].notna().to_numpy() | frame["missing"].notna().to_numpy()
        bad = np.flatnonzero(false & given).tolist()
        if not bad:
            break
        for i in bad:
            row = frame.iloc[i]
            variable = cb.variable(row["variable"])
            cond = variable.applies_when
            if cond is None:  # applies is False only under a condition
                continue
            given = row["value"] if row["value"] is not None else row["missing"]
            includes = ", ".join(cb.variable(cond.variable).display(c) for c in cond.includes)
            problems.add(
                "should-not-apply",
                f"{variable.name} is coded ({_short(given)}) but does not apply here: it "
                f"applies only when {cond.variable} is {includes}",
                hint=f"leave {variable.name} blank, or check the code of {cond.variable}",
                **_row_place(row),
            )
            frame.at[frame.index[i], "value"] = None
            frame.at[frame.index[i], "missing"] = None
            frame.at[frame.index[i], "_invalid"] = True
    conditional = [v.name for v in cb.variables if v.applies_when is not None]
    if not conditional:
        return frame
    is_true = _is_true(frame["applies"].to_numpy())
    blank = frame["value"].isna().to_numpy() & frame["missing"].isna().to_numpy()
    valid = ~frame["_invalid"].astype(bool).to_numpy()
    asked = frame["variable"].isin(conditional).to_numpy() & is_true & blank & valid
    for i in np.flatnonzero(asked):
        row = frame.iloc[i]
        variable = cb.variable(row["variable"])
        cond = variable.applies_when
        if cond is None:
            continue
        missing = (
            f", or the missing code {variable.display(variable.missing_codes[0])}"
            if variable.missing_codes
            else ""
        )
        includes = ", ".join(cb.variable(cond.variable).display(c) for c in cond.includes)
        problems.add(
            "should-apply",
            f"{variable.name} is blank, but it applies here ({cond.variable} is one of {includes})",
            hint=f"code {variable.name}{missing}",
            **_row_place(row),
        )
    return frame


def check_blank_variables(problems: Problems, frame: pd.DataFrame) -> None:
    """``blank-variable``: a coder left a variable blank on every unit where it applies.

    Agreement then rests on the other coders alone, which no number shows; a column filled
    in the wrong sheet, or not yet coded, is the usual cause. Needs two or more such units,
    and only coders with at least one valid value count (a sheet not yet begun is no news).
    """
    empty = frame["value"].isna().to_numpy() & frame["missing"].isna().to_numpy()
    blank = empty & ~frame["_invalid"].to_numpy(dtype=bool)
    coder_codes, coders = pd.factorize(frame["coder"])
    var_codes, variables = pd.factorize(frame["variable"])
    begun = np.zeros(len(coders) + 1, dtype=bool)
    begun[coder_codes[~empty]] = True
    # None: no condition; False (Python's or numpy's): the condition says it does not apply.
    rows = np.flatnonzero(~_is_false(frame["applies"].to_numpy()) & begun[coder_codes])
    if not len(rows):
        return
    # (coder, variable) groups in order of first appearance, as a groupby without sorting
    group, keys = pd.factorize(
        coder_codes[rows].astype(np.int64) * (len(variables) + 1) + var_codes[rows]
    )
    size = np.bincount(group, minlength=len(keys))
    all_blank = np.bincount(group, weights=blank[rows], minlength=len(keys)) == size
    first = np.full(len(keys), len(rows), dtype=np.int64)
    np.minimum.at(first, group, np.arange(len(rows)))
    first_row = rows[first]
    group_coder = [str(coders[c]) for c in keys // (len(variables) + 1)]
    group_var = [str(variables[v]) for v in keys % (len(variables) + 1)]
    per_variable: dict[str, list[int]] = {}
    for g, variable in enumerate(group_var):
        per_variable.setdefault(variable, []).append(g)
    nobody = [
        variable
        for variable, gs in per_variable.items()
        if len(gs) > 1 and bool(all_blank[gs].all())
    ]
    for variable in nobody:  # one problem for the variable, not one per coder
        problems.add(
            "blank-variable",
            f"no coder coded {variable}: it is blank on every unit in every sheet, so it has "
            "no agreement",
            hint=f"code {variable}, or check that its column (in a long table, its name) is "
            f"{variable!r} in every sheet",
            variable=variable,
        )
    files = frame["file"].to_numpy(dtype=object)
    sheets = frame["sheet"].to_numpy(dtype=object)
    for g in np.flatnonzero(all_blank & (size >= 2)).tolist():
        coder, variable = group_coder[g], group_var[g]
        if variable in nobody:
            continue
        problems.add(
            "blank-variable",
            f"{coder} left {variable} blank on all {size[g]} units where it applies; "
            f"agreement on {variable} rests on the other coders",
            hint=f"code {variable} in {coder}'s sheet, or check that the values are in the "
            "column the codebook names (not in another sheet or a renamed column)",
            file=files[first_row[g]],
            sheet=sheets[first_row[g]],
            coder=coder,
            variable=variable,
        )


def check_partial_units(problems: Problems, frame: pd.DataFrame) -> None:
    """``partial-unit``: a unit coded by only some of the coders, with hints for unit IDs that
    differ only in leading zeros, case or spaces and for coder names that differ only in case or
    spaces. Works per distinct set of coders present; a message is made per partial unit."""
    unit_codes, unit_index = pd.factorize(frame["unit"])
    coder_codes, coder_index = pd.factorize(frame["coder"])
    units, coders = [str(u) for u in unit_index], [str(c) for c in coder_index]
    n_coders = len(coders)
    if n_coders < 2:
        return
    # distinct (unit, coder) pairs: hashed first, so that only the distinct ones are sorted
    _, distinct = pd.factorize(unit_codes.astype(np.int64) * n_coders + coder_codes)
    pairs = np.sort(distinct)
    pair_unit, pair_coder = pairs // n_coders, pairs % n_coders
    per_unit = np.bincount(pair_unit, minlength=len(units))
    partial = np.flatnonzero(per_unit < n_coders)
    if not len(partial):
        return
    starts = np.searchsorted(pair_unit, partial)
    # IDs that differ only in leading zeros, case or inner spaces ("001" and 1, once a
    # spreadsheet has turned the text into a number) are most likely one unit.
    loose = [_loose_id(u) for u in units]
    alike: dict[str, list[str]] = {}
    for key, unit in zip(loose, units, strict=True):
        alike.setdefault(key, []).append(unit)
    # coder names that differ only in case or spaces: "did you mean" (io/coverage.py)
    keys = [coder_key(c) for c in coders]
    twins = {
        i: sorted(c for j, c in enumerate(coders) if j != i and keys[j] == keys[i])
        for i in range(n_coders)
    }
    twins = {i: names for i, names in twins.items() if names}
    # the message and the coders' part of the hint depend only on which coders are present
    keys_of_units = [
        pair_coder[a : a + k].tobytes()
        for a, k in zip(starts.tolist(), per_unit[partial].tolist(), strict=True)
    ]
    pattern, patterns = pd.factorize(np.array(keys_of_units, dtype=object))
    said: list[tuple[str, str]] = []
    for key in patterns:
        row = np.zeros(n_coders, dtype=bool)
        row[np.frombuffer(key, dtype=pair_coder.dtype)] = True
        here = [c for i, c in enumerate(coders) if row[i]]
        absent_codes = [i for i in range(n_coders) if not row[i]]
        hint = "code the unit by every coder, or accept that agreement for it uses fewer coders"
        meant = []
        for i in absent_codes:
            if i in twins:
                found = next((c for c in twins[i] if c in here), None)
                if found is not None:
                    meant.append((coders[i], found))
        if meant:
            hint = (
                "; ".join(f"did you mean {m!r} for {c!r}?" for c, m in meant)
                + " coder names that differ only in case or spaces are two coders; "
                + hint
            )
        absent = ", ".join(coders[i] for i in absent_codes)
        who = f"is coded by {', '.join(here)} but not by {absent}"
        said.append((who, hint))
    for u, p in zip(partial.tolist(), pattern.tolist(), strict=True):
        unit = units[u]
        who, hint = said[p]
        others = [x for x in alike[loose[u]] if x != unit]
        if others:
            hint = (
                f"the unit ID {', '.join(repr(x) for x in others)} differs only in "
                "leading zeros, a .0 ending, case or spaces: if it is the same unit, "
                "write the ID the same way in every sheet (format the unit column as Text "
                f"so that leading zeros stay); otherwise {hint}"
            )
        problems.add("partial-unit", f"unit {unit} {who}", hint=hint, unit=unit)


def _is_true(applies: Any) -> np.ndarray:
    """Rows whose applicability is True (Python's or numpy's); None and False are not."""
    values = np.asarray(applies)
    if values.dtype == bool:
        return values.copy()
    return np.fromiter((a is not None and bool(a) for a in values), bool, len(values))


def _is_false(applies: Any) -> np.ndarray:
    """Rows whose applicability is False (Python's or numpy's); None and True are not."""
    values = np.asarray(applies)
    if values.dtype == bool:
        return ~values
    return np.fromiter((a is not None and not a for a in values), bool, len(values))


def _loose_id(unit: str) -> str:
    """A unit ID without case, spaces, leading zeros of its numbers and a ``.0`` ending
    (``ENC-007`` ~ ``enc-7``, ``12.0`` ~ ``12``)."""
    folded = "".join(str(unit).casefold().split())
    folded = re.sub(r"^([0-9]+)\.0+$", r"\1", folded)  # 12.0, as a float column writes 12
    return re.sub(r"(?<![0-9])0+(?=[0-9])", "", folded)


def _row_place(row: pd.Series) -> dict[str, Any]:
    """The place of a long-table row, as problem keyword arguments."""
    return {
        "file": row["file"],
        "sheet": row["sheet"],
        "cell": none_for_na(row["cell"]),
        "line": row["_line"],
        "unit": row["unit"],
        "coder": row["coder"],
        "variable": row["variable"],
    }


def _short(value: Any) -> str:
    if isinstance(value, tuple):
        return ";".join(str(v) for v in value)
    return str(value)
