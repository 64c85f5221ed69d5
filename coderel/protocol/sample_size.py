"""How many units to code by two coders: the minimum for alpha to exceed a smallest acceptable
value, and (with a pilot) the size that gives alpha's interval a wanted precision.

Minimum sample (categorical variables). Krippendorff (2004, *Content Analysis*, 2nd ed., ch. 11.4,
Table 11.2; 2019, 4th ed., ch. 12) takes from Bloch & Kraemer (1989, "2 x 2 kappa coefficients:
measures of agreement or association", *Biometrics* 45, 269-287, eq. 3.7) the number of units two
coders must code so that alpha can be shown to exceed ``a_min`` at one-tailed significance ``p``
when the least frequent category that must be represented has share ``p_c``::

    N >= 2 z_p^2 [ (1 + a_min)(3 - a_min) / (4 (1 - a_min) p_c (1 - p_c)) - a_min ]

rounded up. Table check: p_c = 1/4, p = .05 gives 139 for a_min = .800 and 81 for a_min = .667.

``p_c`` comes, in this order, from a share the user gives, from the pilot's pooled category shares
(the least used category that was used), or from the codebook (1/k for k categories). ``a_min``
comes from the codebook's thresholds (the variable's own or the project's ``reliable`` value, a
convention of the field) unless given.

Precision plan (any variable with a pilot, the only plan for interval and ratio variables): see
:mod:`coderel.protocol.precision`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from statistics import NormalDist
from typing import Any

import pandas as pd

from coderel.codebook import Codebook, Variable
from coderel.errors import UsageError
from coderel.protocol.pilot import Pilot, PilotVariable
from coderel.protocol.precision import (
    CANDIDATE_SIZES,
    MIN_PILOT_UNITS_FOR_PRECISION,
    precision_plans,
)

#: One-tailed significance levels of Krippendorff's table (2004, Table 11.2).
SIGNIFICANCE_LEVELS: tuple[float, ...] = (0.10, 0.05, 0.01, 0.005)
#: A pilot with fewer units coded by two or more coders gives shares and widths too rough to
#: trust (common practice, no source).
MIN_PILOT_UNITS = 30
SOURCE_GIVEN = "given (--smallest-share)"
SOURCE_PILOT = "pilot"
SOURCE_CODEBOOK = "codebook (1/k)"


def z_one_tailed(significance: float) -> float:
    """z_p with P(Z > z_p) = p for the standard normal (1.645 at p = .05)."""
    return NormalDist().inv_cdf(1.0 - significance)


def minimum_units(alpha_min: float, smallest_share: float, significance: float = 0.05) -> int:
    """Bloch & Kraemer (1989, eq. 3.7) as given by Krippendorff (2004, ch. 11.4): the fewest
    units two coders must code so alpha can exceed ``alpha_min`` at one-tailed ``significance``.

    Parameters
    ----------
    alpha_min
        The smallest acceptable alpha, 0 < alpha_min < 1 (.800 or .667 by convention).
    smallest_share
        p_c, the share of the least frequent category that must be represented, 0 < p_c <= .5.
    significance
        One-tailed significance level p, 0 < p < .5.

    Examples
    --------
    Krippendorff (2004), Table 11.2, p_c = 1/4, p = .05:

    >>> minimum_units(0.800, 0.25, 0.05), minimum_units(0.667, 0.25, 0.05)
    (139, 81)
    """
    check_alpha_min(alpha_min)
    check_share(smallest_share)
    if not 0 < significance < 0.5:
        raise UsageError(f"the significance must lie between 0 and .5, not {significance}")
    z = z_one_tailed(significance)
    a, p = alpha_min, smallest_share
    inner = (1 + a) * (3 - a) / (4 * (1 - a) * p * (1 - p)) - a
    # Round away float noise before rounding up (138.50000000000003 is 139, 81.0000000001 is 81).
    return math.ceil(round(2 * z * z * inner, 9))


def check_alpha_min(value: float) -> None:
    if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < value < 1:
        raise UsageError(f"the smallest acceptable alpha must lie between 0 and 1, not {value!r}")


def check_share(value: float) -> None:
    if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < value <= 0.5:
        raise UsageError(
            f"the smallest category share must lie above 0 and at most .5 (the least used of two "
            f"or more categories), not {value!r}"
        )


@dataclass(frozen=True)
class VariablePlan:
    """The plan of one variable."""

    variable: str
    level: str
    categories: int
    alpha_min: float | None
    alpha_min_source: str | None
    smallest_share: float | None
    share_source: str | None
    smallest_category: Any
    n_minimum: int | None
    n_precision: int | None
    pilot_units: int | None
    pilot_alpha: float | None
    curve: tuple[tuple[int, float | None], ...] = ()
    notes: tuple[str, ...] = ()

    @property
    def n(self) -> int | None:
        """The larger of the two sizes (the one that satisfies both aims)."""
        sizes = [s for s in (self.n_minimum, self.n_precision) if s is not None]
        return max(sizes) if sizes else None

    def to_dict(self) -> dict[str, Any]:
        return {
            "variable": self.variable,
            "level": self.level,
            "categories": self.categories,
            "alpha_min": self.alpha_min,
            "alpha_min_source": self.alpha_min_source,
            "smallest_share": self.smallest_share,
            "smallest_share_source": self.share_source,
            "smallest_category": self.smallest_category,
            "n_minimum": self.n_minimum,
            "n_precision": self.n_precision,
            "n": self.n,
            "pilot_units": self.pilot_units,
            "pilot_alpha": self.pilot_alpha,
            "curve": [{"n": n, "half_width": w} for n, w in self.curve],
            "notes": list(self.notes),
        }


@dataclass(frozen=True)
class SamplePlan:
    """The study's plan: one row per variable, the binding variable and the recommendation."""

    variables: tuple[VariablePlan, ...]
    significance: float
    half_width: float | None
    replicates: int
    seed: int
    pilot_units: int | None
    pilot_coders: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default=())

    @property
    def binding(self) -> VariablePlan | None:
        sized = [v for v in self.variables if v.n is not None]
        return max(sized, key=lambda v: v.n) if sized else None  # type: ignore[arg-type,return-value]

    @property
    def recommendation(self) -> int | None:
        b = self.binding
        return b.n if b is not None else None

    def to_dict(self) -> dict[str, Any]:
        b = self.binding
        return {
            "recommendation": self.recommendation,
            "binding_variable": b.variable if b is not None else None,
            "significance": self.significance,
            "z": z_one_tailed(self.significance),
            "half_width": self.half_width,
            "replicates": self.replicates,
            "seed": self.seed,
            "pilot_units": self.pilot_units,
            "pilot_coders": list(self.pilot_coders),
            "variables": [v.to_dict() for v in self.variables],
            "notes": list(self.notes),
        }

    def to_frame(self) -> pd.DataFrame:
        """One row per variable (the curve apart: :meth:`curve_frame`)."""
        rows = []
        for v in self.variables:
            d = v.to_dict()
            d.pop("curve")
            d["notes"] = "; ".join(d["notes"])
            rows.append(d)
        return pd.DataFrame(rows)

    def curve_frame(self) -> pd.DataFrame:
        """Candidate size x variable: the expected 95% interval half-width of alpha."""
        with_curve = [v for v in self.variables if v.curve]
        if not with_curve:
            return pd.DataFrame()
        sizes = [n for n, _ in with_curve[0].curve]
        data: dict[str, list[Any]] = {"n": sizes}
        for v in with_curve:
            data[v.variable] = [w for _, w in v.curve]
        return pd.DataFrame(data)


