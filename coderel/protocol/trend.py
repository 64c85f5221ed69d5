"""Reliability across rounds (pilot, training rounds, production batches) and coder drift.

Per round and variable: Krippendorff's alpha at the variable's level with a seeded bootstrap
interval over the round's units. Per variable and pair of consecutive rounds: the change in alpha
with a percentile bootstrap interval of the difference; rounds hold different units, so each
round is resampled on its own with its own seed (derived from the one seed and the round's
name, :func:`round_seed`), and the difference of two independent replicate arrays is the
replicate of the difference (Efron & Tibshirani 1993, ch. 8, two-sample problems); a
permutation test of no change shuffles the units of the two rounds between them
(:mod:`coderel.protocol.permutation`). A unit's weight in a replicate is a pure function of
(round seed, unit ID, replicate) (:mod:`coderel.stats.bootstrap`): the order of files and rows
changes no number, and a unit coded again in a later round is resampled independently there.

Per coder and round: the coder's mean pairwise agreement with the other coders of that round
(share of identical values over every variable, averaged over the coder's partners), its
bootstrap interval, and the change from the coder's previous round with the interval of the
difference. A coder is flagged when that interval lies wholly below zero: their agreement with
the others dropped by more than resampling explains. A flag is a reason to talk with the coder,
not proof of drift: harder units or a changed codebook lower everyone's agreement, which is why
the change of the other coders is shown beside it.

References
----------
Efron, B., & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall.
Krippendorff, K. (2004). *Content Analysis* (2nd ed.), section 11.4 (reliability data from
several rounds are not pooled: each round's alpha speaks for its own units). Sage.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from itertools import pairwise
from typing import Any

import numpy as np
import pandas as pd

from coderel.agree import MIN_UNITS_FOR_INTERVAL, Estimate, min_replicates
from coderel.agree.driver import check_settings
from coderel.agree.matrices import build_targets
from coderel.codebook import Codebook
from coderel.codings import Codings
from coderel.errors import UsageError
from coderel.protocol.permutation import change_under_shuffles, permutation_p, shuffle_seed
from coderel.stats.bootstrap import PoissonUnitWeights, UnitWeights, evaluate_plans
from coderel.stats.coders import pairwise_agreement
from coderel.stats.intervals import interval, percentile_interval
from coderel.stats.plan import build_plan

DRIFT_WORDS = (
    "a drift flag means the coder's agreement with the others dropped by more than resampling "
    "explains; it is a reason to talk with the coder, not proof: harder units or a changed "
    "codebook lower everyone's agreement (compare with the others' change)"
)


def round_seed(seed: int, name: str) -> int:
    """The bootstrap seed of the round called ``name``: BLAKE2b of the seed and the name.

    Keyed by the name, not the position, so a round's interval does not change when rounds are
    added before it or given in another order; two rounds get independent weights even when
    they hold the same unit IDs.
    """
    digest = hashlib.blake2b(f"{int(seed)}\x1fround\x1f{name}".encode(), digest_size=8)
    return int.from_bytes(digest.digest(), "little") >> 1  # a non-negative 63-bit integer


@dataclass(frozen=True)
class RoundAlpha:
    """Alpha of one variable in one round."""

    round: str
    variable: str
    units: int
    alpha: Estimate

    def to_dict(self) -> dict[str, Any]:
        return {
            "round": self.round,
            "variable": self.variable,
            "units": self.units,
            **self.alpha.to_dict(),
        }


@dataclass(frozen=True)
class RoundChange:
    """Change of a variable's alpha from one round to the next, with its interval."""

    variable: str
    from_round: str
    to_round: str
    change: float | None
    ci: tuple[float, float] | None
    #: Two-sided permutation p-value of no change (:mod:`coderel.protocol.permutation`).
    p_value: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "variable": self.variable,
            "from_round": self.from_round,
            "to_round": self.to_round,
            "change": self.change,
            "ci": list(self.ci) if self.ci else None,
            "p_value": self.p_value,
        }


@dataclass(frozen=True)
class CoderRound:
    """One coder in one round: mean pairwise agreement with the others, change, drift flag."""

    coder: str
    round: str
    partners: int
    values: int
    agreement: float | None
    ci: tuple[float, float] | None
    change: float | None = None
    change_ci: tuple[float, float] | None = None
    others_change: float | None = None
    drift: bool = False

    def to_dict(self) -> dict[str, Any]:
        return {
            "coder": self.coder,
            "round": self.round,
            "partners": self.partners,
            "values": self.values,
            "agreement": self.agreement,
            "ci": list(self.ci) if self.ci else None,
            "change": self.change,
            "change_ci": list(self.change_ci) if self.change_ci else None,
            "others_change": self.others_change,
            "drift": self.drift,
        }


