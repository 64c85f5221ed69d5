"""Tail areas and quantiles of the F and t distributions, from :mod:`scipy.special`.

:mod:`scipy.stats` computes these with the same special functions (the regularised incomplete
beta function and its inverse: ``fdtrc``, ``fdtri``, ``stdtr``, ``stdtrit``), but importing it
costs about 0.6 s, a tenth of a whole ``agree`` on 300,000 labels; :mod:`scipy.special` costs a
fraction of that. Arguments outside a distribution's domain give ``nan``, and a point below the
F distribution's support a tail area of 1, as :mod:`scipy.stats` gives them
(tests/test_distributions.py compares the two on a grid, bit for bit).

References
----------
Abramowitz, M. & Stegun, I. A. (1964). *Handbook of Mathematical Functions*, 26.6 (F) and 26.7
(Student's t).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

#: Results are numpy floats, as scipy.stats gives them: arithmetic on them (a division by a
#: zero quantile, say) keeps numpy's rules (inf or nan with a warning, not an exception).
_NAN = np.float64(math.nan)


def f_sf(x: float, dfn: float, dfd: float) -> np.float64:
    """P(F > x) for F with ``dfn`` and ``dfd`` degrees of freedom."""
    if not (dfn > 0 and dfd > 0) or math.isnan(x):
        return _NAN
    if x <= 0:
        return np.float64(1.0)
    return np.float64(special.fdtrc(dfn, dfd, x))


def f_ppf(q: float, dfn: float, dfd: float) -> np.float64:
    """The ``q`` quantile of F with ``dfn`` and ``dfd`` degrees of freedom (0 < q < 1)."""
    if not (dfn > 0 and dfd > 0 and 0 < q < 1):
        return _NAN
    return np.float64(special.fdtri(dfn, dfd, q))


def t_sf(x: float, df: float) -> np.float64:
    """P(T > x) for Student's t with ``df`` degrees of freedom."""
    if not df > 0 or math.isnan(x):
        return _NAN
    return np.float64(special.stdtr(df, -x))


def t_ppf(q: float, df: float) -> np.float64:
    """The ``q`` quantile of Student's t with ``df`` degrees of freedom (0 < q < 1)."""
    if not (df > 0 and 0 < q < 1):
        return _NAN
    return np.float64(special.stdtrit(df, q))
