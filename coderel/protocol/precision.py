"""Precision plan: the expected width of alpha's bootstrap interval at a candidate sample size.

From a pilot's units coded by two or more coders, a replicate draws ``n`` of them with replacement
(each pilot unit equally likely) and computes alpha on the draw; over many replicates the spread
of those alphas is the sampling spread of alpha in a study of ``n`` units that resemble the pilot.
The expected half-width of a 95% interval at ``n`` is half the distance between the 2.5% and
97.5% quantiles of the replicates (the percentile bootstrap, Efron & Tibshirani 1993, ch. 13).

The replicates use coderel's shared-weights bootstrap: one seeded matrix ``W`` (replicates x pilot
units) of multinomial counts summing to ``n`` per row serves every variable, and a replicate's
alpha is the variable's formula applied to ``W @ contributions``
(:func:`coderel.stats.bootstrap.evaluate_plans`); no Python loop over replicates. ``W`` depends
only on the seed, ``n`` and the number of pilot units, so the curve is reproducible.

References
----------
Efron, B., & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall.
Krippendorff, K. (2004). *Content Analysis* (2nd ed.), ch. 11 (bootstrapping alpha).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from coderel.protocol.pilot import PilotVariable
from coderel.stats.bootstrap import evaluate_plans
from coderel.stats.plan import Plan, build_plan

#: Sample sizes at which the curve is computed (then refined by bisection between two of them).
CANDIDATE_SIZES: tuple[int, ...] = (
    10, 20, 30, 50, 75, 100, 150, 200, 300, 500, 750, 1000, 1500, 2000, 3000, 5000,
)  # fmt: skip
ALPHA = "krippendorff_alpha"
#: Fewer pilot units with two or more values than this and no precision plan is made (as
#: ``coderel agree`` gives no interval below it; common practice, no source).
MIN_PILOT_UNITS_FOR_PRECISION = 10
#: At a size where fewer than this share of replicates give a defined alpha, no width is given.
MIN_DEFINED_SHARE = 0.9


def resample_weights(n_pilot: int, size: int, replicates: int, seed: int) -> np.ndarray:
    """Replicates x pilot-units matrix of how often each pilot unit is drawn among ``size`` draws.

    Each row is multinomial(``size``, 1/``n_pilot``); the generator is seeded with
    ``SeedSequence([seed, size])``, so the matrix at one size does not depend on the others.
    """
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence([seed, size])))
    if n_pilot == 0 or replicates <= 0:
        return np.zeros((max(replicates, 0), n_pilot))
    probs = np.full(n_pilot, 1.0 / n_pilot)
    return rng.multinomial(size, probs, size=replicates).astype(float)


def half_width(replicates: np.ndarray, level: float = 0.95) -> float | None:
    """Half the distance between the (1 - level)/2 and (1 + level)/2 quantiles of the replicates
    (``None`` when fewer than :data:`MIN_DEFINED_SHARE` of them are defined)."""
    reps = np.asarray(replicates, dtype=float)
    finite = reps[np.isfinite(reps)]
    if reps.size == 0 or finite.size < MIN_DEFINED_SHARE * reps.size or finite.size < 2:
        return None
    lo, hi = np.quantile(finite, [(1 - level) / 2, (1 + level) / 2])
    return float(hi - lo) / 2.0


@dataclass(frozen=True)
class PrecisionPlan:
    """One variable's precision plan: the curve and the smallest size meeting the target."""

    target: float
    curve: tuple[tuple[int, float | None], ...]
    n: int | None
    pilot_alpha: float | None


def _alpha_plan(pv: PilotVariable) -> Plan:
    plan = build_plan(pv.x, pv.scale)
    return Plan(plan.contributions, {ALPHA: plan.formulas[ALPHA]})


def precision_plans(
    pilots: Sequence[PilotVariable],
    *,
    target: float = 0.05,
    replicates: int = 1000,
    seed: int = 20261202,
    level: float = 0.95,
    sizes: Sequence[int] = CANDIDATE_SIZES,
    progress: Callable[[int, int], None] | None = None,
) -> list[PrecisionPlan]:
    """The precision plan of every pilot variable, from one weight matrix per candidate size.

    Each variable's plan is built over its own pairable pilot units; all variables with the same
    number of pilot units share one weight matrix per size. The smallest size whose half-width is
    at most ``target`` is found on ``sizes`` and then by bisection between the last size above
    the target and the first at or below it.
    """
    plans = [_alpha_plan(pv) for pv in pilots]
    points = [
        plans[i].point(ALPHA) if pv.pairable_units >= 2 else float("nan")
        for i, pv in enumerate(pilots)
    ]
    # Perfect agreement in the pilot: every resample agrees too, the width would read as zero.
    perfect = [bool(np.isfinite(p) and p >= 1.0 - 1e-12) for p in points]
    cache: dict[tuple[int, int], np.ndarray] = {}

    def widths(indices: list[int], size: int) -> dict[int, float | None]:
        by_units: dict[int, list[int]] = {}
        for i in indices:
            by_units.setdefault(plans[i].contributions.shape[0], []).append(i)
        out: dict[int, float | None] = {}
        for n_pilot, group in by_units.items():
            key = (n_pilot, size)
            if key not in cache:
                cache[key] = resample_weights(n_pilot, size, replicates, seed)
            evaluated = evaluate_plans([plans[i] for i in group], cache[key])
            for i, ev in zip(group, evaluated, strict=True):
                out[i] = half_width(ev[ALPHA].replicates, level) if n_pilot else None
        return out

    active = [
        i
        for i, pv in enumerate(pilots)
        if pv.pairable_units >= MIN_PILOT_UNITS_FOR_PRECISION and not perfect[i]
    ]
    curves: dict[int, list[tuple[int, float | None]]] = {i: [] for i in range(len(pilots))}
    for step, size in enumerate(sizes, start=1):
        for i, w in widths(active, size).items():
            curves[i].append((size, w))
        if progress is not None:
            progress(step, len(sizes))
    out: list[PrecisionPlan] = []
    for i in range(len(pilots)):
        point = points[i]
        curve = curves[i]
        n = None
        if i in active:
            n = _smallest(curve, target, lambda s, i=i: widths([i], s)[i])
        out.append(
            PrecisionPlan(
                target,
                tuple(curve),
                n,
                point if np.isfinite(point) else None,
            )
        )
        cache = {k: v for k, v in cache.items() if k[1] in sizes}
    return out


def _smallest(
    curve: list[tuple[int, float | None]], target: float, width_at: Callable[[int], float | None]
) -> int | None:
    """The smallest size meeting ``target``: first grid point at or below it, then bisection."""
    below = None
    for size, w in curve:
        if w is not None and w <= target:
            hi = size
            break
        below = size
    else:
        return None
    lo = below if below is not None else 1
    if below is None:
        return hi
    while hi - lo > 1:
        mid = (lo + hi) // 2
        w = width_at(mid)
        if w is not None and w <= target:
            hi = mid
        else:
            lo = mid
    return hi