@dataclass(frozen=True)
class TrendResult:
    """Alpha per variable per round, changes between rounds, coder agreement and drift."""

    rounds: tuple[str, ...]
    variables: tuple[str, ...]
    alphas: tuple[RoundAlpha, ...]
    changes: tuple[RoundChange, ...]
    coders: tuple[CoderRound, ...]
    thresholds: dict[str, tuple[float, float]]
    replicates: int
    seed: int
    method: str
    ci_level: float
    notes: tuple[str, ...] = ()

    def alpha(self, round_name: str, variable: str) -> RoundAlpha:
        for a in self.alphas:
            if a.round == round_name and a.variable == variable:
                return a
        raise KeyError((round_name, variable))

    def coder_round(self, coder: str, round_name: str) -> CoderRound:
        for c in self.coders:
            if c.coder == coder and c.round == round_name:
                return c
        raise KeyError((coder, round_name))

    @property
    def drifting(self) -> tuple[CoderRound, ...]:
        return tuple(c for c in self.coders if c.drift)

    def to_frame(self) -> pd.DataFrame:
        """Tidy: one row per round and variable."""
        rows = []
        for a in self.alphas:
            lo, hi = a.alpha.ci if a.alpha.ci else (None, None)
            rows.append(
                {
                    "round": a.round,
                    "variable": a.variable,
                    "units": a.units,
                    "alpha": a.alpha.estimate,
                    "ci_low": lo,
                    "ci_high": hi,
                    "reason": a.alpha.reason,
                }
            )
        return pd.DataFrame(rows)

    def coders_frame(self) -> pd.DataFrame:
        """One row per coder and round."""
        rows = []
        for c in self.coders:
            d = c.to_dict()
            lo, hi = c.ci if c.ci else (None, None)
            clo, chi = c.change_ci if c.change_ci else (None, None)
            d.update(ci_low=lo, ci_high=hi, change_ci_low=clo, change_ci_high=chi)
            del d["ci"], d["change_ci"]
            rows.append(d)
        return pd.DataFrame(rows)

    def to_dict(self) -> dict[str, Any]:
        return {
            "rounds": list(self.rounds),
            "variables": list(self.variables),
            "thresholds": {
                k: {"reliable": r, "tentative": t} for k, (r, t) in self.thresholds.items()
            },
            "bootstrap": {
                "replicates": self.replicates,
                "seed": self.seed,
                "method": self.method,
                "ci_level": self.ci_level,
                "scheme": "poisson",
                "round_seeds": {r: round_seed(self.seed, r) for r in self.rounds},
            },
            "alpha": [a.to_dict() for a in self.alphas],
            "changes": [c.to_dict() for c in self.changes],
            "coders": [c.to_dict() for c in self.coders],
            "drift": [{"coder": c.coder, "round": c.round} for c in self.drifting],
            "notes": list(self.notes),
        }


def check_round_names(names: Sequence[str]) -> None:
    """Every round needs a name of its own."""
    seen: set[str] = set()
    for name in names:
        if not str(name).strip():
            raise UsageError("a round needs a name: give --round NAME=PATH")
        if name in seen:
            raise UsageError(
                f"the round name {name!r} is given twice: give every round a name of its own"
            )
        seen.add(name)


@dataclass(frozen=True)
class _Round:
    name: str
    alpha_points: dict[str, float]
    alpha_reps: dict[str, np.ndarray]
    alphas: list[RoundAlpha]
    coders: list[str]
    agree_point: dict[str, float]
    agree_reps: dict[str, np.ndarray]
    partners: dict[str, int]
    values: dict[str, int]


#: Between a round's position and a unit ID while two rounds are pooled for the permutation test.
_POOL_MARK = "\x1f"
#: Units per block of bootstrap weights for the coders' agreement sums.
_BLOCK = 4096


