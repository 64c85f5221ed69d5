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
from itertools import combinations
from typing import Protocol

import numpy as np

from coderel.stats.concordance import ccc_contributions, ccc_from_sums, mean_pairwise
from coderel.stats.icc import ICC_FORMS, icc_contributions, icc_from_sums

Formula = Callable[[np.ndarray], np.ndarray]
#: The keys of the coefficients this module adds.
NUMERIC_COEFFICIENTS: tuple[str, ...] = (*ICC_FORMS, "ccc")


class _Adds(Protocol):
    def add(self, block: np.ndarray) -> int | slice: ...


def numeric_values(x: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Units x coders numbers from value indices into ``values`` (``-1``: no value -> ``nan``),
    keeping only coders who gave the variable at least one value."""
    domain = np.asarray(values, dtype=float)
    out = np.where(x >= 0, domain[np.maximum(x, 0)] if len(domain) else np.nan, np.nan)
    used = np.isfinite(out).any(axis=0)
    return out[:, used]


def add_numeric(b: _Adds, numbers: np.ndarray) -> dict[str, Formula]:
    """Add the contributions of the six ICC forms and of Lin's rho_c to builder ``b``.

    Parameters
    ----------
    b
        A plan builder (``add(block)`` returns the column or columns given to the block).
    numbers
        Units x coders numbers, ``nan`` where a coder gave no value (see :func:`numeric_values`).

    Returns
    -------
    dict
        ``icc_1_1`` ... ``icc_3_k`` (complete units only, Shrout & Fleiss 1979) and ``ccc``
        (Lin 1989; the mean over coder pairs, each pair on the units both coded).
    """
    k = numbers.shape[1]
    formulas: dict[str, Formula] = {}
    cols = b.add(icc_contributions(numbers))
    for form in ICC_FORMS:
        formulas[form] = lambda s, form=form: icc_from_sums(s[:, cols], k, form)
    finite = numbers[np.isfinite(numbers)]
    centre = float(np.mean(finite)) if finite.size else 0.0
    pair_cols = []
    for i, j in combinations(range(k), 2):
        pair_cols.append(b.add(ccc_contributions(numbers[:, i], numbers[:, j], centre)))
    if pair_cols:
        formulas["ccc"] = lambda s: mean_pairwise([ccc_from_sums(s[:, c]) for c in pair_cols])
    return formulas
