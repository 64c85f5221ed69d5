"""Unit-level bootstrap with one shared matrix of unit weights, and the jackknife as weights.

One seeded matrix ``W`` (R x U) of multinomial counts (how often each unit is drawn in each
replicate, ``numpy.random.Generator(PCG64(seed))``) serves every variable and coefficient. A
replicate's sums are ``W @ contributions`` (one matrix product for a batch of variables); the
formulas of :mod:`coderel.stats.plan` then act on all R rows at once. The jackknife (for the BCa
acceleration) uses the identity leave-one-out sums = total - the unit's own contribution.

References
----------
Efron, B., & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
ch. 11 (jackknife) and 14 (BCa).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from coderel.stats.plan import Plan

Progress = Callable[[int, int], None]


def unit_weights(n_units: int, replicates: int, seed: int) -> np.ndarray:
    """R x U float matrix: how often each unit is drawn in each replicate (rows sum to U).

    Each replicate draws U units uniformly with replacement (the unit-level bootstrap, Efron &
    Tibshirani 1993, ch. 6); the counts are multinomial(U, 1/U), obtained by counting the draws.
    """
    rng = np.random.Generator(np.random.PCG64(seed))
    if n_units == 0 or replicates <= 0:
        return np.zeros((max(replicates, 0), n_units))
    draws = rng.integers(0, n_units, size=(replicates, n_units))
    draws += (np.arange(replicates) * n_units)[:, None]
    counts = np.bincount(draws.ravel(), minlength=replicates * n_units)
    return counts.reshape(replicates, n_units).astype(float)


@dataclass(frozen=True)
class Evaluated:
    """One coefficient: point estimate, bootstrap replicates (R,), jackknife values (J,)."""

    point: float
    replicates: np.ndarray
    jackknife: np.ndarray


def _evaluate(plan: Plan, sums: np.ndarray | None) -> dict[str, Evaluated]:
    c = plan.contributions
    total = c.sum(axis=0)
    rows = np.flatnonzero(np.any(c != 0, axis=1)) if c.shape[1] else np.array([], int)
    jack_sums = total[None, :] - c[rows]
    out: dict[str, Evaluated] = {}
    for name, formula in plan.formulas.items():
        point = float(formula(total[None, :])[0])
        reps = formula(sums) if sums is not None else np.empty(0)
        jack = formula(jack_sums) if len(rows) else np.empty(0)
        out[name] = Evaluated(point, np.asarray(reps, float), np.asarray(jack, float))
    return out


def evaluate_plans(
    plans: Sequence[Plan],
    weights: np.ndarray | None,
    *,
    progress: Progress | None = None,
    max_columns: int = 4096,
) -> list[dict[str, Evaluated]]:
    """Point, bootstrap and jackknife values of every coefficient of every plan.

    Plans are batched so that one matrix product ``weights @ contributions`` covers up to
    ``max_columns`` columns; ``progress(done, total)`` is called after each batch.
    """
    results: list[dict[str, Evaluated]] = [{} for _ in plans]
    total = len(plans)
    batch: list[int] = []
    width = 0

    def flush() -> None:
        nonlocal batch, width
        if not batch:
            return
        sums = None
        if weights is not None and len(weights):
            stacked = np.hstack([plans[i].contributions for i in batch])
            sums = weights @ stacked
        offset = 0
        for i in batch:
            m = plans[i].contributions.shape[1]
            part = sums[:, offset : offset + m] if sums is not None else None
            results[i] = _evaluate(plans[i], part)
            offset += m
        if progress is not None:
            progress(batch[-1] + 1, total)
        batch, width = [], 0

    for i, plan in enumerate(plans):
        batch.append(i)
        width += plan.contributions.shape[1]
        if width >= max_columns:
            flush()
    flush()
    return results
