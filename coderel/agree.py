"""Agreement per variable: every coefficient with a seeded unit-level bootstrap interval.

Builds, from the long table, one units x coders matrix of value indices per variable over the
codebook's full category list (or the distinct observed numbers / code sets), hands it to the pure
core in :mod:`coderel.stats`, and evaluates every coefficient of every variable over ONE seeded
matrix of unit weights (``W @ per-unit contributions``; no per-replicate Python loop). Thresholds
for the verdict are conventions of the field (Krippendorff 2004: rely on alpha >= .800, tentative
conclusions for .667 <= alpha < .800).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook import Variable
from coderel.codings import Codings
from coderel.stats.bootstrap import Evaluated, evaluate_plans, unit_weights
from coderel.stats.intervals import interval, share_below
from coderel.stats.plan import Scale, build_plan

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
    "pabak",
)
#: Fewer pairable units than this and no interval is given (common practice, no source).
MIN_UNITS_FOR_INTERVAL = 10


@dataclass(frozen=True)
class Estimate:
    """A coefficient's estimate, its bootstrap interval and standard error (None when undefined)."""

    estimate: float | None
    ci: tuple[float, float] | None = None
    se: float | None = None
    reason: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "estimate": self.estimate,
            "ci": list(self.ci) if self.ci else None,
            "se": self.se,
            "reason": self.reason,
        }


@dataclass(frozen=True)
class VariableAgreement:
    """All coefficients of one variable."""

    variable: str
    label: str
    level: str
    units: int
    coders: int
    pairable_values: int
    coefficients: dict[str, Estimate | None]
    alpha_below_min: float | None
    verdict: str
    notes: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "variable": self.variable,
            "label": self.label,
            "level": self.level,
            "units": self.units,
            "coders": self.coders,
            "pairable_values": self.pairable_values,
        }
        for key in COEFFICIENTS:
            est = self.coefficients.get(key)
            out[key] = est.to_dict() if est is not None else None
        out.update(
            alpha_below_min=self.alpha_below_min, verdict=self.verdict, notes=list(self.notes)
        )
        return out


@dataclass(frozen=True)
class AgreementResult:
    """Agreement for every variable of a project, with the bootstrap's settings."""

    variables: tuple[VariableAgreement, ...]
    replicates: int
    seed: int
    method: str
    ci_level: float

    def variable(self, name: str) -> VariableAgreement:
        for v in self.variables:
            if v.variable == name:
                return v
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        return {
            "bootstrap": {
                "replicates": self.replicates,
                "seed": self.seed,
                "method": self.method,
                "ci_level": self.ci_level,
            },
            "variables": [v.to_dict() for v in self.variables],
        }

    def to_frame(self) -> pd.DataFrame:
        """Tidy: one row per variable and coefficient."""
        rows = []
        for v in self.variables:
            for key in COEFFICIENTS:
                est = v.coefficients.get(key)
                if est is None:
                    continue
                lo, hi = est.ci if est.ci else (None, None)
                rows.append(
                    {
                        "variable": v.variable,
                        "level": v.level,
                        "coefficient": key,
                        "estimate": est.estimate,
                        "ci_low": lo,
                        "ci_high": hi,
                        "se": est.se,
                        "reason": est.reason,
                        "verdict": v.verdict,
                    }
                )
        return pd.DataFrame(rows)


def _matrix(
    codings: Codings, var: Variable, coders: list[str], u_index: dict[str, int]
) -> tuple[np.ndarray, Scale]:
    """Units x coders value indices over ALL project units (-1: no value), and the scale."""
    sub = codings.for_variable(var.name)
    keep = [
        a is not False and v is not None and v == v
        for a, v in zip(sub["applies"], sub["value"], strict=True)
    ]
    sub = sub[keep]
    c_index = {c: j for j, c in enumerate(coders)}
    values = list(sub["value"])
    if var.is_categorical and not var.multiple:
        domain = {code: i for i, code in enumerate(var.codes)}
        scale = Scale("categorical", var.level, len(domain))
    elif var.multiple:
        sets = tuple(dict.fromkeys(frozenset(v) for v in values))
        domain = {s: i for i, s in enumerate(sets)}
        values = [frozenset(v) for v in values]
        scale = Scale("set", "nominal", len(sets), sets=sets)
    else:
        distinct = np.array(sorted({float(v) for v in values}), dtype=float)
        domain = {v: i for i, v in enumerate(distinct.tolist())}
        values = [float(v) for v in values]
        scale = Scale("numeric", var.level, len(distinct), values=distinct)
    x = np.full((len(u_index), len(coders)), -1, dtype=int)
    rows = sub["unit"].map(u_index).to_numpy(dtype=int)
    cols = sub["coder"].map(c_index).to_numpy(dtype=int)
    x[rows, cols] = np.fromiter((domain[v] for v in values), dtype=int, count=len(values))
    return x, scale


