"""What the report keeps of the long table of codings: a few counts, not the table.

:func:`table_facts` reads everything :func:`coderel.report.build_report` needs from
:class:`~coderel.codings.Codings` (and from the merge result, when a decisions file was given) at
once: the codebook, units, coders and sources, the completeness counts of the summary, the
adjudication progress and each coder's agreement with the final values. The result holds no
reference to the table, so ``coderel report`` drops the table before the bootstrap, as
``coderel agree`` does (:mod:`coderel.agree.prepare`; tests/test_report_memory.py). The counts
are vectorised over the table's category codes: one pass over millions of labels, no Python
object per label.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook.model import MULTI_SEPARATOR, Codebook
from coderel.codings import Codings, SourceFile
from coderel.merge.result import SETTLED, STATUSES
from coderel.report.model import Adjudication, CoderFinal, number_or_none


@dataclass(frozen=True)
class TableFacts:
    """The long table's share of the report: counts and names, without the table.

    ``cells_filled`` counts the rows of the codebook's variables that hold a value;
    ``cells_not_applicable`` the blank ones whose ``applies_when`` condition is false;
    ``units_all_coders``, ``units_per_coder`` and ``units_one_coder`` count units by the coders
    who have rows for them (any variable, blank or not). ``adjudication`` and ``final`` are the
    merge result's parts of the report (``None`` without a decisions file).
    """

    codebook: Codebook
    units: tuple[str, ...]
    coders: tuple[str, ...]
    sources: tuple[SourceFile, ...]
    cells_filled: int
    cells_not_applicable: int
    units_all_coders: int
    units_per_coder: tuple[tuple[str, int], ...]
    units_one_coder: int
    adjudication: Adjudication | None = None
    final: tuple[CoderFinal, ...] | None = None


def table_facts(
    codings: Codings,
    merged: Any | None = None,
    *,
    units: Sequence[str] | None = None,
    coders: Sequence[str] | None = None,
) -> TableFacts:
    """The counts and names the report takes from ``codings`` (and ``merged``).

    ``units`` and ``coders`` are ``codings.units`` and ``codings.coders`` when the caller has
    them already (:class:`coderel.agree.prepare.Prepared` holds both); else they are computed.
    """
    unit_names = tuple(codings.units if units is None else units)
    coder_names = tuple(str(c) for c in (codings.coders if coders is None else coders))
    frame = codings.frame
    codebook = codings.codebook
    filled, not_applicable = _cells(frame, codebook)
    per_unit, per_coder = _coders_per_unit(frame)
    adjudication = final = None
    if merged is not None:
        adjudication = _adjudication(merged, codebook)
        final = _coder_final(codings, merged, coder_names)
    return TableFacts(
        codebook=codebook,
        units=unit_names,
        coders=coder_names,
        sources=tuple(codings.sources),
        cells_filled=filled,
        cells_not_applicable=not_applicable,
        units_all_coders=int((per_unit == len(coder_names)).sum()),
        units_per_coder=tuple((c, int(per_coder.get(c, 0))) for c in coder_names),
        units_one_coder=int((per_unit == 1).sum()),
        adjudication=adjudication,
        final=final,
    )


#: Rows of the table looked at in one go by :func:`_cells` (a few object arrays of this length
#: at a time beside the table, instead of a copy of each column).
BLOCK_ROWS = 1 << 20


def _cells(frame: pd.DataFrame, codebook: Codebook) -> tuple[int, int]:
    """Rows of the codebook's variables with a value (not ``None``), and blank rows whose
    condition is false (``applies`` is ``False``), a block of rows at a time."""
    names = [v.name for v in codebook.variables]
    in_cb = frame["variable"].isin(names).to_numpy()
    filled = not_applicable = 0
    for start in range(0, len(frame), BLOCK_ROWS):
        rows = slice(start, start + BLOCK_ROWS)
        keep = in_cb[rows]
        values = frame["value"].iloc[rows].to_numpy(dtype=object)[keep]
        blank = np.equal(values, None)
        filled += int(len(values) - blank.sum())
        applies = frame["applies"].iloc[rows].to_numpy(dtype=object)[keep][blank]
        # `is False`, as the table stores it: None (condition value blank) and True do not count
        not_applicable += sum(1 for a in applies.tolist() if a is False)
    return filled, not_applicable


def _coders_per_unit(frame: pd.DataFrame) -> tuple[np.ndarray, pd.Series]:
    """Per unit with rows the number of distinct coders with rows for it, and per coder name the
    number of distinct units, from the columns' category codes (a units x coders grid of flags
    when it takes at most 64 MB, as :func:`coderel.agree.prepare.prepare` counts single-coded
    units)."""
    unit = frame["unit"]
    coder = frame["coder"]
    if not isinstance(unit.dtype, pd.CategoricalDtype):
        unit = unit.astype("category")
    if not isinstance(coder.dtype, pd.CategoricalDtype):
        coder = coder.astype("category")
    u = unit.cat.codes.to_numpy()
    c = coder.cat.codes.to_numpy()
    ok = (u >= 0) & (c >= 0)
    n_units, n_coders = len(unit.cat.categories), len(coder.cat.categories)
    if n_units * n_coders <= 64_000_000:
        seen = np.zeros((n_units, n_coders), dtype=bool)
        seen[u[ok], c[ok]] = True
        per_unit = seen.sum(axis=1)
        per_coder = seen.sum(axis=0)
    else:
        pairs = np.unique(u[ok].astype(np.int64) * n_coders + c[ok])
        per_unit = np.bincount(pairs // n_coders, minlength=n_units)
        per_coder = np.bincount(pairs % n_coders, minlength=n_coders)
    # units and coders without rows are no groups (a table restricted to some units keeps every
    # category)
    return per_unit[per_unit > 0], pd.Series(per_coder, index=coder.cat.categories.astype(str))


def _adjudication(merged: Any, codebook: Codebook) -> Adjudication:
    frame: pd.DataFrame = merged.frame
    totals = dict.fromkeys(STATUSES, 0)
    by_var = []
    for var in codebook.variables:
        col = f"{var.name}_status"
        if col not in frame.columns:
            continue
        counts = frame[col].value_counts()
        row = tuple(int(counts.get(s, 0)) for s in STATUSES)
        for s, n in zip(STATUSES, row, strict=True):
            totals[s] += n
        by_var.append((var.name, row))
    return Adjudication(
        rule=str(getattr(merged, "rule", "") or ""),
        totals=tuple(totals.items()),
        by_variable=tuple(by_var),
        tolerance=tuple(
            (str(k), float(v)) for k, v in dict(getattr(merged, "tolerance", {})).items()
        ),
    )


def _coder_final(codings: Codings, merged: Any, coders: Sequence[str]) -> tuple[CoderFinal, ...]:
    """Each coder against the final value, per single-choice categorical variable.

    Percent agreement pools all settled cells; Cohen's kappa (Cohen, 1960) is computed per
    variable on the coder-by-final table over the codebook's categories, then averaged.
    """
    from coderel.stats.kappa import cohen_kappa_table

    frame: pd.DataFrame = merged.frame
    unit_col = "unit" if "unit" in frame.columns else frame.columns[0]
    final = frame.set_index(frame[unit_col].astype(str))
    out = []
    for coder in coders:
        agree_n = 0
        total_n = 0
        kappas: list[float] = []
        per_var = []
        for var in codings.codebook.variables:
            if var.name not in final.columns or f"{var.name}_status" not in final.columns:
                continue
            wide = codings.wide(var.name)
            if coder not in wide.columns:
                continue
            status = final[f"{var.name}_status"]
            values = final[var.name]
            pairs = []
            for unit, mine in wide[coder].items():
                if mine is None or unit not in final.index or status.get(unit) not in SETTLED:
                    continue
                theirs = values.get(unit)
                if _missing(theirs):
                    continue
                pairs.append((_canon(mine), _canon(theirs)))
            if not pairs:
                continue
            same = sum(1 for a, b in pairs if a == b)
            agree_n += same
            total_n += len(pairs)
            kap = None
            if var.is_categorical and not var.multiple and var.codes:
                pos = {_canon(c): i for i, c in enumerate(var.codes)}
                table = np.zeros((len(pos), len(pos)), dtype=np.int64)
                for a, b in pairs:
                    if a in pos and b in pos:
                        table[pos[a], pos[b]] += 1
                kap = number_or_none(cohen_kappa_table(table)[0])
                if kap is not None:
                    kappas.append(kap)
            per_var.append((var.name, len(pairs), same / len(pairs), kap))
        out.append(
            CoderFinal(
                coder=coder,
                units=total_n,
                percent_agreement=agree_n / total_n if total_n else None,
                mean_kappa=float(np.mean(kappas)) if kappas else None,
                variables=len(kappas),
                per_variable=tuple(per_var),
            )
        )
    return tuple(out)


def _missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def _canon(value: Any) -> str:
    """One text form for a coder's value and the merged value (``(1, 3)`` and ``'1;3'``)."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, tuple | list | frozenset):
        return MULTI_SEPARATOR.join(str(v) for v in value)
    if isinstance(value, float | int) and not isinstance(value, bool):
        return format(float(value), ".10g")
    return str(value)
