"""Numeric variables' extra results: the ICC table with F-test intervals, Lin's coefficient and
Bland-Altman limits of agreement per coder pair, and their notes.

The ICC forms and Lin's coefficient (averaged over pairs) are also ordinary coefficients of the
variable (with the shared bootstrap interval, :mod:`coderel.stats.numeric_plan`); this module
adds what only numbers have: the ANOVA behind the ICCs, the intervals of Shrout & Fleiss (1979)
and McGraw & Wong (1996), each pair's rho_c with Lin's (1989) interval and the limits of
agreement of Bland & Altman (1986).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from coderel.agree.results import Estimate
from coderel.stats.concordance import Concordance, concordance
from coderel.stats.icc import (
    ICC_FORMS,
    MCGRAW_WONG,
    MODELS,
    SHROUT_FLEISS,
    complete_rows,
    f_interval,
    icc_contributions,
    icc_from_mean_squares,
    mean_squares,
)
from coderel.stats.limits import PROPORTIONAL_BIAS_LEVEL, LimitsOfAgreement, limits_of_agreement
from coderel.stats.numeric_plan import (
    MAX_BOOTSTRAP_PAIRS,
    MAX_PAIR_CODERS,
    NUMERIC_COEFFICIENTS,
    pairs_with_common_units,
)
from coderel.stats.undefined import TOO_FEW_PAIRABLE

#: Reasons an ICC has no value (besides those of :mod:`coderel.stats.undefined`).
TOO_FEW_COMPLETE = "too-few-complete-units"
#: Lin's coefficient: more coder pairs than :data:`MAX_BOOTSTRAP_PAIRS`, so no interval.
MANY_PAIRS = "many-pairs"
#: Lin's coefficient and limits of agreement: more coders than :data:`MAX_PAIR_CODERS`.
TOO_MANY_CODERS = "too-many-coders"
#: At most this many IDs of units left out of the ICCs are listed in the JSON.
LISTED_UNITS = 100


def _num(value: Any) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if np.isfinite(value) else None


def _pair(ci: tuple[float, float] | None) -> list[float] | None:
    return [float(ci[0]), float(ci[1])] if ci else None


@dataclass(frozen=True)
class IccForm:
    """One ICC form with its F-test interval and the F test of ICC = 0."""

    key: str
    estimate: float | None
    ci_f: tuple[float, float] | None
    f: float | None
    df1: float
    df2: float
    p_value: float | None

    def to_dict(self) -> dict[str, Any]:
        return {
            "key": self.key,
            "shrout_fleiss": SHROUT_FLEISS[self.key],
            "mcgraw_wong": MCGRAW_WONG[self.key],
            "model": MODELS[self.key],
            "estimate": self.estimate,
            "ci_f": _pair(self.ci_f),
            "f": self.f,
            "df1": self.df1,
            "df2": self.df2,
            "p_value": self.p_value,
        }


@dataclass(frozen=True)
class IccTable:
    """The ANOVA on complete units and the six forms (Shrout & Fleiss 1979)."""

    units_used: int
    units_left_out: int
    coders: int
    values: str
    mean_squares: dict[str, float | None]
    forms: tuple[IccForm, ...]
    #: IDs of the units left out (some coder gave no value), the first :data:`LISTED_UNITS`.
    left_out_units: tuple[str, ...] = ()

    def form(self, key: str) -> IccForm:
        return next(f for f in self.forms if f.key == key)

    def to_dict(self) -> dict[str, Any]:
        return {
            "units_used": self.units_used,
            "units_left_out": self.units_left_out,
            "left_out_units": list(self.left_out_units),
            "coders": self.coders,
            "values": self.values,
            "mean_squares": dict(self.mean_squares),
            "forms": [f.to_dict() for f in self.forms],
        }


@dataclass(frozen=True)
class NumericPair:
    """Two coders on a numeric variable: Lin's coefficient and the limits of agreement."""

    coder_a: str
    coder_b: str
    ccc: Concordance
    limits: LimitsOfAgreement

    def ccc_dict(self) -> dict[str, Any]:
        c = self.ccc
        return {
            "coder_a": self.coder_a,
            "coder_b": self.coder_b,
            "units": c.n,
            "estimate": _num(c.estimate),
            "ci_z": _pair(c.ci_z),
            "pearson_r": _num(c.pearson_r),
            "bias_correction": _num(c.bias_correction),
        }

    def limits_dict(self) -> dict[str, Any]:
        lo = self.limits
        pb = lo.proportional_bias
        return {
            "coder_a": self.coder_a,
            "coder_b": self.coder_b,
            "units": lo.n,
            "mean_difference": lo.mean_difference,
            "mean_difference_ci": _pair(lo.mean_difference_ci),
            "sd_difference": lo.sd,
            "lower_limit": lo.lower,
            "lower_limit_ci": _pair(lo.lower_ci),
            "upper_limit": lo.upper,
            "upper_limit_ci": _pair(lo.upper_ci),
            "proportional_bias": (
                {
                    "slope": pb.slope,
                    "intercept": pb.intercept,
                    "se": pb.se,
                    "p_value": pb.p_value,
                    "significant": pb.significant,
                }
                if pb is not None
                else None
            ),
        }


