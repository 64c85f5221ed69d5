"""Agreement per variable: every coefficient with a seeded unit-level bootstrap interval.

Builds, from the long table, one units x coders matrix of value indices per variable over the
codebook's full category list (or the distinct observed numbers / code sets), hands it to the pure
core in :mod:`coderel.stats`, and evaluates every coefficient of every variable over ONE seeded
matrix of unit weights (``W @ per-unit contributions``; no per-replicate Python loop). Variables
with ``applies_when`` get a second row, ``<variable> [applies]``: agreement on whether the
variable applies, from each coder's own value of the condition variable. Thresholds for the
verdict are conventions of the field (Krippendorff 2004: rely on alpha >= .800, tentative
conclusions for .667 <= alpha < .800).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from itertools import combinations
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook import Variable
from coderel.codebook.model import Thresholds
from coderel.codings import Codings
from coderel.errors import UsageError
from coderel.stats import undefined as U
from coderel.stats.bootstrap import Evaluated, evaluate_plans, unit_weights
from coderel.stats.counts import confusion_table, value_counts
from coderel.stats.intervals import INTERVAL_METHODS, interval, share_below
from coderel.stats.kappa import (
    cohen_kappa_table,
    fleiss_category_kappas,
    fleiss_null_se,
    z_test,
)
from coderel.stats.plan import Scale, alpha_point, build_plan

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


@dataclass(frozen=True)
class Estimate:
    """A coefficient's estimate, bootstrap interval, standard error and, for Fleiss' kappa, the
    z test against kappa = 0. ``reason`` is a slug (:mod:`coderel.stats.undefined`) when the
    estimate is ``None``, or ``too-few-units``, ``one-value-used``, ``perfect-agreement`` or
    ``too-few-replicates`` when only the interval is withheld."""

    estimate: float | None
    ci: tuple[float, float] | None = None
    se: float | None = None
    reason: str | None = None
    z: float | None = None
    p_value: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "estimate": self.estimate,
            "ci": list(self.ci) if self.ci else None,
            "se": self.se,
            "reason": self.reason,
            "z": self.z,
            "p_value": self.p_value,
        }


@dataclass(frozen=True)
class PairAgreement:
    """Two coders on one variable: units both coded, percent agreement, Cohen's kappa
    (categorical variables; Cohen 1960) and Krippendorff's alpha at the variable's level."""

    coder_a: str
    coder_b: str
    units: int
    percent_agreement: float | None
    cohen_kappa: float | None
    krippendorff_alpha: float | None
    confusion: tuple[tuple[int, ...], ...] | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "coder_a": self.coder_a,
            "coder_b": self.coder_b,
            "units": self.units,
            "percent_agreement": self.percent_agreement,
            "cohen_kappa": self.cohen_kappa,
            "krippendorff_alpha": self.krippendorff_alpha,
            "confusion": [list(r) for r in self.confusion] if self.confusion else None,
        }


@dataclass(frozen=True)
class VariableAgreement:
    """All coefficients of one variable (``kind="variable"``) or of its applicability
    (``kind="applicability"``, named ``<variable> [applies]``)."""

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
    kind: str = "variable"
    fleiss_units: int = 0
    categories: tuple[Any, ...] = ()
    confusion: dict[tuple[str, str], np.ndarray] = field(default_factory=dict)
    category_agreement: dict[Any, dict[str, float | None]] = field(default_factory=dict)
    pairs: tuple[PairAgreement, ...] = ()

    def to_dict(self, *, pairs: bool = False) -> dict[str, Any]:
        out: dict[str, Any] = {
            "variable": self.variable,
            "kind": self.kind,
            "label": self.label,
            "level": self.level,
            "units": self.units,
            "coders": self.coders,
            "pairable_values": self.pairable_values,
            "fleiss_units": self.fleiss_units,
        }
        for key in COEFFICIENTS:
            est = self.coefficients.get(key)
            out[key] = est.to_dict() if est is not None else None
        out.update(
            alpha_below_min=self.alpha_below_min,
            verdict=self.verdict,
            notes=list(self.notes),
            category_agreement=[
                {"code": code, **stats} for code, stats in self.category_agreement.items()
            ],
        )
        if pairs:
            out["pairs"] = [p.to_dict() for p in self.pairs]
        return out


@dataclass(frozen=True)
class AgreementResult:
    """Agreement for every variable of a project, with the bootstrap's settings."""

    variables: tuple[VariableAgreement, ...]
    replicates: int
    seed: int
    method: str
    ci_level: float
    coders: tuple[str, ...] = ()
    codebook_title: str = ""
    codebook_version: str = ""

    def variable(self, name: str) -> VariableAgreement:
        for v in self.variables:
            if v.variable == name:
                return v
        raise KeyError(name)

    def to_dict(self, *, pairs: bool = False) -> dict[str, Any]:
        return {
            "codebook": {"title": self.codebook_title, "version": self.codebook_version},
            "coders": list(self.coders),
            "bootstrap": {
                "replicates": self.replicates,
                "seed": self.seed,
                "method": self.method,
                "ci_level": self.ci_level,
            },
            "variables": [v.to_dict(pairs=pairs) for v in self.variables],
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
                        "kind": v.kind,
                        "level": v.level,
                        "units": v.units,
                        "pairable_values": v.pairable_values,
                        "coefficient": key,
                        "estimate": est.estimate,
                        "ci_low": lo,
                        "ci_high": hi,
                        "se": est.se,
                        "z": est.z,
                        "p_value": est.p_value,
                        "reason": est.reason,
                        "verdict": v.verdict,
                    }
                )
        return pd.DataFrame(rows)

    def pairs_frame(self) -> pd.DataFrame:
        """One row per variable and pair of coders."""
        rows = [
            {"variable": v.variable, **{k: x for k, x in p.to_dict().items() if k != "confusion"}}
            for v in self.variables
            for p in v.pairs
        ]
        return pd.DataFrame(rows)


