"""Shared fixtures: a small codebook of the invented park rangers' scenario."""

from __future__ import annotations

import pytest

from coderel.codebook import Category, Codebook, Condition, MissingCode, Variable


def ranger_codebook() -> Codebook:
    """Seven variables covering every level, a multi-select, a count and skip logic."""
    cannot = (MissingCode(99, "cannot be coded"),)
    return Codebook(
        title="Wildlife encounters (invented test scenario)",
        unit="report_id",
        text_columns=("narrative",),
        variables=(
            Variable(
                "animal",
                "nominal",
                categories=(
                    Category(1, "Bear"),
                    Category(2, "Elk"),
                    Category(3, "Cougar"),
                    Category(4, "Other"),
                ),
                missing=cannot,
            ),
            Variable(
                "behaviour",
                "ordinal",
                categories=(Category(1, "Calm"), Category(2, "Alert"), Category(3, "Aggressive")),
                missing=cannot,
            ),
            Variable("contact", "nominal", categories=(Category(1, "Yes"), Category(2, "No"))),
            Variable(
                "injury",
                "ordinal",
                categories=(Category(1, "None"), Category(2, "Minor"), Category(3, "Serious")),
                missing=cannot,
                applies_when=Condition("contact", (1,)),
            ),
            Variable("distance_m", "ratio", range=(0.0, 1000.0), missing=(MissingCode(-1),)),
            Variable("visitors", "ratio", range=(0.0, 100.0), integer=True),
            Variable(
                "factors",
                "nominal",
                multiple=True,
                categories=(
                    Category(1, "Food"),
                    Category(2, "Dog"),
                    Category(3, "Trail"),
                    Category(4, "Night"),
                ),
            ),
        ),
    )


@pytest.fixture
def codebook() -> Codebook:
    return ranger_codebook()
