"""Cohen's kappa (plain and weighted), Light's mean pairwise kappa and Fleiss' kappa.

Every function works on proportions or counts summed over units and is vectorised over a
leading axis of replicates ``R`` (bootstrap or jackknife rows). Undefined values come back as
``nan``; callers attach the reason (:mod:`coderel.stats.undefined`).

References
----------
Cohen, J. (1960). A coefficient of agreement for nominal scales. *Educational and Psychological
Measurement*, 20(1), 37-46.
Cohen, J. (1968). Weighted kappa: Nominal scale agreement with provision for scaled disagreement
or partial credit. *Psychological Bulletin*, 70(4), 213-220.
Fleiss, J. L., Cohen, J., & Everitt, B. S. (1969). Large sample standard errors of kappa and
weighted kappa. *Psychological Bulletin*, 72(5), 323-327.
Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. *Psychological
Bulletin*, 76(5), 378-382.
Fleiss, J. L., Nee, J. C. M., & Landis, J. R. (1979). Large sample variance of kappa in the case
of different sets of raters. *Psychological Bulletin*, 86(5), 974-977.
Light, R. J. (1971). Measures of response agreement for qualitative data: Some generalizations
and alternatives. *Psychological Bulletin*, 76(5), 365-377.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

WeightKind = Literal["identity", "linear", "quadratic", "gwet-ordinal"]


def agreement_weights(k: int, kind: WeightKind) -> np.ndarray:
    """Agreement weights over a scale of ``k`` ordered categories (1 on the diagonal).

    ``linear``: 1 - |i - j| / (k - 1); ``quadratic``: 1 - (i - j)^2 / (k - 1)^2 (Cohen 1968);
    ``gwet-ordinal``: 1 - M(i, j) / M_max with M(i, j) = C(|i - j| + 1, 2) and
    M_max = C(k, 2) (Gwet 2014, *Handbook of Inter-Rater Reliability*, 4th ed., ch. 3; memory).
    The scale is the codebook's full list of categories, used or not.
    """
    idx = np.arange(k, dtype=float)
    diff = np.abs(idx[:, None] - idx[None, :])
    if kind == "identity" or k < 2:
        return np.eye(k)
    if kind == "linear":
        return 1.0 - diff / (k - 1)
    if kind == "quadratic":
        return 1.0 - diff**2 / (k - 1) ** 2
    if kind == "gwet-ordinal":
        m = (diff + 1.0) * diff / 2.0
        return 1.0 - m / (k * (k - 1) / 2.0)
    raise ValueError(f"unknown weight kind {kind!r}; expected identity, linear, quadratic")


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    out = np.full(np.broadcast(num, den).shape, np.nan)
    ok = np.abs(den) > 1e-12
    np.divide(num, den, out=out, where=ok)
    return out


def chance_corrected(p_o: np.ndarray, p_e: np.ndarray) -> np.ndarray:
    """(p_o - p_e) / (1 - p_e), ``nan`` where 1 - p_e is zero."""
    return _ratio(np.asarray(p_o) - np.asarray(p_e), 1.0 - np.asarray(p_e))


def cohen_from_margins(p_o: np.ndarray, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Cohen's kappa from observed agreement and each coder's marginal proportions (R x K)."""
    p_e = np.einsum("rk,rk->r", rows, cols)
    return chance_corrected(p_o, p_e)


def weighted_from_margins(
    p_ow: np.ndarray, rows: np.ndarray, cols: np.ndarray, weights: np.ndarray
) -> np.ndarray:
    """Weighted kappa (Cohen 1968) from weighted observed agreement and marginals (R x K)."""
    p_e = np.einsum("rk,kl,rl->r", rows, weights, cols)
    return chance_corrected(p_ow, p_e)


def percent_agreement_table(table: np.ndarray) -> float | None:
    """Share of units on the diagonal of a two-coder K x K table (``None`` when empty)."""
    t = np.asarray(table, dtype=float)
    n = t.sum()
    return float(np.trace(t) / n) if n > 0 else None


