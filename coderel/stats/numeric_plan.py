"""The bootstrap formulas of the intraclass correlations and Lin's concordance coefficient.

:func:`add_numeric` puts each unit's ANOVA sums (:mod:`coderel.stats.icc`) and, per coder pair,
its concordance sums (:mod:`coderel.stats.concordance`) into a plan's contribution matrix, and
returns the formulas over weighted sums, so that these coefficients share the one matrix of unit
weights with every other coefficient (:mod:`coderel.stats.bootstrap`).

Coders who gave the variable no value at all are left out first (their column would make every
unit incomplete), so the result does not depend on coders of other variables.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from itertools import combinations
from typing import Protocol

import numpy as np

from coderel.stats.concordance import ccc_contributions, ccc_from_sums, mean_pairwise
from coderel.stats.icc import ICC_FORMS, complete_rows, icc_contributions, icc_from_sums

Formula = Callable[[np.ndarray], np.ndarray]
#: The keys of the coefficients this module adds.
NUMERIC_COEFFICIENTS: tuple[str, ...] = (*ICC_FORMS, "ccc")
#: Lin's pair-averaged coefficient is bootstrapped only up to this many coder pairs with units in
#: common: each pair adds six columns per unit to the plan (a bound on memory chosen by coderel,
#: not a published rule). Above it the estimate is given without an interval.
MAX_BOOTSTRAP_PAIRS = 10
#: Above this many coders no pairwise result is computed at all (crowd data: the pairs grow as
#: k^2 and each rests on few units); a bound chosen by coderel.
MAX_PAIR_CODERS = 10


class _Adds(Protocol):
    def add(self, block: np.ndarray) -> int | slice: ...


@dataclass(frozen=True)
class NumericFacts:
    """What :func:`add_numeric` needs to know of all of a project's units when it is given only
    some of them (a partition of the dask engine): the units with every coder's value and the
    mean of their values (the centre of the ANOVA sums), the coder pairs with two or more units
    in common, and the mean of all the numbers (the centre of Lin's sums)."""

    complete_units: int
    complete_centre: float
    pairs: tuple[tuple[int, int], ...]
    centre: float


def numeric_values(x: np.ndarray, values: np.ndarray, keep_all: bool = False) -> np.ndarray:
    """Units x coders numbers from value indices into ``values`` (``-1``: no value -> ``nan``),
    keeping only coders who gave the variable at least one value (every coder: ``keep_all``)."""
    domain = np.asarray(values, dtype=float)
    out = np.where(x >= 0, domain[np.maximum(x, 0)] if len(domain) else np.nan, np.nan)
    if keep_all:
        return out
    used = np.isfinite(out).any(axis=0)
    return out[:, used]


def add_numeric(
    b: _Adds, numbers: np.ndarray, facts: NumericFacts | None = None
) -> dict[str, Formula]:
    """Add the contributions of the six ICC forms and of Lin's rho_c to builder ``b``.

    Parameters
    ----------
    b
        A plan builder (``add(block)`` returns the column or columns given to the block).
    numbers
        Units x coders numbers, ``nan`` where a coder gave no value (see :func:`numeric_values`).
    facts
        The project's facts when ``numbers`` holds only some of its units (else taken from
        ``numbers``).

    Returns
    -------
    dict
        ``icc_1_1`` ... ``icc_3_k`` (complete units only, Shrout & Fleiss 1979) and ``ccc``
        (Lin 1989; the mean over coder pairs, each pair on the units both coded).
    """
    k = numbers.shape[1]
    formulas: dict[str, Formula] = {}
    complete = int(complete_rows(numbers).sum()) if facts is None else facts.complete_units
    if k >= 2 and complete >= 2:
        centre = None if facts is None else facts.complete_centre
        cols = b.add(icc_contributions(numbers, centre))
        for form in ICC_FORMS:
            formulas[form] = lambda s, form=form: icc_from_sums(s[:, cols], k, form)
    else:
        # Fewer than two complete units: every form is undefined; no columns are needed.
        for form in ICC_FORMS:
            formulas[form] = _undefined
    pairs = pairs_with_common_units(numbers) if facts is None else list(facts.pairs)
    if pairs and len(pairs) <= MAX_BOOTSTRAP_PAIRS:
        if facts is None:
            finite = numbers[np.isfinite(numbers)]
            centre = float(np.mean(finite)) if finite.size else 0.0
        else:
            centre = facts.centre
        pair_cols = [
            b.add(ccc_contributions(numbers[:, i], numbers[:, j], centre)) for i, j in pairs
        ]
        formulas["ccc"] = lambda s: mean_pairwise([ccc_from_sums(s[:, c]) for c in pair_cols])
    return formulas


def _undefined(s: np.ndarray) -> np.ndarray:
    return np.full(s.shape[0], np.nan)


def pairs_with_common_units(numbers: np.ndarray) -> list[tuple[int, int]]:
    """Coder pairs (i < j) with at least two units valued by both; none above
    :data:`MAX_PAIR_CODERS` coders."""
    k = numbers.shape[1]
    if k < 2 or k > MAX_PAIR_CODERS:
        return []
    ok = np.isfinite(numbers).astype(np.int64)
    common = ok.T @ ok
    return [(i, j) for i, j in combinations(range(k), 2) if common[i, j] >= 2]
