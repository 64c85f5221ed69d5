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

from dataclasses import dataclass
from statistics import NormalDist
from typing import Literal

import numpy as np

IntervalMethod = Literal["bca", "percentile"]
INTERVAL_METHODS: tuple[str, ...] = ("bca", "percentile")
_N = NormalDist()
#: Replicates this close to the estimate (relative to its size, at least 1) count as ties in the
#: BCa bias correction: rounding of sums added in a different order, not a difference.
TIE_TOLERANCE = 1e-12


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


@dataclass(frozen=True)
class JackknifeSums:
    """What the acceleration needs of the finite jackknife values theta_i, without the values:
    their number and the sums of d_i, d_i^2 and d_i^3 for d_i = theta_i - ``centre`` (any centre
    near the values, e.g. the estimate; made part by part and added, by the dask engine).

    The central sums follow from the identities sum (theta_i - mean)^2 = S2 - S1^2 / n and
    sum (theta_i - mean)^3 = S3 - 3 S1 S2 / n + 2 S1^3 / n^2.
    """

    count: int
    s1: float
    s2: float
    s3: float

    def __add__(self, other: JackknifeSums) -> JackknifeSums:
        return JackknifeSums(
            self.count + other.count, self.s1 + other.s1, self.s2 + other.s2, self.s3 + other.s3
        )

    @classmethod
    def of(cls, values: np.ndarray, centre: float) -> JackknifeSums:
        d = _finite(values) - centre
        return cls(int(d.size), float(d.sum()), float((d**2).sum()), float((d**3).sum()))

    def acceleration(self) -> float:
        n = self.count
        if n < 3:
            return 0.0
        m2 = self.s2 - self.s1**2 / n
        m3 = self.s3 - 3.0 * self.s1 * self.s2 / n + 2.0 * self.s1**3 / n**2
        # Spread lost in rounding (every value the same): no acceleration, as for the values.
        if m2 <= 1e-12 * self.s2 or m2 <= 0:
            return 0.0
        return -m3 / (6.0 * m2**1.5)


def acceleration(jackknife: np.ndarray | JackknifeSums) -> float:
    """a = sum (mean - theta_i)^3 / (6 [sum (mean - theta_i)^2]^1.5) (Efron & Tibshirani, 14.15)."""
    if isinstance(jackknife, JackknifeSums):
        return jackknife.acceleration()
    jack = _finite(jackknife)
    if jack.size < 3 or np.all(jack == jack[0]):  # equal values: no skew (not rounding noise)
        return 0.0
    diff = jack.mean() - jack
    den = 6.0 * float((diff**2).sum()) ** 1.5
    return float((diff**3).sum()) / den if den > 0 else 0.0


def bca_interval(
    replicates: np.ndarray, point: float, jackknife: np.ndarray, level: float
) -> tuple[float, float] | None:
    """Bias-corrected and accelerated interval (Efron 1987).

    Bias correction z0 = Phi^-1(share of replicates below the estimate, ties counted half; a
    replicate within :data:`TIE_TOLERANCE` of the estimate, relative, is a tie);
    acceleration from the jackknife. When every replicate equals the estimate the interval is
    the single point.
    """
    reps = _finite(replicates)
    if reps.size < 2 or not np.isfinite(point):
        return None
    if np.all(reps == reps[0]):
        return float(reps[0]), float(reps[0])
    # A replicate within rounding of the estimate is a tie: the same sums added in another
    # order (blocks, partitions, workers) must not move a replicate from one side to the other.
    near = np.abs(reps - point) <= TIE_TOLERANCE * max(1.0, abs(point))
    share = (np.sum((reps < point) & ~near) + 0.5 * np.sum(near)) / reps.size
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