@dataclass(frozen=True)
class _Target:
    """One row to compute: a variable, or a variable's applicability."""

    name: str
    label: str
    level: str
    kind: str
    x: np.ndarray
    scale: Scale
    categories: tuple[Any, ...]
    thresholds: Thresholds
    var: Variable


@dataclass(frozen=True)
class _Index:
    """Row positions of the long table, factorised once: unit and coder index of every row, the
    rows of each variable, which rows hold a value that counts, and each row's applicability."""

    unit: np.ndarray
    coder: np.ndarray
    rows_of: dict[str, np.ndarray]
    counts: np.ndarray
    known: np.ndarray
    applies: np.ndarray
    values: np.ndarray


def _index(codings: Codings, coders: list[str], units: list[str]) -> _Index:
    frame = codings.frame
    unit = pd.Categorical(frame["unit"], categories=units).codes.astype(np.int64)
    coder = pd.Categorical(frame["coder"], categories=coders).codes.astype(np.int64)
    var_codes, var_names = pd.factorize(frame["variable"])
    order = np.argsort(var_codes, kind="stable")
    bounds = np.searchsorted(var_codes[order], np.arange(len(var_names) + 1))
    rows_of = {str(name): order[bounds[i] : bounds[i + 1]] for i, name in enumerate(var_names)}
    applies = frame["applies"].to_numpy(dtype=object)
    is_true = np.fromiter((a is True for a in applies), dtype=bool, count=len(applies))
    is_false = np.fromiter((a is False for a in applies), dtype=bool, count=len(applies))
    values = frame["value"].to_numpy(dtype=object)
    has_value = ~pd.isna(frame["value"]).to_numpy()
    return _Index(unit, coder, rows_of, has_value & ~is_false, is_true | is_false, is_true, values)


def _matrix(ix: _Index, var: Variable, n_units: int, n_coders: int) -> tuple[np.ndarray, Scale]:
    """Units x coders value indices over ALL project units (-1: no value), and the scale."""
    rows = ix.rows_of.get(var.name, np.empty(0, dtype=np.int64))
    rows = rows[ix.counts[rows]]
    values = list(ix.values[rows])
    if var.is_categorical and not var.multiple:
        domain = {code: i for i, code in enumerate(var.codes)}
        scale = Scale("categorical", var.level, len(domain))
    elif var.multiple:
        values = [frozenset(v) for v in values]
        sets = tuple(dict.fromkeys(values))
        domain = {s: i for i, s in enumerate(sets)}
        scale = Scale("set", "nominal", len(sets), sets=sets)
    else:
        values = [float(v) for v in values]
        distinct = np.array(sorted(set(values)), dtype=float)
        domain = {v: i for i, v in enumerate(distinct.tolist())}
        scale = Scale("numeric", var.level, len(distinct), values=distinct)
    x = np.full((n_units, n_coders), -1, dtype=int)
    x[ix.unit[rows], ix.coder[rows]] = np.fromiter(
        (domain[v] for v in values), dtype=int, count=len(values)
    )
    return x, scale


