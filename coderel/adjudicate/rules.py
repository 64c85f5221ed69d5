"""Rules that settle a cell without an adjudicator: unanimity, majority, and numeric tolerance.

One function, :func:`settle`, decides for the adjudication list (which cells go on it) and for the
merge (each cell's status), so that an adjudicator sees exactly the cells the chosen rule leaves
open. Agreement coefficients never use these rules.

``unanimous``
    the cell is settled when every coder who coded the unit gave the same token;
``majority``
    also when more than half of those coders gave the same token (a tie, or a plurality short of
    half, stays open; a blank never wins);
tolerance (interval and ratio variables, ``--tolerance VAR=5``)
    numbers that differ by at most the tolerance count as agreeing. When every coder's number lies
    within the tolerance of the others (largest minus smallest <= tolerance) the cell is settled
    with status ``within_tolerance`` and the final value is the **median** of the coders' numbers
    (for a whole-number variable rounded to the nearest whole number, halves to even). Under
    ``majority``, more than half of the coders whose numbers lie within the tolerance of each other
    settle the cell as ``majority``, with the median of their numbers.

The median is used rather than the mean so that, with three or more coders, one number at the far
end of the tolerance does not pull the final value (common practice, no source).
"""

from __future__ import annotations

import math
import re
from collections import Counter
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal, get_args

import numpy as np

from coderel.adjudicate.tokens import NA_TOKEN, Token, classify
from coderel.codebook import Codebook, Variable
from coderel.errors import UsageError

Rule = Literal["unanimous", "majority"]
RULES: tuple[str, ...] = get_args(Rule)
#: How the final value of numbers within the tolerance is formed.
TOLERANCE_CENTRE = "median"


@dataclass(frozen=True)
class Settling:
    """The rule and the tolerances (variable -> largest difference that still agrees)."""

    rule: str = "unanimous"
    tolerance: Mapping[str, float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.rule not in RULES:
            raise UsageError(f"rule must be one of {', '.join(RULES)}, not {self.rule!r}")

    def to_dict(self) -> dict[str, Any]:
        return {
            "rule": self.rule,
            "tolerance": dict(self.tolerance),
            "tolerance_value": TOLERANCE_CENTRE if self.tolerance else None,
        }

    def describe(self) -> str:
        """``majority; tolerance distance_m = 5 (median)`` for messages and the list's sheet."""
        text = self.rule
        if self.tolerance:
            parts = ", ".join(f"{n} = {v:g}" for n, v in self.tolerance.items())
            text += f"; tolerance {parts} ({TOLERANCE_CENTRE} of the numbers)"
        return text


_TOLERANCE = re.compile(r"^\s*([^=]+?)\s*=\s*([^=]+?)\s*$")


def parse_tolerances(items: Iterable[str], codebook: Codebook) -> dict[str, float]:
    """``["distance_m=5", "visitors=1"]`` -> ``{"distance_m": 5.0, "visitors": 1.0}``.

    Raises
    ------
    UsageError
        For text that is not ``VAR=NUMBER``, a variable the codebook lacks or that is not interval
        or ratio, a negative or non-finite number, or a variable given twice.
    """
    out: dict[str, float] = {}
    for item in items:
        match = _TOLERANCE.match(str(item))
        if match is None:
            raise UsageError(
                f"--tolerance {item!r}: write VARIABLE=NUMBER, for example distance_m=5"
            )
        name, text = match.groups()
        if name not in codebook:
            raise UsageError(f"--tolerance {item!r}: the codebook has no variable {name!r}")
        if not codebook.variable(name).is_numeric:
            raise UsageError(
                f"--tolerance {item!r}: {name!r} is {codebook.variable(name).level}; a tolerance "
                "applies to interval and ratio variables only"
            )
        try:
            value = float(text.replace(",", "."))
        except ValueError:
            raise UsageError(f"--tolerance {item!r}: {text!r} is not a number") from None
        if not math.isfinite(value) or value < 0:
            raise UsageError(f"--tolerance {item!r}: the tolerance is a number >= 0")
        if name in out:
            raise UsageError(f"--tolerance: {name!r} is given twice")
        out[name] = value
    return out


def _centre(var: Variable, numbers: Sequence[float]) -> float:
    value = float(np.median(np.asarray(numbers, dtype=float)))
    if var.integer:
        value = float(round(value))  # Python's round: halves to even
    return value


def _closest_group(numbers: Sequence[float], tolerance: float) -> list[float]:
    """The largest set of numbers whose largest minus smallest is at most ``tolerance``
    (the first such window in ascending order)."""
    ordered = sorted(numbers)
    best: list[float] = []
    start = 0
    for end in range(len(ordered)):
        while ordered[end] - ordered[start] > tolerance:
            start += 1
        if end - start + 1 > len(best):
            best = ordered[start : end + 1]
    return best


def settle(
    var: Variable, tokens: Mapping[str, Token], settling: Settling
) -> tuple[str, Token] | None:
    """Status and final token of a cell the rules settle, or ``None`` when it stays open.

    Statuses: ``single`` (one coder), ``agreed``, ``not_applicable`` (every coder's condition is
    false), ``within_tolerance``, ``majority``. A cell whose coders all left it blank stays open.
    """
    if not tokens:
        return None
    distinct = set(tokens.values())
    if distinct == {NA_TOKEN}:
        return "not_applicable", NA_TOKEN
    if classify(tokens) is None:
        return ("single" if len(tokens) == 1 else "agreed"), next(iter(distinct))
    tolerance = settling.tolerance.get(var.name) if var.is_numeric else None
    if tolerance is not None:
        kinds = {k for k, _ in tokens.values()}
        numbers = [float(v) for k, v in tokens.values() if k == "value"]
        if kinds == {"value"} and max(numbers) - min(numbers) <= tolerance:
            return "within_tolerance", ("value", _centre(var, numbers))
    if settling.rule != "majority":
        return None
    n = len(tokens)
    counts = Counter(tokens.values())
    token, count = max(counts.items(), key=lambda item: item[1])
    if 2 * count > n and token[0] != "blank":
        return "majority", token
    if tolerance is not None:
        numbers = [float(v) for k, v in tokens.values() if k == "value"]
        group = _closest_group(numbers, tolerance)
        if 2 * len(group) > n:
            return "majority", ("value", _centre(var, group))
    return None


__all__ = ["RULES", "TOLERANCE_CENTRE", "Rule", "Settling", "parse_tolerances", "settle"]
