"""Coder diagnostics: which coder lowers a variable's alpha, and who uses a category more.

Per variable, alpha without each coder in turn (drop-one alpha); per single-choice categorical
variable and pair of coders, tests of marginal homogeneity (Stuart-Maxwell, Bhapkar; McNemar for
two categories) and of symmetry (Bowker) on the pair's table, and each coder's share of each
category beside the pooled share. The formulas live in :mod:`coderel.stats.coders` and
:mod:`coderel.stats.homogeneity`; this module lays them out per variable.

A low p-value says two coders' category shares differ by more than chance allows: one of them
uses a category more. It does not say which coder is right, and with many pairs and variables a
few small p-values turn up by chance alone.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from coderel.agree.prepare import Prepared, prepare
from coderel.codings import Codings
from coderel.stats import homogeneity as H
from coderel.stats.coders import category_shares, drop_one_alpha
from coderel.stats.counts import confusion_table
from coderel.stats.plan import alpha_point

#: Tests run on each pair of coders of a categorical variable.
HOMOGENEITY_TESTS: tuple[str, ...] = ("stuart_maxwell", "bhapkar", "bowker", "mcnemar")
CAUTION = (
    "a small p-value says two coders' category shares differ by more than chance allows (one "
    "uses a category more); it does not say who is right, and among many pairs and variables "
    "some small p-values come by chance"
)


def _num(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


@dataclass(frozen=True)
class DropOne:
    """Alpha of a variable without one coder, and its change from alpha with every coder."""

    coder: str
    alpha_without: float | None
    change: float | None

    def to_dict(self) -> dict[str, Any]:
        return {"coder": self.coder, "alpha_without": self.alpha_without, "change": self.change}


@dataclass(frozen=True)
class PairHomogeneity:
    """Two coders on one categorical variable: the tests on their units x categories table."""

    coder_a: str
    coder_b: str
    units: int
    tests: dict[str, H.ChiSquareTest]

    def to_dict(self) -> dict[str, Any]:
        return {
            "coder_a": self.coder_a,
            "coder_b": self.coder_b,
            "units": self.units,
            **{k: t.to_dict() for k, t in self.tests.items()},
        }


@dataclass(frozen=True)
class CategoryShare:
    """One category: the pooled share of values and each coder's own share."""

    code: Any
    label: str
    pooled: float | None
    by_coder: dict[str, float | None]

    def to_dict(self) -> dict[str, Any]:
        return {
            "code": self.code,
            "label": self.label,
            "pooled": self.pooled,
            "by_coder": dict(self.by_coder),
        }


@dataclass(frozen=True)
class VariableCoders:
    """Coder diagnostics of one variable."""

    variable: str
    level: str
    alpha: float | None
    drop_one: tuple[DropOne, ...]
    homogeneity: tuple[PairHomogeneity, ...] = ()
    shares: tuple[CategoryShare, ...] = ()

    @property
    def lowers_most(self) -> DropOne | None:
        """The coder whose absence raises alpha most (``None`` when none raises it)."""
        rising = [d for d in self.drop_one if d.change is not None and d.change > 0]
        return max(rising, key=lambda d: d.change) if rising else None

    def to_dict(self) -> dict[str, Any]:
        low = self.lowers_most
        return {
            "variable": self.variable,
            "level": self.level,
            "alpha": self.alpha,
            "drop_one": [d.to_dict() for d in self.drop_one],
            "lowers_most": low.coder if low else None,
            "homogeneity": [h.to_dict() for h in self.homogeneity],
            "shares": [s.to_dict() for s in self.shares],
        }