@dataclass(frozen=True)
class NumericDetail:
    """What a numeric variable (or an ordinal one with ``icc_ordinal``) adds to its row."""

    icc: IccTable | None
    pairs: tuple[NumericPair, ...]
    #: Coders who gave the variable at least one value.
    coders: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {
            "icc": self.icc.to_dict() if self.icc else None,
            "ccc_pairs": [p.ccc_dict() for p in self.pairs],
            "limits_of_agreement": [p.limits_dict() for p in self.pairs],
        }


def numbers_of(x: np.ndarray, domain: np.ndarray) -> np.ndarray:
    """Units x coders numbers (``nan`` for no value) from value indices into ``domain``."""
    d = np.asarray(domain, dtype=float)
    if not len(d):
        return np.full(x.shape, np.nan)
    return np.where(x >= 0, d[np.maximum(x, 0)], np.nan)


def numeric_detail(
    numbers: np.ndarray,
    coders: list[str],
    values: str,
    ci_level: float,
    units: Sequence[str] = (),
) -> NumericDetail:
    """The ICC table and per-pair results of one variable.

    ``numbers`` is units x coders (``nan`` for no value) over all project coders; coders who
    gave the variable no value are left out, as in the coefficients.
    """
    used = np.isfinite(numbers).any(axis=0)
    x = numbers[:, used]
    names = [c for c, u in zip(coders, used, strict=True) if u]
    k = x.shape[1]
    any_value = np.isfinite(x).any(axis=1)
    complete = complete_rows(x) if k else np.zeros(len(x), bool)
    icc = None
    if k >= 2:
        ms = mean_squares(icc_contributions(x).sum(axis=0)[None, :], k)
        forms = []
        for key in ICC_FORMS:
            est = _num(icc_from_mean_squares(ms, key)[0]) if ms.n[0] >= 2 else None
            fi = f_interval(ms, key, ci_level)
            forms.append(IccForm(key, est, fi.ci, _num(fi.f), fi.df1, fi.df2, fi.p_value))
        icc = IccTable(
            units_used=int(complete.sum()),
            units_left_out=int((any_value & ~complete).sum()),
            coders=k,
            values=values,
            mean_squares={
                "between_units": _num(ms.bms[0]),
                "within_units": _num(ms.wms[0]),
                "between_coders": _num(ms.jms[0]),
                "residual": _num(ms.ems[0]),
            },
            forms=tuple(forms),
            left_out_units=tuple(
                str(units[u]) for u in np.flatnonzero(any_value & ~complete)[:LISTED_UNITS]
            )
            if len(units) == len(x)
            else (),
        )
    pairs = []
    for i, j in pairs_with_common_units(x):
        a, b = x[:, i], x[:, j]
        pairs.append(
            NumericPair(
                names[i],
                names[j],
                concordance(a, b, ci_level),
                limits_of_agreement(a, b, ci_level),
            )
        )
    return NumericDetail(icc, tuple(pairs), k)


