"""Result dataclasses of :func:`coderel.agree.agreement`: an estimate, a pair of coders, a
variable's row and the whole project's result, each with ``to_dict`` (and tables)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from coderel.agree.conventions import COEFFICIENTS


def finite(value: float | None) -> float | None:
    """``value`` as a float, or ``None`` when it is missing, infinite or NaN."""
    return None if value is None or not math.isfinite(value) else float(value)


@dataclass(frozen=True)
class Estimate:
    """A coefficient's estimate, bootstrap interval, standard error and, for Fleiss' kappa, the
    z test against kappa = 0. ``reason`` is a slug (:mod:`coderel.stats.undefined`) when the
    estimate is ``None``, or ``too-few-units``, ``one-value-used``, ``perfect-agreement`` or
    ``too-few-replicates`` when only the interval is withheld. ``se_reason`` says why ``se`` is
    ``None`` where a standard error would be given, ``p_value_reason`` why ``p_value`` is
    ``None`` although ``z`` is given (a p-value below 1e-300 is not held as a number).
    ``undefined_replicates`` counts the bootstrap replicates in which the coefficient had no
    value (left out of its interval)."""

    estimate: float | None
    ci: tuple[float, float] | None = None
    se: float | None = None
    reason: str | None = None
    z: float | None = None
    p_value: float | None = None
    se_reason: str | None = None
    p_value_reason: str | None = None
    undefined_replicates: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {
            "estimate": self.estimate,
            "ci": list(self.ci) if self.ci else None,
            "se": self.se,
            "reason": self.reason,
            "z": self.z,
            "p_value": self.p_value,
            "se_reason": self.se_reason,
            "p_value_reason": self.p_value_reason,
            "undefined_replicates": self.undefined_replicates,
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
    fleiss_values_per_unit: int = 0
    categories: tuple[Any, ...] = ()
    confusion: dict[tuple[str, str], np.ndarray] = field(default_factory=dict)
    category_agreement: dict[Any, dict[str, float | None]] = field(default_factory=dict)
    pairs: tuple[PairAgreement, ...] = ()
    #: ICC table, Lin's coefficient and limits of agreement per pair (numeric variables;
    #: :class:`coderel.agree.numeric.NumericDetail`).
    numeric: Any = None

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
            "fleiss_values_per_unit": self.fleiss_values_per_unit,
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
        if self.numeric is not None:
            out.update(self.numeric.to_dict())
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
    scheme: str = "poisson"

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
                "scheme": self.scheme,
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
                        "se_reason": est.se_reason,
                        "p_value_reason": est.p_value_reason,
                        "undefined_replicates": est.undefined_replicates,
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
