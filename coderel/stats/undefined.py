"""Machine-readable reasons why a coefficient has no value.

A coefficient that cannot be computed is reported as ``estimate=None`` with one of these reasons,
never as a crash and never as a silent 0 or 1 (compare scikit-learn's ``replace_undefined_by``).
"""

from __future__ import annotations

from typing import Final

NO_VARIATION: Final = "no-variation"
"""All pairable values are the same: expected disagreement is zero, the ratio is 0/0."""
TOO_FEW_PAIRABLE: Final = "too-few-pairable"
"""Fewer than two pairable values (no unit holds values from two coders)."""
NOT_TWO_CODERS: Final = "not-two-coders"
"""The coefficient is defined for exactly two coders and the variable has another number."""
NOT_ORDINAL: Final = "not-ordinal"
"""Weighted coefficients need an ordinal scale."""
NOT_BINARY: Final = "not-binary"
"""PABAK is defined for two categories only."""
ONE_CATEGORY: Final = "one-category"
"""The codebook lists a single category, so chance agreement over q - 1 categories is 0/0."""

ONE_CATEGORY_PER_CODER: Final = "one-category-per-coder"
"""A standard error is withheld: a coder used one category only, so kappa is 0 by construction
and its large-sample variance degenerates to 0."""
DEGENERATE_SE: Final = "degenerate-se"
"""A standard error is withheld: the large-sample variance is 0 or below on these data."""

REASONS: Final[dict[str, str]] = {
    NO_VARIATION: "every pairable value is the same, so agreement beyond chance is undefined",
    TOO_FEW_PAIRABLE: "fewer than two pairable values (no unit coded by two coders)",
    NOT_TWO_CODERS: "defined for exactly two coders",
    NOT_ORDINAL: "weighted coefficients need an ordinal variable",
    NOT_BINARY: "defined for variables with exactly two categories",
    ONE_CATEGORY: "the codebook lists one category only",
    ONE_CATEGORY_PER_CODER: "a coder used one category only: kappa is 0 by construction and its "
    "large-sample standard error is not meaningful",
    DEGENERATE_SE: "the large-sample variance is 0 on these data: no standard error",
}


def describe(reason: str) -> str:
    """Plain words for a reason slug (the slug itself when unknown)."""
    return REASONS.get(reason, reason)