@dataclass(frozen=True)
class CoderDiagnostics:
    """Coder diagnostics of every variable."""

    coders: tuple[str, ...]
    variables: tuple[VariableCoders, ...]
    notes: tuple[str, ...] = (CAUTION,)

    def variable(self, name: str) -> VariableCoders:
        for v in self.variables:
            if v.variable == name:
                return v
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        return {
            "coders": list(self.coders),
            "variables": [v.to_dict() for v in self.variables],
            "notes": list(self.notes),
        }

    def to_frame(self) -> pd.DataFrame:
        """Drop-one alpha: one row per variable and coder left out."""
        rows = [
            {"variable": v.variable, "alpha": v.alpha, **d.to_dict()}
            for v in self.variables
            for d in v.drop_one
        ]
        return pd.DataFrame(rows, columns=["variable", "alpha", "coder", "alpha_without", "change"])

    def homogeneity_frame(self) -> pd.DataFrame:
        """One row per variable, pair of coders and test."""
        rows = []
        for v in self.variables:
            for h in v.homogeneity:
                for name, t in h.tests.items():
                    rows.append(
                        {
                            "variable": v.variable,
                            "coder_a": h.coder_a,
                            "coder_b": h.coder_b,
                            "units": h.units,
                            "test": name,
                            "statistic": t.statistic,
                            "df": t.df,
                            "p_value": t.p_value,
                            "exact_p_value": t.exact_p_value,
                            "reason": t.reason,
                        }
                    )
        return pd.DataFrame(rows)

    def shares_frame(self) -> pd.DataFrame:
        """One row per variable, category and coder (``pooled`` as a coder of its own)."""
        rows = []
        for v in self.variables:
            for s in v.shares:
                rows.append(
                    {"variable": v.variable, "code": s.code, "coder": "pooled", "share": s.pooled}
                )
                for coder, share in s.by_coder.items():
                    rows.append(
                        {"variable": v.variable, "code": s.code, "coder": coder, "share": share}
                    )
        return pd.DataFrame(rows, columns=["variable", "code", "coder", "share"])


def _pair_tests(table: np.ndarray, k: int) -> dict[str, H.ChiSquareTest]:
    tests = {
        "stuart_maxwell": H.stuart_maxwell(table),
        "bhapkar": H.bhapkar(table),
        "bowker": H.bowker(table),
    }
    if k == 2:
        tests["mcnemar"] = H.mcnemar(table)
    return tests


def coder_diagnostics(codings: Codings | Prepared) -> CoderDiagnostics:
    """Drop-one alpha per variable; homogeneity tests and category shares per categorical one.

    Parameters
    ----------
    codings
        The long table, or what :func:`coderel.agree.prepare.prepare` kept of it, as for
        :func:`coderel.agree.agreement`.

    Returns
    -------
    CoderDiagnostics

    References
    ----------
    Krippendorff (2011) for alpha; Stuart (1955), Maxwell (1970), Bhapkar (1966), Bowker (1948)
    and McNemar (1947) for the tests (:mod:`coderel.stats.homogeneity`).
    """
    p = codings if isinstance(codings, Prepared) else prepare(codings)
    coders = p.coders
    out = []
    for target in p.targets:
        if target.kind != "variable":
            continue
        # The variable's own coders (those who gave it a value) are the columns of t.x.
        t = target.own()
        own_coders = list(t.coders)
        alpha = _num(alpha_point(t.x, t.scale))
        without = drop_one_alpha(t.x, t.scale)
        drop = tuple(
            DropOne(
                coder,
                _num(without[c]),
                None if alpha is None or not np.isfinite(without[c]) else float(without[c] - alpha),
            )
            for c, coder in enumerate(own_coders)
            if len(own_coders) >= 3
        )
        pairs: list[PairHomogeneity] = []
        shares: list[CategoryShare] = []
        if t.categories:
            k = t.scale.size
            for i in range(len(own_coders)):
                for j in range(i + 1, len(own_coders)):
                    table = confusion_table(t.x[:, i], t.x[:, j], k)
                    n = int(table.sum())
                    if n == 0:
                        continue
                    pairs.append(
                        PairHomogeneity(own_coders[i], own_coders[j], n, _pair_tests(table, k))
                    )
            own, pooled, _ = category_shares(t.x, k)
            for idx, code in enumerate(t.categories):
                shares.append(
                    CategoryShare(
                        code,
                        t.var.label_of(code) or str(code),
                        _num(pooled[idx]),
                        {c: _num(own[ci, idx]) for ci, c in enumerate(own_coders)},
                    )
                )
        out.append(VariableCoders(t.name, t.level, alpha, drop, tuple(pairs), tuple(shares)))
    return CoderDiagnostics(tuple(coders), tuple(out))