def _applicability_matrix(ix: _Index, var: Variable, n_units: int, n_coders: int) -> np.ndarray:
    """Units x coders: 1 applies, 0 does not apply, -1 unknown (condition not coded)."""
    rows = ix.rows_of.get(var.name, np.empty(0, dtype=np.int64))
    rows = rows[ix.known[rows]]
    x = np.full((n_units, n_coders), -1, dtype=int)
    x[ix.unit[rows], ix.coder[rows]] = ix.applies[rows].astype(int)
    return x


def _targets(codings: Codings, coders: list[str], units: list[str]) -> list[_Target]:
    cb = codings.codebook
    ix = _index(codings, coders, units)
    n_units, n_coders = len(units), len(coders)
    out: list[_Target] = []
    for var in cb.variables:
        x, scale = _matrix(ix, var, n_units, n_coders)
        cats = tuple(var.codes) if var.is_categorical and not var.multiple else ()
        th = cb.thresholds_for(var.name)
        out.append(_Target(var.name, var.title, var.level, "variable", x, scale, cats, th, var))
        if var.applies_when is not None:
            xa = _applicability_matrix(ix, var, n_units, n_coders)
            out.append(
                _Target(
                    var.name + APPLIES_SUFFIX,
                    f"Does '{var.title}' apply?",
                    "nominal",
                    "applicability",
                    xa,
                    Scale("categorical", "nominal", 2),
                    ("no", "yes"),
                    th,
                    var,
                )
            )
    return out


