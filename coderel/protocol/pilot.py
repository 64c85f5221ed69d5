"""A pilot's codings as the statistics need them: per variable a units x coders matrix of value
indices over the units coded by two or more coders, the variable's scale, and category shares.

Values that count are those :mod:`coderel.agree` counts: a value (not blank, not a missing code)
where the coder's own values say the variable applies.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from coderel.codebook import Variable
from coderel.codings import Codings
from coderel.stats.plan import Scale


@dataclass(frozen=True)
class PilotVariable:
    """One variable of the pilot.

    ``x`` holds the units coded (this variable) by two or more coders, as value indices into the
    scale (``-1``: no value); ``counts`` how often each category code was used over all the
    pilot's values (single-choice and multi-select variables; empty for numeric ones).
    """

    variable: Variable
    x: np.ndarray
    scale: Scale
    counts: dict[object, int]
    values: int

    @property
    def pairable_units(self) -> int:
        return int(((self.x >= 0).sum(axis=1) >= 2).sum())


@dataclass(frozen=True)
class Pilot:
    """Every variable of a pilot, with the pilot's units and coders."""

    variables: dict[str, PilotVariable]
    units: int
    coders: tuple[str, ...]
    multi_coded_units: int


def _category_counts(var: Variable, values: list[object]) -> dict[object, int]:
    counts: dict[object, int] = dict.fromkeys(var.codes, 0)
    for value in values:
        for code in value if var.multiple else (value,):
            if code in counts:
                counts[code] += 1
    return counts


def pilot_from_codings(codings: Codings) -> Pilot:
    """Build the pilot's matrices from the long table (any file format, any row order)."""
    frame = codings.frame
    coders = sorted(codings.coders)
    applies = frame["applies"].to_numpy(dtype=object)
    counts_row = frame["value"].notna().to_numpy() & np.array([a is not False for a in applies])
    kept = frame[counts_row]
    per_unit = frame.groupby("unit")["coder"].nunique()
    multi = int((per_unit >= 2).sum())
    out: dict[str, PilotVariable] = {}
    for var in codings.codebook.variables:
        sub = kept[kept["variable"] == var.name]
        values = list(sub["value"])
        units = sorted(set(sub["unit"]))
        unit_ix = pd.Index(units, dtype=object).get_indexer(sub["unit"].to_numpy(dtype=object))
        coder_ix = pd.Index(coders, dtype=object).get_indexer(sub["coder"].to_numpy(dtype=object))
        if var.is_categorical and not var.multiple:
            domain: dict[object, int] = {code: i for i, code in enumerate(var.codes)}
            scale = Scale("categorical", var.level, len(domain))
            keys: list[object] = values
        elif var.multiple:
            keys = [frozenset(v) for v in values]
            sets = tuple(sorted(set(keys), key=lambda s: sorted(map(str, s))))
            domain = {s: i for i, s in enumerate(sets)}
            scale = Scale("set", "nominal", len(sets), sets=sets)
        else:
            keys = [float(v) for v in values]
            distinct = np.array(sorted(set(keys)), dtype=float)
            domain = {v: i for i, v in enumerate(distinct.tolist())}
            scale = Scale("numeric", var.level, len(distinct), values=distinct)
        x = np.full((len(units), len(coders)), -1, dtype=int)
        if len(keys):
            x[unit_ix, coder_ix] = np.fromiter(
                (domain[k] for k in keys), dtype=int, count=len(keys)
            )
        x = x[(x >= 0).sum(axis=1) >= 2]
        counts = _category_counts(var, values) if var.is_categorical else {}
        out[var.name] = PilotVariable(var, x, scale, counts, len(values))
    return Pilot(out, len(per_unit), tuple(coders), multi)
