"""Agreement per variable: every coefficient with a seeded unit-level bootstrap interval.

Builds, from the long table, one units x coders matrix of value indices per variable over the
codebook's full category list (or the distinct observed numbers / code sets), hands it to the pure
core in :mod:`coderel.stats`, and evaluates every coefficient of every variable over ONE seeded
matrix of unit weights (``W @ per-unit contributions``; no per-replicate Python loop). Variables
with ``applies_when`` get a second row, ``<variable> [applies]``: agreement on whether the
variable applies, from each coder's own value of the condition variable. Thresholds for the
verdict are conventions of the field (Krippendorff 2004: rely on alpha >= .800, tentative
conclusions for .667 <= alpha < .800).

The package, by what its modules hold: :mod:`~coderel.agree.conventions` (coefficient list,
thresholds, slugs), :mod:`~coderel.agree.results` (result dataclasses),
:mod:`~coderel.agree.matrices` (units x coders matrices from the long table),
:mod:`~coderel.agree.pairwise` (pairs, per-category agreement, standard errors),
:mod:`~coderel.agree.notes` (verdicts and notes), :mod:`~coderel.agree.numeric` (ICC table,
Lin's coefficient and limits of agreement of numeric variables),
:mod:`~coderel.agree.variable_row` (one row) and :mod:`~coderel.agree.driver` (:func:`agreement`).
"""

from coderel.agree.conventions import (
    APPLIES_SUFFIX,
    COEFFICIENTS,
    MIN_UNITS_FOR_INTERVAL,
    ONE_VALUE_USED,
    PARADOX_AGREEMENT,
    PERFECT_AGREEMENT,
    RARE_SHARE,
    THIN_DATA,
    TOO_FEW_REPLICATES,
    TOO_FEW_UNITS_VERDICT,
    min_replicates,
)
from coderel.agree.driver import agreement
from coderel.agree.results import AgreementResult, Estimate, PairAgreement, VariableAgreement

__all__ = [
    "APPLIES_SUFFIX",
    "COEFFICIENTS",
    "MIN_UNITS_FOR_INTERVAL",
    "ONE_VALUE_USED",
    "PARADOX_AGREEMENT",
    "PERFECT_AGREEMENT",
    "RARE_SHARE",
    "THIN_DATA",
    "TOO_FEW_REPLICATES",
    "TOO_FEW_UNITS_VERDICT",
    "AgreementResult",
    "Estimate",
    "PairAgreement",
    "VariableAgreement",
    "agreement",
    "min_replicates",
]