def _display(var: Variable, code: Any) -> str:
    return var.display(code)


def _pilot_share(pv: PilotVariable) -> tuple[float | None, Any, list[Any]]:
    """(least share among used categories, its code, the codes never used) of a pilot."""
    total = sum(pv.counts.values())
    unused = [c for c, k in pv.counts.items() if k == 0]
    used = [(k / total, c) for c, k in pv.counts.items() if k > 0] if total else []
    if len(used) < 2:
        return None, None, unused
    share, code = min(used, key=lambda t: t[0])
    return share, code, unused


def _alpha_min(codebook: Codebook, var: Variable, given: float | None) -> tuple[float, str]:
    if given is not None:
        return given, "given (--alpha-min)"
    if var.thresholds is not None:
        return var.thresholds.reliable, "variable's threshold (reliable)"
    return codebook.thresholds.reliable, "codebook threshold (reliable)"


def plan_sample(
    codebook: Codebook,
    *,
    pilot: Pilot | None = None,
    smallest_share: float | None = None,
    alpha_min: float | None = None,
    significance: float = 0.05,
    half_width: float = 0.05,
    replicates: int = 1000,
    seed: int = 20261202,
    variables: Sequence[str] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SamplePlan:
    """The reliability sample's size per variable and for the study.

    Parameters
    ----------
    codebook
        Defines the variables, their levels, categories and thresholds.
    pilot
        Codings of a pilot (:func:`coderel.protocol.pilot.pilot_from_codings`): category shares
        for p_c and the precision plan.
    smallest_share
        p_c for every categorical variable; overrides the pilot and the codebook.
    alpha_min
        The smallest acceptable alpha for every variable; overrides the codebook's thresholds.
    significance
        One-tailed significance of the minimum-sample formula: .10, .05, .01 or .005.
    half_width
        The precision plan's target: expected half-width of alpha's 95% interval.
    replicates, seed
        The precision plan's bootstrap.
    variables
        Only these variables (all when ``None``).
    """
    if significance not in SIGNIFICANCE_LEVELS:
        raise UsageError(
            "the significance must be one of "
            + ", ".join(f"{s:g}" for s in SIGNIFICANCE_LEVELS)
            + f" (Krippendorff's table), not {significance:g}"
        )
    if alpha_min is not None:
        check_alpha_min(alpha_min)
    if smallest_share is not None:
        check_share(smallest_share)
    if not 0 < half_width < 1:
        raise UsageError(f"the half-width must lie between 0 and 1 (e.g. 0.05), not {half_width}")
    if isinstance(replicates, bool) or not isinstance(replicates, int) or replicates < 100:
        raise UsageError(f"the precision plan needs 100 or more replicates, not {replicates!r}")
    chosen = [v for v in codebook.variables if variables is None or v.name in variables]
    precision: dict[str, Any] = {}
    if pilot is not None:
        pvs = [pilot.variables[v.name] for v in chosen]
        results = precision_plans(
            pvs,
            target=half_width,
            replicates=replicates,
            seed=seed,
            progress=progress,
        )
        precision = {pv.variable.name: r for pv, r in zip(pvs, results, strict=True)}
    rows = [
        _variable_plan(
            codebook, var, pilot, precision.get(var.name), smallest_share, alpha_min, significance
        )
        for var in chosen
    ]
    notes = []
    if pilot is not None and pilot.multi_coded_units < MIN_PILOT_UNITS:
        notes.append(
            f"the pilot has {pilot.multi_coded_units} units coded by two or more coders: too few "
            f"to trust its category shares or interval widths (at least {MIN_PILOT_UNITS} is "
            "common practice, no source); treat every pilot-based figure as rough"
        )
    if any(r.n_minimum is not None for r in rows):
        notes.append(
            "N grows with the number of categories that must be represented: the rarer the least "
            "frequent category that must show up, the larger the sample"
        )
    if pilot is not None and pilot.coders and len(pilot.coders) != 2:
        notes.append(
            f"the pilot has {len(pilot.coders)} coders; the minimum-sample formula is for two "
            "coders, the precision plan uses all of them"
        )
    return SamplePlan(
        tuple(rows),
        significance,
        half_width if pilot is not None else None,
        replicates,
        seed,
        pilot.multi_coded_units if pilot is not None else None,
        pilot.coders if pilot is not None else (),
        tuple(notes),
    )


def _variable_plan(
    codebook: Codebook,
    var: Variable,
    pilot: Pilot | None,
    precision: Any,
    smallest_share: float | None,
    alpha_min: float | None,
    significance: float,
) -> VariablePlan:
    notes: list[str] = []
    pv = pilot.variables[var.name] if pilot is not None else None
    a_min, a_source = _alpha_min(codebook, var, alpha_min)
    share: float | None = None
    source: str | None = None
    smallest: Any = None
    n_min: int | None = None
    k = len(var.categories)
    if var.is_categorical:
        if smallest_share is not None:
            share, source = smallest_share, SOURCE_GIVEN
            if k >= 2 and smallest_share > 1.0 / k + 1e-12:
                notes.append(
                    f"p_c = {smallest_share:g} exceeds 1/{k}: not all {k} categories can be that "
                    "frequent, so this N assumes the rarest ones need not be represented"
                )
        elif pv is not None:
            share, smallest, unused = _pilot_share(pv)
            if unused:
                notes.append(
                    "never used in the pilot: "
                    + ", ".join(_display(var, c) for c in unused)
                    + "; the pilot cannot say how rare they are - if they must be represented, "
                    "give --smallest-share"
                )
            if share is not None:
                source = SOURCE_PILOT
                smallest = _display(var, smallest)
            else:
                notes.append("fewer than two categories used in the pilot: p_c from the codebook")
        if share is None and k >= 2:
            share, source = 1.0 / k, SOURCE_CODEBOOK
        if share is not None:
            n_min = minimum_units(a_min, share, significance)
        if var.multiple:
            notes.append(
                "multi-select: the formula is for single-choice data (p_c from a pilot is the "
                "share of the least used code among all codes chosen); treat N as a guide"
            )
        if var.applies_when is not None:
            notes.append(
                f"N counts units where the variable applies ({var.applies_when.variable} "
                "includes " + ", ".join(map(str, var.applies_when.includes)) + "); draw more "
                "units so that enough of them qualify"
            )
    else:
        notes.append(
            "interval or ratio: the minimum-sample formula is for categories; "
            + ("see the precision plan" if pv is not None else "give --pilot for a precision plan")
        )
    n_prec = None
    curve: tuple[tuple[int, float | None], ...] = ()
    pilot_alpha = None
    pilot_units = None
    if precision is not None and pv is not None:
        n_prec, curve, pilot_alpha = precision.n, precision.curve, precision.pilot_alpha
        pilot_units = pv.pairable_units
        if MIN_PILOT_UNITS_FOR_PRECISION <= pv.pairable_units < MIN_PILOT_UNITS:
            notes.append(
                f"only {pv.pairable_units} pilot units with two or more values: the precision "
                "plan is rough"
            )
        if pv.pairable_units < MIN_PILOT_UNITS_FOR_PRECISION:
            notes.append(
                f"fewer than {MIN_PILOT_UNITS_FOR_PRECISION} pilot units with two or more values: "
                "no precision plan"
            )
        elif pilot_alpha is not None and pilot_alpha >= 1.0 - 1e-12:
            notes.append(
                "the pilot's coders agreed on every unit: every resample agrees too, so the "
                "bootstrap cannot show how wide the interval will be; no precision plan"
            )
        elif pilot_alpha is not None and pilot_alpha < codebook.thresholds_for(var.name).tentative:
            notes.append(
                f"alpha in the pilot is {pilot_alpha:.3f}, below the tentative threshold "
                f"{codebook.thresholds_for(var.name).tentative:.3f}: more units only narrow the "
                "interval around a low value - revise the codebook or train the coders first"
            )
        if (
            n_prec is None
            and pv.pairable_units >= MIN_PILOT_UNITS_FOR_PRECISION
            and not (pilot_alpha is not None and pilot_alpha >= 1.0 - 1e-12)
        ):
            notes.append(
                f"even {CANDIDATE_SIZES[-1]:,} units do not bring the expected half-width to "
                f"{precision.target:g} (or alpha is mostly undefined in resamples of the pilot)"
            )
    return VariablePlan(
        variable=var.name,
        level=var.level + (" (multi-select)" if var.multiple else ""),
        categories=k,
        alpha_min=a_min if n_min is not None else None,
        alpha_min_source=a_source if n_min is not None else None,
        smallest_share=share,
        share_source=source,
        smallest_category=smallest,
        n_minimum=n_min,
        n_precision=n_prec,
        pilot_units=pilot_units,
        pilot_alpha=pilot_alpha,
        curve=curve,
        notes=tuple(notes),
    )
