"""The coefficient list, the conventions of the field that decide intervals and notes, and the
slugs that say why an interval is withheld."""

from __future__ import annotations

import math

from coderel.stats.numeric_plan import NUMERIC_COEFFICIENTS

COEFFICIENTS: tuple[str, ...] = (
    "percent_agreement",
    "cohen_kappa",
    "weighted_kappa_linear",
    "weighted_kappa_quadratic",
    "light_kappa",
    "fleiss_kappa",
    "krippendorff_alpha",
    "scott_pi",
    "brennan_prediger",
    "gwet_ac1",
    "gwet_ac2",
    "pabak",
    *NUMERIC_COEFFICIENTS,
)
#: Fewer pairable units than this and no interval is given (common practice, no source).
MIN_UNITS_FOR_INTERVAL = 10
#: Percent agreement at or above this with alpha below the tentative threshold is flagged as the
#: prevalence paradox (Feinstein & Cicchetti 1990); the cut-off is common practice, no source.
PARADOX_AGREEMENT = 0.85
#: A category used for less than this share of a variable's values is called "rare" in the notes
#: (common practice, no source).
RARE_SHARE = 0.05
APPLIES_SUFFIX = " [applies]"
THIN_DATA = "too-few-units"
ONE_VALUE_USED = "one-value-used"
PERFECT_AGREEMENT = "perfect-agreement"
TOO_FEW_REPLICATES = "too-few-replicates"


def min_replicates(ci_level: float) -> int:
    """The fewest bootstrap replicates that leave one replicate in each tail of the interval.

    Below ``2 / (1 - ci_level)`` (40 at 95%) an interval end is an extreme replicate or an
    interpolation between two, not a quantile; no interval is then given.

    >>> min_replicates(0.95), min_replicates(0.80)
    (40, 10)
    """
    return math.ceil(round(2.0 / (1.0 - ci_level), 9))


#: The verdict when alpha stands on fewer than :data:`MIN_UNITS_FOR_INTERVAL` pairable units: a
#: "reliable" on three units would be a confident word for what the data cannot show.
TOO_FEW_UNITS_VERDICT = "too few units"