def _finite(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


def _round(
    name: str,
    codings: Codings,
    codebook: Codebook,
    weights: UnitWeights,
    ci_level: float,
    method: str,
) -> _Round:
    coders, units = codings.coders, codings.units
    targets = [t for t in build_targets(codings, coders, units) if t.kind == "variable"]
    plans = [build_plan(t.x, t.scale) for t in targets]
    evaluated = evaluate_plans(plans, weights)
    n_reps = weights.replicates
    enough = n_reps >= min_replicates(ci_level)
    points, reps, alphas = {}, {}, []
    for t, ev in zip(targets, evaluated, strict=True):
        e = ev["krippendorff_alpha"]
        per_unit = (t.x >= 0).sum(axis=1)
        n = int((per_unit >= 2).sum())
        point = _finite(e.point)
        points[t.name] = e.point
        reps[t.name] = e.replicates
        if point is None:
            est = Estimate(None, reason="no-variation" if n >= 1 else "too-few-pairable")
        elif n < MIN_UNITS_FOR_INTERVAL:
            est = Estimate(point, reason="too-few-units")
        elif not enough:
            est = Estimate(point, reason="too-few-replicates" if n_reps else None)
        else:
            est = Estimate(point, interval(e.replicates, e.point, e.jackknife, ci_level, method))
        alphas.append(RoundAlpha(name, t.name, n, est))
    # Coder agreement pooled over variables: per unit and pair, "both coded" and "same value".
    n_coders = len(coders)
    pairs = [(i, j) for i in range(n_coders) for j in range(i + 1, n_coders)]
    both = np.zeros((len(units), len(pairs)))
    same = np.zeros_like(both)
    for t in targets:
        _, b, s = pairwise_agreement(t.x)
        both += b
        same += s
    total_both, total_same = both.sum(axis=0), same.sum(axis=0)
    rep_both = np.zeros((n_reps, len(pairs)))
    rep_same = np.zeros((n_reps, len(pairs)))
    if n_reps:
        for start in range(0, len(units), _BLOCK):
            w = weights.block(start, min(start + _BLOCK, len(units)))
            rep_both += w @ both[start : start + _BLOCK]
            rep_same += w @ same[start : start + _BLOCK]
    agree_point, agree_reps, partners, values = {}, {}, {}, {}
    for c, coder in enumerate(coders):
        cols = [p for p, (i, j) in enumerate(pairs) if c in (i, j) and total_both[p] > 0]
        partners[coder] = len(cols)
        values[coder] = int(total_both[cols].sum()) if cols else 0
        if not cols:
            agree_point[coder] = float("nan")
            agree_reps[coder] = np.full(n_reps, np.nan)
            continue
        agree_point[coder] = float(np.mean(total_same[cols] / total_both[cols]))
        with np.errstate(invalid="ignore", divide="ignore"):
            per_pair = rep_same[:, cols] / rep_both[:, cols]
        ok = np.isfinite(per_pair)
        agree_reps[coder] = np.where(
            ok.any(axis=1),
            np.where(ok, per_pair, 0).sum(axis=1) / np.maximum(ok.sum(axis=1), 1),
            np.nan,
        )
    return _Round(name, points, reps, alphas, coders, agree_point, agree_reps, partners, values)


def _change_p_values(
    earlier: tuple[str, Codings],
    later: tuple[str, Codings],
    codebook: Codebook,
    shuffles: int,
    seed: int,
) -> dict[str, float | None]:
    """Per variable, the permutation p-value of no change in alpha between two rounds."""
    frames = [
        c.frame.assign(unit=f"{i}{_POOL_MARK}" + c.frame["unit"].astype(str))
        for i, (_, c) in enumerate((earlier, later))
    ]
    pooled = Codings.from_records(codebook, pd.concat(frames, ignore_index=True))
    units = pooled.units
    first = np.array([u.startswith(f"0{_POOL_MARK}") for u in units])
    pair_seed = shuffle_seed(seed, earlier[0], later[0])
    out: dict[str, float | None] = {}
    for t in build_targets(pooled, pooled.coders, units):
        if t.kind != "variable":
            continue
        t = t.own()
        if t.x.shape[1] < 2:
            out[t.name] = None
            continue
        observed, shuffled = change_under_shuffles(t.x, t.scale, first, shuffles, pair_seed)
        out[t.name] = permutation_p(observed, shuffled)
    return out


def _difference_interval(
    later: np.ndarray, earlier: np.ndarray, ci_level: float
) -> tuple[float, float] | None:
    if later.size == 0 or earlier.size == 0:
        return None
    return percentile_interval(later - earlier, ci_level)


def trend(
    rounds: Sequence[tuple[str, Codings]],
    *,
    replicates: int = 2000,
    seed: int = 20261202,
    ci_level: float = 0.95,
    interval_method: str = "bca",
    progress: Callable[[int, int], None] | None = None,
) -> TrendResult:
    """Alpha per variable per round, its change between rounds, and each coder's agreement.

    Parameters
    ----------
    rounds
        ``(name, codings)`` in time order; every round read with the same codebook.
    replicates, seed, ci_level, interval_method
        The bootstrap: each round has its own unit weights, keyed by unit ID with
        :func:`round_seed` ``(seed, name)``.
        Intervals of changes are percentile intervals of the difference of replicates.
    progress
        Called as ``progress(done, total)`` after each round.

    Returns
    -------
    TrendResult
    """
    check_settings(replicates, seed, ci_level, interval_method)
    if len(rounds) < 1:
        raise UsageError("give at least one round: --round NAME=PATH")
    check_round_names([name for name, _ in rounds])
    codebook = rounds[0][1].codebook
    done: list[_Round] = []
    for i, (name, codings) in enumerate(rounds):
        weights = PoissonUnitWeights.for_units(codings.units, replicates, round_seed(seed, name))
        done.append(_round(name, codings, codebook, weights, ci_level, interval_method))
        if progress is not None:
            progress(i + 1, len(rounds))
    variables = tuple(v.name for v in codebook.variables)
    changes = []
    for (earlier, later), (pair_a, pair_b) in zip(pairwise(done), pairwise(rounds), strict=True):
        p_values = (
            _change_p_values(pair_a, pair_b, codebook, replicates, seed)
            if replicates >= min_replicates(ci_level)
            else {}
        )
        for var in variables:
            a0, a1 = earlier.alpha_points.get(var), later.alpha_points.get(var)
            change = None
            ci = None
            if a0 is not None and a1 is not None and np.isfinite(a0) and np.isfinite(a1):
                change = float(a1 - a0)
                if replicates >= min_replicates(ci_level):
                    ci = _difference_interval(
                        later.alpha_reps[var], earlier.alpha_reps[var], ci_level
                    )
            p = p_values.get(var) if change is not None else None
            changes.append(RoundChange(var, earlier.name, later.name, change, ci, p))
    coder_rows = []
    last_seen: dict[str, _Round] = {}
    for r in done:
        changes_here: dict[str, float] = {}
        for coder in r.coders:
            prev = last_seen.get(coder)
            p = r.agree_point[coder]
            if prev is not None and np.isfinite(p) and np.isfinite(prev.agree_point[coder]):
                changes_here[coder] = p - prev.agree_point[coder]
        for coder in r.coders:
            p = r.agree_point[coder]
            ci = None
            if np.isfinite(p) and replicates >= min_replicates(ci_level):
                ci = percentile_interval(r.agree_reps[coder], ci_level)
            change = changes_here.get(coder)
            change_ci = None
            drift = False
            others = [v for c, v in changes_here.items() if c != coder]
            if change is not None and replicates >= min_replicates(ci_level):
                prev = last_seen[coder]
                change_ci = _difference_interval(
                    r.agree_reps[coder], prev.agree_reps[coder], ci_level
                )
                drift = change_ci is not None and change_ci[1] < 0
            coder_rows.append(
                CoderRound(
                    coder=coder,
                    round=r.name,
                    partners=r.partners[coder],
                    values=r.values[coder],
                    agreement=_finite(p),
                    ci=ci,
                    change=None if change is None else float(change),
                    change_ci=change_ci,
                    others_change=float(np.mean(others)) if others else None,
                    drift=drift,
                )
            )
        for coder in r.coders:
            if np.isfinite(r.agree_point[coder]):
                last_seen[coder] = r
    thresholds = {
        v: (codebook.thresholds_for(v).reliable, codebook.thresholds_for(v).tentative)
        for v in variables
    }
    notes = [
        "each round's alpha speaks for its own units; rounds are resampled independently, each "
        "with its own seed, and the interval of a change is the percentile interval of the "
        "difference of the two rounds' replicates",
        "p of a change: two-sided permutation test of no change (the units of the two rounds "
        f"shuffled between them {replicates:,} times)",
        "coder agreement: share of identical values with each other coder over every variable, "
        "averaged over the coder's partners",
        DRIFT_WORDS,
    ]
    return TrendResult(
        rounds=tuple(name for name, _ in rounds),
        variables=variables,
        alphas=tuple(a for r in done for a in r.alphas),
        changes=tuple(changes),
        coders=tuple(coder_rows),
        thresholds=thresholds,
        replicates=replicates,
        seed=seed,
        method=interval_method,
        ci_level=ci_level,
        notes=tuple(notes),
    )
