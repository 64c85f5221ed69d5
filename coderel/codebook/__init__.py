"""Codebook: schema of the coded variables, loading with line-numbered checks, exchange formats."""

from coderel.codebook.model import (
    CATEGORICAL_LEVELS,
    LEVELS,
    MULTI_SEPARATOR,
    NUMERIC_LEVELS,
    Category,
    Code,
    Codebook,
    Condition,
    Level,
    MissingCode,
    Thresholds,
    Variable,
)

__all__ = [
    "CATEGORICAL_LEVELS",
    "LEVELS",
    "MULTI_SEPARATOR",
    "NUMERIC_LEVELS",
    "Category",
    "Code",
    "Codebook",
    "Condition",
    "Level",
    "MissingCode",
    "Thresholds",
    "Variable",
]