def cohen_kappa_table(
    table: np.ndarray, weights: WeightKind | np.ndarray = "identity"
) -> tuple[float | None, float | None]:
    """Cohen's (weighted) kappa and its large-sample standard error from a K x K table.

    Rows are coder A's categories and columns coder B's, in the codebook's order. The standard
    error is the non-null large-sample formula of Fleiss, Cohen & Everitt (1969), used for
    intervals around kappa (statsmodels' ``std_kappa``).

    Returns ``(None, None)`` when the table is empty or chance agreement is 1.

    Examples
    --------
    A textbook table with p_o = .70 and p_e = .50:

    >>> k, se = cohen_kappa_table([[20, 5], [10, 15]])
    >>> round(k, 4), round(se, 7)
    (0.4, 0.1269961)
    """
    t = np.asarray(table, dtype=float)
    n = t.sum()
    k = t.shape[0]
    w = agreement_weights(k, weights) if isinstance(weights, str) else np.asarray(weights, float)
    if n <= 0:
        return None, None
    p = t / n
    r = p.sum(axis=1)
    c = p.sum(axis=0)
    p_o = float((w * p).sum())
    p_e = float(r @ w @ c)
    if abs(1.0 - p_e) < 1e-12:
        return None, None
    kappa = (p_o - p_e) / (1.0 - p_e)
    w_row = w @ c  # mean weight of row category i against coder B's marginals
    w_col = r @ w  # mean weight of column category j against coder A's marginals
    term = (w - (w_row[:, None] + w_col[None, :]) * (1.0 - kappa)) ** 2
    var = ((p * term).sum() - (kappa - p_e * (1.0 - kappa)) ** 2) / (n * (1.0 - p_e) ** 2)
    se = math.sqrt(var) if var > 0 else 0.0
    return float(kappa), se


def fleiss_from_sums(
    n_units: np.ndarray, counts: np.ndarray, sum_sq: np.ndarray, raters: int
) -> np.ndarray:
    """Fleiss' kappa from sums over complete units (vectorised over rows R).

    ``n_units`` (R,) units coded by all ``raters``; ``counts`` (R x K) values per category summed
    over those units; ``sum_sq`` (R,) the sum over units of sum_k n_ik^2 (Fleiss 1971, eqs. 2-5).
    """
    nn = n_units * raters * (raters - 1)
    p_bar = _ratio(sum_sq - n_units * raters, nn)
    p_j = _ratio(counts, (n_units * raters)[:, None])
    p_e = (p_j**2).sum(axis=1)
    return chance_corrected(p_bar, p_e)


def fleiss_category_kappas(unit_counts: np.ndarray) -> np.ndarray:
    """Kappa of each category (Fleiss 1971, eq. 11) from a units x categories count table.

    Every row must sum to the same number of raters. ``nan`` for unused categories.
    """
    x = np.asarray(unit_counts, dtype=float)
    n_units = x.shape[0]
    if n_units == 0:
        return np.full(x.shape[1], np.nan)
    m = x.sum(axis=1)[0]
    p = x.sum(axis=0) / (n_units * m)
    num = (x * (m - x)).sum(axis=0)
    den = n_units * m * (m - 1) * p * (1 - p)
    return 1.0 - _ratio(num, den)


def fleiss_null_se(p: np.ndarray, n_units: int, raters: int) -> float | None:
    """Standard error of Fleiss' kappa under the null hypothesis kappa = 0.

    Fleiss, Nee & Landis (1979): var = 2 / (N m (m - 1)) * [(sum p q)^2 - sum p q (q - p)] /
    (sum p q)^2. Valid under the null only: it serves the z test, not an interval.
    """
    p = np.asarray(p, dtype=float)
    q = 1.0 - p
    s = float((p * q).sum())
    if n_units <= 0 or raters < 2 or s <= 0:
        return None
    var = 2.0 / (n_units * raters * (raters - 1)) * (s**2 - float((p * q * (q - p)).sum())) / s**2
    return math.sqrt(var) if var > 0 else None


#: Below this a two-sided normal p-value is not reported as a number: ``erfc`` loses its last
#: digits in the subnormal range and reaches 0.0 near z = 37.5; 0.0 would read as "impossible".
P_VALUE_FLOOR = 1e-300


def z_test(estimate: float | None, se: float | None) -> tuple[float | None, float | None]:
    """z = estimate / se and its two-sided normal p-value, 2 (1 - Phi(|z|)).

    The tail is computed as ``erfc(|z| / sqrt(2))``, exact far into the tail (1 - Phi(z) would
    round to 0 beyond z of about 8.3). Below :data:`P_VALUE_FLOOR` the p-value is ``0.0`` only in
    floating point; callers report it as "< 1e-300" (:func:`p_value_text`).

    >>> z, p = z_test(0.4302445, 0.4302445 / 17.65183)
    >>> round(z, 5), f"{p:.3e}"
    (17.65183, '9.851e-70')
    """
    if estimate is None or se is None or se <= 0:
        return None, None
    z = estimate / se
    return z, math.erfc(abs(z) / math.sqrt(2.0))


def p_value_text(p: float | None) -> str | None:
    """``None`` for a p-value that is a number to report, else why it is not one ("< 1e-300")."""
    if p is None or p >= P_VALUE_FLOOR:
        return None
    return f"< {P_VALUE_FLOOR:.0e}"
