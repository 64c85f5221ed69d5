"""Bootstrap intervals (percentile and BCa) and the share of replicates below a threshold.

References
----------
Efron, B. (1987). Better bootstrap confidence intervals. *Journal of the American Statistical
Association*, 82(397), 171-185.
Efron, B., & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*, ch. 13-14.
Hayes, A. F., & Krippendorff, K. (2007). Answering the call for a standard reliability measure for
coding data. *Communication Methods and Measures*, 1(1), 77-89 (the share of replicates in which
alpha falls below the smallest acceptable value: a share of replicates, not the probability that
the true alpha is that low).
"""

from __future__ import annotations

from statistics import NormalDist
from typing import Literal

import numpy as np

IntervalMethod = Literal["bca", "percentile"]
INTERVAL_METHODS: tuple[str, ...] = ("bca", "percentile")
_N = NormalDist()


def _finite(values: np.ndarray) -> np.ndarray:
    v = np.asarray(values, dtype=float)
    return v[np.isfinite(v)]


def percentile_interval(replicates: np.ndarray, level: float) -> tuple[float, float] | None:
    """Quantiles (1 - level) / 2 and (1 + level) / 2 of the finite replicates."""
    reps = _finite(replicates)
    if reps.size < 2:
        return None
    lo, hi = np.quantile(reps, [(1 - level) / 2, (1 + level) / 2])
    return float(lo), float(hi)


def acceleration(jackknife: np.ndarray) -> float:
    """a = sum (mean - theta_i)^3 / (6 [sum (mean - theta_i)^2]^1.5) (Efron & Tibshirani, 14.15)."""
    jack = _finite(jackknife)
    if jack.size < 3:
        return 0.0
    diff = jack.mean() - jack
    den = 6.0 * float((diff**2).sum()) ** 1.5
    return float((diff**3).sum()) / den if den > 0 else 0.0


def bca_interval(
    replicates: np.ndarray, point: float, jackknife: np.ndarray, level: float
) -> tuple[float, float] | None:
    """Bias-corrected and accelerated interval (Efron 1987).

    Bias correction z0 = Phi^-1(share of replicates below the estimate, ties counted half);
    acceleration from the jackknife. When every replicate equals the estimate the interval is
    the single point.
    """
    reps = _finite(replicates)
    if reps.size < 2 or not np.isfinite(point):
        return None
    if np.all(reps == reps[0]):
        return float(reps[0]), float(reps[0])
    share = (np.sum(reps < point) + 0.5 * np.sum(reps == point)) / reps.size
    share = min(max(share, 0.5 / reps.size), 1.0 - 0.5 / reps.size)
    z0 = _N.inv_cdf(share)
    a = acceleration(jackknife)
    probs = []
    for tail in ((1 - level) / 2, (1 + level) / 2):
        z = z0 + _N.inv_cdf(tail)
        den = 1.0 - a * z
        adj = z0 + z / den if den > 0 else (np.inf if tail > 0.5 else -np.inf)
        probs.append(_N.cdf(adj) if np.isfinite(adj) else (1.0 if adj > 0 else 0.0))
    lo, hi = np.quantile(reps, probs)
    return float(lo), float(hi)


def interval(
    replicates: np.ndarray, point: float, jackknife: np.ndarray, level: float, method: str
) -> tuple[float, float] | None:
    """The interval of the chosen method (``bca`` or ``percentile``)."""
    if method == "percentile":
        return percentile_interval(replicates, level)
    return bca_interval(replicates, point, jackknife, level)


def share_below(replicates: np.ndarray, threshold: float) -> float | None:
    """Share of finite replicates below ``threshold`` (Hayes & Krippendorff 2007: q)."""
    reps = _finite(replicates)
    if reps.size == 0:
        return None
    return float(np.mean(reps < threshold))