def numeric_notes(detail: NumericDetail, min_units: int) -> list[str]:
    """Plain-words notes: units the ICCs left out or too few, proportional bias per pair."""
    notes: list[str] = []
    icc = detail.icc
    if icc is not None:
        if icc.units_used < 2:
            notes.append(
                f"ICC: only {icc.units_used} unit(s) coded by all {icc.coders} coders; the "
                "intraclass correlations need at least two, none is given"
            )
        elif icc.units_left_out:
            notes.append(
                f"ICC: computed on the {icc.units_used} units coded by all {icc.coders} coders; "
                f"{icc.units_left_out} unit(s) with a missing value were left out"
            )
        if 2 <= icc.units_used < min_units:
            notes.append(
                f"ICC: {icc.units_used} complete units are too few for a bootstrap interval; the "
                "F-test intervals assume normally distributed values"
            )
    if detail.coders > MAX_PAIR_CODERS:
        notes.append(
            f"Lin's coefficient and limits of agreement are given for up to {MAX_PAIR_CODERS} "
            f"coders; this variable has {detail.coders} (pairs grow with the square of the "
            "coders, and each rests on few units): see alpha and the ICCs"
        )
    elif len(detail.pairs) > MAX_BOOTSTRAP_PAIRS:
        notes.append(
            f"ccc: the mean over {len(detail.pairs)} coder pairs, without a bootstrap interval "
            f"(given up to {MAX_BOOTSTRAP_PAIRS} pairs); each pair's interval is in ccc_pairs"
        )
    for p in detail.pairs:
        pb = p.limits.proportional_bias
        if pb is not None and pb.significant:
            notes.append(
                f"limits of agreement {p.coder_a}-{p.coder_b}: the differences change with the "
                f"size of the values (slope {pb.slope:.3f} of differences on means, "
                f"p = {pb.p_value:.3g} < {PROPORTIONAL_BIAS_LEVEL}): a proportional bias, so the "
                "limits are not one band over the whole range (Bland & Altman 1999)"
            )
    return notes


def attach(
    row: Any,
    x: np.ndarray,
    scale: Any,
    coders: list[str],
    ci_level: float,
    *,
    icc_ordinal: bool,
    min_units: int,
    thin_reason: str,
    units: Sequence[str] = (),
) -> Any:
    """``row`` (a VariableAgreement) with its numeric detail, notes and ICC reasons; ``row``
    itself for a variable that is neither numeric nor (with ``icc_ordinal``) ordinal.

    ``x`` is the units x coders matrix of value indices into ``scale``'s domain, ``units``
    the unit IDs of its rows (to list the units the ICCs left out).
    """
    if scale.kind == "numeric":
        numbers, values = numbers_of(x, scale.values), "numbers"
    elif icc_ordinal and scale.kind == "categorical" and scale.ordinal:
        numbers, values = numbers_of(x, np.arange(1.0, scale.size + 1.0)), "positions"
    else:
        return row
    detail = numeric_detail(numbers, coders, values, ci_level, units)
    coefs = dict(row.coefficients)
    if coefs.get("ccc") is None:
        defined = [p.ccc.estimate for p in detail.pairs if p.ccc.estimate is not None]
        if detail.coders > MAX_PAIR_CODERS:
            coefs["ccc"] = Estimate(None, reason=TOO_MANY_CODERS)
        elif defined:
            coefs["ccc"] = Estimate(float(np.mean(defined)), reason=MANY_PAIRS)
        else:
            coefs["ccc"] = Estimate(None, reason=TOO_FEW_PAIRABLE)
    used = detail.icc.units_used if detail.icc else 0
    for key in NUMERIC_COEFFICIENTS:
        est = coefs.get(key)
        if est is None or not key.startswith("icc"):
            continue
        if est.estimate is None and used < 2:
            coefs[key] = replace(est, reason=TOO_FEW_COMPLETE)
        elif est.estimate is not None and used < min_units:
            coefs[key] = replace(est, ci=None, reason=thin_reason)
    return replace(
        row,
        coefficients=coefs,
        numeric=detail,
        notes=(*row.notes, *numeric_notes(detail, min_units)),
    )