def _num(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _reason(key: str, t: _Target, pairable_values: int, fleiss_units: int) -> str:
    """Why a coefficient has no value on these data (a slug of :mod:`coderel.stats.undefined`)."""
    if pairable_values < 2:
        return U.TOO_FEW_PAIRABLE
    if key == "fleiss_kappa" and fleiss_units == 0:
        return U.NO_COMPLETE_UNITS
    if key == "brennan_prediger" and t.scale.size < 2:
        return U.ONE_CATEGORY
    return U.NO_VARIATION


def _pairs(t: _Target, coders: list[str]) -> tuple[tuple[PairAgreement, ...], dict]:
    x, k = t.x, t.scale.size
    categorical = t.scale.kind == "categorical"
    pairs, confusion = [], {}
    for i, j in combinations(range(x.shape[1]), 2):
        both = (x[:, i] >= 0) & (x[:, j] >= 0)
        n = int(both.sum())
        if n == 0:
            continue
        same = float(np.mean(x[both, i] == x[both, j]))
        kappa, table = None, None
        if categorical:
            table = confusion_table(x[:, i], x[:, j], k)
            confusion[(coders[i], coders[j])] = table
            kappa = _num(cohen_kappa_table(table)[0])
        alpha = _num(alpha_point(x[:, [i, j]], t.scale))
        pairs.append(
            PairAgreement(
                coders[i],
                coders[j],
                n,
                same,
                kappa,
                alpha,
                tuple(tuple(int(c) for c in row) for row in table) if table is not None else None,
            )
        )
    return tuple(pairs), confusion


def _category_agreement(
    t: _Target, confusion: dict, complete_counts: np.ndarray
) -> dict[Any, dict[str, float | None]]:
    """Per category: Fleiss' (1971, eq. 11) kappa on complete units and the proportion of
    specific agreement pooled over coder pairs (2 n_kk / (n_k. + n_.k)); for multi-select
    variables, Krippendorff's binary (present/absent) alpha per category."""
    var = t.var
    out: dict[Any, dict[str, float | None]] = {}
    if t.kind == "variable" and var.multiple:
        sets = t.scale.sets
        for code in var.codes:
            has = np.array([code in s for s in sets] + [False], dtype=int)
            xb = np.where(t.x >= 0, has[t.x], -1)
            a = alpha_point(xb, Scale("categorical", "nominal", 2))
            used = int((xb == 1).sum())
            out[code] = {"binary_alpha": _num(a), "values_with_category": used}
        return out
    if t.scale.kind != "categorical":
        return out
    k = t.scale.size
    pooled = np.zeros((k, k))
    for table in confusion.values():
        pooled += table + table.T
    fk = fleiss_category_kappas(complete_counts) if len(complete_counts) else np.full(k, np.nan)
    diag, marg = np.diag(pooled), pooled.sum(axis=1)
    for idx, code in enumerate(t.categories):
        specific = 2 * diag[idx] / (2 * marg[idx]) if marg[idx] > 0 else None
        out[code] = {
            "fleiss_kappa": _num(float(fk[idx])),
            "specific_agreement": _num(specific) if specific is not None else None,
            "share_of_values": _num(float(marg[idx] / pooled.sum())) if pooled.sum() else None,
        }
    return out


def _standard_errors(
    t: _Target, coefs: dict[str, Estimate | None], confusion: dict, complete_counts: np.ndarray
) -> dict[str, Estimate | None]:
    """Published standard errors: Cohen's (weighted) kappa, Fleiss, Cohen & Everitt (1969);
    Fleiss' kappa under the null, Fleiss, Nee & Landis (1979), with its z test."""
    out = dict(coefs)
    if t.scale.kind == "categorical" and t.x.shape[1] == 2 and len(confusion) == 1:
        table = next(iter(confusion.values()))
        for key, weights in (
            ("cohen_kappa", "identity"),
            ("weighted_kappa_linear", "linear"),
            ("weighted_kappa_quadratic", "quadratic"),
        ):
            est = out.get(key)
            if est is not None and est.estimate is not None:
                se = _num(cohen_kappa_table(table, weights)[1])
                out[key] = Estimate(est.estimate, est.ci, se, est.reason)
    est = out.get("fleiss_kappa")
    if est is not None and est.estimate is not None and len(complete_counts):
        m = int(complete_counts[0].sum())
        p = complete_counts.sum(axis=0) / complete_counts.sum()
        se = _num(fleiss_null_se(p, len(complete_counts), m))
        z, pv = z_test(est.estimate, se)
        out["fleiss_kappa"] = Estimate(est.estimate, est.ci, se, est.reason, _num(z), _num(pv))
    return out


#: The verdict when alpha stands on fewer than :data:`MIN_UNITS_FOR_INTERVAL` pairable units: a
#: "reliable" on three units would be a confident word for what the data cannot show.
TOO_FEW_UNITS_VERDICT = "too few units"


def _verdict(alpha: Estimate | None, th: Thresholds, pairable_units: int | None = None) -> str:
    if alpha is None or alpha.estimate is None:
        return "undefined"
    if pairable_units is not None and pairable_units < MIN_UNITS_FOR_INTERVAL:
        return TOO_FEW_UNITS_VERDICT
    a = alpha.estimate
    if a >= th.reliable:
        return "reliable"
    return "tentative" if a >= th.tentative else "unreliable"


def _share(x: float) -> str:
    """A share in words: one decimal below 10% (``1.5%``), whole percent above (``25%``)."""
    return f"{x:.1%}" if x < 0.1 else f"{x:.0%}"


def _notes(
    t: _Target,
    coefs: dict[str, Estimate | None],
    pairable_units: int,
    fleiss_units: int,
    cat_agree: dict,
    replicates: int = 0,
    ci_level: float = 0.95,
) -> list[str]:
    notes: list[str] = []
    th = t.thresholds
    withheld = {e.reason for e in coefs.values() if e is not None and e.estimate is not None}
    if pairable_units < MIN_UNITS_FOR_INTERVAL:
        notes.append(
            f"only {pairable_units} units have two or more values: too few for a "
            "meaningful interval or a verdict, none is given"
        )
    if PERFECT_AGREEMENT in withheld:
        # Rule of three: with no event in n trials, 3/n is an approximate 95% upper bound of
        # its rate (Hanley & Lippman-Hand 1983, JAMA 249(13), 1743-1745; from memory).
        notes.append(
            f"the coders agreed on every one of the {pairable_units} units: every bootstrap "
            "resample agrees too, so no interval is given (it would be [1, 1] and claim "
            "certainty); even so, up to about "
            f"{_share(min(1.0, 3 / pairable_units))} of units could be disagreements in a larger "
            "sample (rule of three, 95%)"
        )
    if TOO_FEW_REPLICATES in withheld:
        notes.append(
            f"{replicates} bootstrap replicate(s) are too few for a {ci_level:.0%} interval "
            f"(at least {min_replicates(ci_level)}; 1,000 or more is usual): none is given"
        )
    if any(e is not None and e.reason == ONE_VALUE_USED for e in coefs.values()):
        notes.append(
            "every pairable value is the same: alpha and the kappas are undefined, while percent "
            "agreement, Brennan-Prediger, AC1 and PABAK are 1 by their definitions; this says "
            "nothing about reliability, and no interval is given"
        )
    alpha = coefs.get("krippendorff_alpha")
    if alpha is not None and alpha.estimate is None and alpha.reason:
        notes.append(f"alpha is undefined: {U.describe(alpha.reason)}")
    pa = coefs.get("percent_agreement")
    if (
        pa
        and alpha
        and pa.estimate is not None
        and alpha.estimate is not None
        and pa.estimate >= PARADOX_AGREEMENT
        and alpha.estimate < th.tentative
    ):
        notes.append(
            f"high percent agreement ({pa.estimate:.0%}) but low alpha ({alpha.estimate:.2f}): "
            "one category holds most values, so chance agreement is high (the prevalence "
            "paradox); report both and look at the per-category agreement"
        )
    rare = [
        f"{code} = {t.var.label_of(code)}" if t.kind == "variable" else str(code)
        for code, s in cat_agree.items()
        if s.get("share_of_values") is not None and 0 < s["share_of_values"] < RARE_SHARE
    ]
    if rare:
        notes.append(
            "categories used for under 5% of values: " + ", ".join(rare) + "; agreement on "
            "them rests on very few units"
        )
    fk = coefs.get("fleiss_kappa")
    if fk is not None and fk.estimate is not None and fleiss_units < pairable_units:
        notes.append(
            f"Fleiss' kappa: the {fleiss_units} of {pairable_units} units coded by every coder; "
            "its SE holds under kappa = 0 only (for the z test)"
        )
    if t.kind == "variable" and t.var.multiple:
        notes.append(
            "multi-select: alpha uses the Jaccard set distance; binary alpha per category is "
            "in the per-category table"
        )
    if t.kind == "applicability":
        notes.append(
            "agreement on whether the variable applies, from each coder's own value of "
            f"'{t.var.applies_when.variable}'"
        )
    elif t.var.applies_when is not None:
        notes.append("computed on the units where the coder's own values say it applies")
    return notes


def _row(
    t: _Target,
    evaluated: dict[str, Evaluated],
    coders: list[str],
    ci_level: float,
    interval_method: str,
) -> VariableAgreement:
    x = t.x
    per_unit = (x >= 0).sum(axis=1)
    pairable_units = int((per_unit >= 2).sum())
    pairable_values = int(per_unit[per_unit >= 2].sum())
    complete = (per_unit == x.shape[1]) & (x.shape[1] >= 2)
    fleiss_units = int(complete.sum()) if t.scale.kind == "categorical" else 0
    pairable_x = x[per_unit >= 2]
    used = int(np.unique(pairable_x[pairable_x >= 0]).size)
    one_value = used == 1
    # Every pairable unit's values identical (and more than one value used): each bootstrap
    # resample agrees perfectly too, and the interval would collapse to a confident [1, 1].
    perfect = (
        pairable_units > 0
        and not one_value
        and bool(
            np.all(
                np.where(pairable_x >= 0, pairable_x, -1).max(axis=1)
                == np.where(pairable_x >= 0, pairable_x, np.iinfo(np.int64).max).min(axis=1)
            )
        )
    )
    replicates = max((ev.replicates.size for ev in evaluated.values()), default=0)
    few_replicates = 0 < replicates < min_replicates(ci_level)
    if one_value:
        thin_reason = ONE_VALUE_USED
    elif pairable_units < MIN_UNITS_FOR_INTERVAL:
        thin_reason = THIN_DATA
    elif perfect:
        thin_reason = PERFECT_AGREEMENT
    else:
        thin_reason = TOO_FEW_REPLICATES
    thin = pairable_units < MIN_UNITS_FOR_INTERVAL or one_value or perfect or few_replicates
    coefs: dict[str, Estimate | None] = {}
    for key in COEFFICIENTS:
        ev = evaluated.get(key)
        if ev is None:
            coefs[key] = None
            continue
        point = _num(ev.point)
        if point is None:
            coefs[key] = Estimate(None, reason=_reason(key, t, pairable_values, fleiss_units))
            continue
        ci = None
        if not thin and ev.replicates.size:
            ci = interval(ev.replicates, ev.point, ev.jackknife, ci_level, interval_method)
        coefs[key] = Estimate(point, ci, None, thin_reason if thin else None)
    pairs, confusion = _pairs(t, coders)
    complete_counts = (
        value_counts(x[complete], t.scale.size) if t.scale.kind == "categorical" else np.empty(0)
    )
    coefs = _standard_errors(t, coefs, confusion, complete_counts)
    cat_agree = _category_agreement(t, confusion, complete_counts)
    alpha = coefs.get("krippendorff_alpha")
    below = None
    if alpha is not None and alpha.estimate is not None and not thin:
        below = share_below(evaluated["krippendorff_alpha"].replicates, t.thresholds.tentative)
    return VariableAgreement(
        variable=t.name,
        label=t.label,
        level=t.level,
        units=pairable_units,
        coders=int((x >= 0).any(axis=0).sum()),
        pairable_values=pairable_values,
        coefficients=coefs,
        alpha_below_min=below,
        verdict=_verdict(alpha, t.thresholds, pairable_units),
        notes=tuple(
            _notes(t, coefs, pairable_units, fleiss_units, cat_agree, replicates, ci_level)
        ),
        kind=t.kind,
        fleiss_units=fleiss_units,
        categories=t.categories,
        confusion=confusion,
        category_agreement=cat_agree,
        pairs=pairs,
    )


def _check_settings(replicates: Any, seed: Any, ci_level: Any, interval_method: Any) -> None:
    """Refuse bootstrap settings that would give no interval, a wrong one, or a numpy error."""
    if isinstance(replicates, bool) or not isinstance(replicates, int | np.integer):
        raise UsageError(f"replicates must be a whole number, not {replicates!r}")
    if replicates < 0:
        raise UsageError(f"replicates must be 0 (no intervals) or more, not {replicates}")
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise UsageError(f"seed must be a whole number of 0 or more, not {seed!r}")
    if isinstance(ci_level, bool) or not isinstance(ci_level, int | float):
        raise UsageError(f"ci_level must be a number between 0 and 1, not {ci_level!r}")
    if not 0 < ci_level < 1:
        raise UsageError(f"ci_level must lie between 0 and 1 (for example 0.95), not {ci_level}")
    if interval_method not in INTERVAL_METHODS:
        raise UsageError(
            f"interval_method must be one of {', '.join(INTERVAL_METHODS)}, not {interval_method!r}"
        )


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
    progress
        Called as ``progress(done, total)`` while the work advances.

    Returns
    -------
    AgreementResult
        One :class:`VariableAgreement` per variable, plus one per variable with ``applies_when``
        for agreement on applicability.

    References
    ----------
    Krippendorff, K. (2004). *Content Analysis* (2nd ed.). Hayes, A. F., & Krippendorff, K.
    (2007). Answering the call for a standard reliability measure for coding data.
    *Communication Methods and Measures*, 1(1), 77-89. Fleiss, J. L., Cohen, J., & Everitt,
    B. S. (1969). Large sample standard errors of kappa and weighted kappa. *Psychological
    Bulletin*, 72(5), 323-327. Fleiss, J. L., Nee, J. C. M., & Landis, J. R. (1979). Large sample
    variance of kappa in the case of different sets of raters. *Psychological Bulletin*, 86(5),
    974-977.
    """
    _check_settings(replicates, seed, ci_level, interval_method)
    cb = codings.codebook
    coders = codings.coders
    units = codings.units
    targets = _targets(codings, coders, units)
    plans = [build_plan(t.x, t.scale) for t in targets]
    total = 2 * len(plans)

    def step(done: int, _total: int) -> None:
        if progress is not None:
            progress(done, total)

    # ONE seeded matrix of unit weights over the project's units, reused for every variable and
    # coefficient: a unit without values for a variable contributes nothing to its sums.
    try:
        weights = unit_weights(len(units), replicates, seed)
        evaluated_all = evaluate_plans(plans, weights, progress=step)
    except MemoryError:
        raise UsageError(
            f"not enough memory for {replicates:,} bootstrap replicates over {len(units):,} "
            "units; use fewer replicates (2,000 are usual; 0 gives no intervals)"
        ) from None
    rows = []
    for t, evaluated in zip(targets, evaluated_all, strict=True):
        rows.append(_row(t, evaluated, coders, ci_level, interval_method))
        step(len(plans) + len(rows), total)
    return AgreementResult(
        tuple(rows),
        replicates,
        seed,
        interval_method,
        ci_level,
        coders=tuple(coders),
        codebook_title=str(cb.title or ""),
        codebook_version=str(cb.version or ""),
    )