def _num(value: float) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def agreement(
    codings: Codings,
    *,
    replicates: int = 2000,
    seed: int = 20261202,
    ci_level: float = 0.95,
    interval_method: str = "bca",
    progress: Callable[[int, int], None] | None = None,
) -> AgreementResult:
    """Every coefficient of every variable, with bootstrap intervals from one weight matrix.

    Parameters
    ----------
    codings
        The long table (values outside the codebook are already ``None``).
    replicates, seed
        Bootstrap replicates and the seed of the one matrix of unit weights.
    ci_level, interval_method
        Interval level and ``"bca"`` (Efron 1987) or ``"percentile"``.

    References
    ----------
    Krippendorff, K. (2004). *Content Analysis* (2nd ed.). Hayes, A. F., & Krippendorff, K.
    (2007). Answering the call for a standard reliability measure for coding data.
    *Communication Methods and Measures*, 1(1), 77-89.
    """
    cb = codings.codebook
    coders = codings.coders
    u_index = {u: i for i, u in enumerate(codings.units)}
    mats = [(_matrix(codings, var, coders, u_index), var) for var in cb.variables]
    plans = [build_plan(x, scale) for (x, scale), _ in mats]
    # ONE seeded matrix of unit weights over the project's units, reused for every variable and
    # coefficient: a unit without values for a variable contributes nothing to its sums.
    weights = unit_weights(len(u_index), replicates, seed)
    evaluated_all = evaluate_plans(plans, weights)
    out: list[VariableAgreement] = []
    for ((x, _scale), var), evaluated in zip(mats, evaluated_all, strict=True):
        per_unit = (x >= 0).sum(axis=1)
        pairable_units = int((per_unit >= 2).sum())
        pairable_values = int(per_unit[per_unit >= 2].sum())
        thin = pairable_units < MIN_UNITS_FOR_INTERVAL
        coefs: dict[str, Estimate | None] = {}
        for key in COEFFICIENTS:
            ev: Evaluated | None = evaluated.get(key)
            if ev is None:
                coefs[key] = None
                continue
            point = _num(ev.point)
            if point is None:
                coefs[key] = Estimate(None, None, None, "undefined: no variation or too few values")
                continue
            ci = None
            if not thin and ev.replicates.size:
                ci = interval(ev.replicates, ev.point, ev.jackknife, ci_level, interval_method)
            coefs[key] = Estimate(point, ci, None, None if ci or not thin else "too-few-units")
        alpha = coefs.get("krippendorff_alpha")
        th = cb.thresholds_for(var.name)
        notes: list[str] = []
        below = None
        if alpha is None or alpha.estimate is None:
            verdict = "undefined"
        else:
            a = alpha.estimate
            verdict = (
                "reliable"
                if a >= th.reliable
                else "tentative"
                if a >= th.tentative
                else "unreliable"
            )
            below = share_below(evaluated["krippendorff_alpha"].replicates, th.tentative)
        if thin:
            notes.append(
                f"only {pairable_units} units have two or more values: too few for a "
                "meaningful interval, none is given"
            )
        pa, kp = coefs.get("percent_agreement"), alpha
        if (
            pa
            and kp
            and pa.estimate is not None
            and kp.estimate is not None
            and pa.estimate >= 0.85
            and kp.estimate < th.tentative
        ):
            notes.append(
                f"high percent agreement ({pa.estimate:.0%}) but low alpha: one category "
                "probably holds most values (prevalence paradox); read both"
            )
        if var.multiple:
            notes.append("multi-select: alpha uses the Jaccard set distance")
        out.append(
            VariableAgreement(
                variable=var.name,
                label=var.title,
                level=var.level,
                units=pairable_units,
                coders=int((x >= 0).any(axis=0).sum()),
                pairable_values=pairable_values,
                coefficients=coefs,
                alpha_below_min=below,
                verdict=verdict,
                notes=tuple(notes),
            )
        )
        if progress is not None:
            progress(len(out), len(mats))
    return AgreementResult(tuple(out), replicates, seed, interval_method, ci_level)
