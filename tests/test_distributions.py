"""F and t tail areas and quantiles from scipy.special, checked against scipy.stats.

:mod:`coderel.stats.distributions` calls the special functions scipy.stats itself calls
(Abramowitz & Stegun 1964, 26.6 and 26.7) without importing scipy.stats. The reference is
scipy.stats (a general-purpose library outside the project): on a grid of points, degrees of
freedom and levels, including points outside the support, infinite and missing values and
degrees of freedom that are not positive, both must give the same numbers, bit for bit.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
from scipy import stats

from coderel.stats.distributions import f_ppf, f_sf, t_ppf, t_sf

POINTS = [-1.0, 0.0, 1e-300, 0.37, 1.0, 2.5, 17.0, 1e6, math.inf, -math.inf, math.nan]
DFS = [-1.0, 0.0, 0.5, 1.0, 2.0, 3.7, 29.0, 1e5, math.inf]
LEVELS = [0.0, 1e-12, 0.025, 0.5, 0.95, 0.975, 1 - 1e-12, 1.0]


def _same(ours: float, theirs: float) -> bool:
    return (math.isnan(ours) and math.isnan(theirs)) or ours == theirs


def test_f_tail_area_and_quantile_are_scipy_stats():
    for x, a, b in itertools.product(POINTS, DFS, DFS):
        assert _same(f_sf(x, a, b), stats.f.sf(x, a, b)), (x, a, b)
    for q, a, b in itertools.product(LEVELS, DFS, DFS):
        if q in (0.0, 1.0):
            continue  # coderel asks only for levels strictly between 0 and 1
        assert _same(f_ppf(q, a, b), stats.f.ppf(q, a, b)), (q, a, b)


def test_t_tail_area_and_quantile_are_scipy_stats():
    for x, df in itertools.product(POINTS, DFS):
        assert _same(t_sf(x, df), stats.t.sf(x, df)), (x, df)
    for q, df in itertools.product(LEVELS, DFS):
        if q in (0.0, 1.0):
            continue
        assert _same(t_ppf(q, df), stats.t.ppf(q, df)), (q, df)


def test_results_are_numpy_floats_as_scipy_stats_gives():
    """Callers divide by these (a zero quantile is inf with a warning, not an exception), so
    every branch returns a numpy float, as scipy.stats does."""
    results = [
        f_sf(2.0, 3.0, 10.0),
        f_sf(-1.0, 3.0, 10.0),
        f_sf(2.0, 0.0, 10.0),
        f_ppf(0.975, 3.0, 10.0),
        f_ppf(1.0, 3.0, 10.0),
        t_sf(2.0, 5.0),
        t_sf(math.nan, 5.0),
        t_ppf(0.975, 5.0),
        t_ppf(0.975, -1.0),
    ]
    assert all(type(r) is np.float64 for r in results)
    assert all(type(r) is np.float64 for r in (stats.f.sf(2.0, 3, 10), stats.t.ppf(0.975, 5)))
