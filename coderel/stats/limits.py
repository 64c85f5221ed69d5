"""Bland-Altman limits of agreement between two coders' numbers, with their confidence intervals.

On the n units both coders valued, with differences d = a - b and means m = (a + b) / 2: the mean
difference (bias) d_bar and the standard deviation s of the differences give the limits of
agreement d_bar -+ 1.96 s, within which about 95% of differences fall if they are roughly
normal. The standard error of d_bar is sqrt(s^2 / n), that of either limit approximately
sqrt(3 s^2 / n); the intervals use Student's t with n - 1 degrees of freedom (Bland & Altman 1986,
section "Precision of estimated limits of agreement"). When the differences grow or shrink with
the size of the measurement (a proportional bias) the limits are not one band; it is checked by
regressing the differences on the means (Bland & Altman 1999, section 3.2): a slope different
from 0 at the 5% level (a convention) is reported.

References
----------
Bland, J. M., & Altman, D. G. (1986). Statistical methods for assessing agreement between two
methods of clinical measurement. *The Lancet*, 327(8476), 307-310.
Bland, J. M., & Altman, D. G. (1999). Measuring agreement in method comparison studies.
*Statistical Methods in Medical Research*, 8(2), 135-160.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coderel.stats.distributions import t_ppf, t_sf

#: The multiple of the SD of differences that spans about 95% of them (Bland & Altman 1986).
LIMIT_MULTIPLE = 1.96
#: Significance level of the proportional-bias slope test (a convention of the field).
PROPORTIONAL_BIAS_LEVEL = 0.05


@dataclass(frozen=True)
class ProportionalBias:
    """Least-squares regression of the differences on the means (Bland & Altman 1999, 3.2)."""

    slope: float
    intercept: float
    se: float | None
    p_value: float | None

    @property
    def significant(self) -> bool:
        return self.p_value is not None and self.p_value < PROPORTIONAL_BIAS_LEVEL


@dataclass(frozen=True)
class LimitsOfAgreement:
    """Bias, SD of differences and limits of agreement of one pair, with their intervals.

    Differences are ``a - b``. ``None`` where n is too small: an SD needs two units, intervals
    and the regression three.
    """

    n: int
    mean_difference: float | None
    mean_difference_ci: tuple[float, float] | None
    sd: float | None
    lower: float | None
    lower_ci: tuple[float, float] | None
    upper: float | None
    upper_ci: tuple[float, float] | None
    proportional_bias: ProportionalBias | None
    means: np.ndarray
    differences: np.ndarray


def _ci(centre: float, se: float, t: float) -> tuple[float, float]:
    return float(centre - t * se), float(centre + t * se)


def proportional_bias(means: np.ndarray, differences: np.ndarray) -> ProportionalBias | None:
    """Slope of differences on means with its t test (n - 2 df); ``None`` with fewer than three
    units or means that do not vary."""
    n = len(means)
    if n < 3:
        return None
    mx = float(np.mean(means))
    sxx = float(np.sum((means - mx) ** 2))
    if sxx <= 1e-12 * max(float(np.sum(means**2)), 1e-300):
        return None
    md = float(np.mean(differences))
    slope = float(np.sum((means - mx) * (differences - md))) / sxx
    intercept = md - slope * mx
    resid = differences - intercept - slope * means
    rss = float(np.sum(resid**2))
    if n == 3 and rss == 0:
        return ProportionalBias(slope, intercept, None, None)
    se = float(np.sqrt(rss / (n - 2) / sxx))
    if se == 0:
        return ProportionalBias(slope, intercept, 0.0, 0.0 if slope != 0 else 1.0)
    p = float(2 * t_sf(abs(slope / se), n - 2))
    return ProportionalBias(slope, intercept, se, p)


def limits_of_agreement(
    a: np.ndarray, b: np.ndarray, level: float = 0.95, multiple: float = LIMIT_MULTIPLE
) -> LimitsOfAgreement:
    """Bland-Altman limits of agreement of coder a against coder b.

    Parameters
    ----------
    a, b
        The two coders' numbers per unit, ``nan`` where a coder gave none; only units with both
        count.
    level
        Level of the intervals of the bias and the limits (t quantile, n - 1 df).
    multiple
        The limits are mean difference -+ ``multiple`` SD (1.96 for about 95% of differences).

    Examples
    --------
    Bland & Altman (1986), Table 1 (peak expiratory flow, Wright minus mini Wright meter, first
    readings of 17 subjects; data from memory): mean difference -2.1 and SD 38.8 l/min.

    >>> w = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427]
    >>> m = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451]
    >>> loa = limits_of_agreement(np.array(w, float), np.array(m, float))
    >>> round(loa.mean_difference, 1), round(loa.sd, 1)
    (-2.1, 38.8)
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    both = np.isfinite(a) & np.isfinite(b)
    d = a[both] - b[both]
    m = (a[both] + b[both]) / 2.0
    n = int(both.sum())
    if n == 0:
        return LimitsOfAgreement(0, None, None, None, None, None, None, None, None, m, d)
    bias = float(np.mean(d))
    if n < 2:
        return LimitsOfAgreement(n, bias, None, None, None, None, None, None, None, m, d)
    sd = float(np.std(d, ddof=1))
    lower, upper = bias - multiple * sd, bias + multiple * sd
    bias_ci = lower_ci = upper_ci = None
    if n >= 3:
        t = float(t_ppf((1 + level) / 2, n - 1))
        bias_ci = _ci(bias, sd / np.sqrt(n), t)
        se_limit = float(np.sqrt(3.0 * sd**2 / n))
        lower_ci, upper_ci = _ci(lower, se_limit, t), _ci(upper, se_limit, t)
    return LimitsOfAgreement(
        n,
        bias,
        bias_ci,
        sd,
        float(lower),
        lower_ci,
        float(upper),
        upper_ci,
        proportional_bias(m, d),
        m,
        d,
    )
