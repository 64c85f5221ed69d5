"""Intraclass correlation coefficients: the six forms of Shrout & Fleiss (1979), from per-unit sums.

Every form is a ratio of the mean squares of a units x coders analysis of variance on the units
coded by every coder (complete units). Those mean squares are functions of five sums over the
complete units of per-unit quantities: the number of units n, the grand total sum_u T_u, the sum
of squared row totals sum_u T_u^2, the sum of squared values sum_u sum_j x_uj^2 and the coder
totals C_j = sum_u x_uj. :func:`icc_contributions` gives each unit's share of those sums, so any
vector of unit weights w (ones: the estimate; a bootstrap row of counts: a replicate) yields the
ANOVA of the weighted sample as ``w @ contributions``, and :func:`icc_from_sums` turns a matrix of
such sums (R x M) into R values of a form at once.

Shrout & Fleiss (1979) name the forms ICC(1,1), ICC(2,1), ICC(3,1) (one coder's value) and
ICC(1,k), ICC(2,k), ICC(3,k) (the mean of k coders' values); McGraw & Wong (1996) call the same
quantities ICC(1), ICC(A,1), ICC(C,1), ICC(k), ICC(A,k) and ICC(C,k). With BMS, WMS, JMS and EMS
the between-units, within-units, between-coders and residual mean squares (Shrout & Fleiss 1979,
Table 1):

=========  ==========  ======================================================  =====================
S&F        M&W         formula                                                 model
=========  ==========  ======================================================  =====================
ICC(1,1)   ICC(1)      (BMS - WMS) / (BMS + (k-1) WMS)                         one-way random
ICC(2,1)   ICC(A,1)    (BMS - EMS) / (BMS + (k-1) EMS + k (JMS - EMS) / n)     two-way random, abs.
ICC(3,1)   ICC(C,1)    (BMS - EMS) / (BMS + (k-1) EMS)                         two-way mixed, cons.
ICC(1,k)   ICC(k)      (BMS - WMS) / BMS                                       one-way random
ICC(2,k)   ICC(A,k)    (BMS - EMS) / (BMS + (JMS - EMS) / n)                   two-way random, abs.
ICC(3,k)   ICC(C,k)    (BMS - EMS) / BMS                                       two-way mixed, cons.
=========  ==========  ======================================================  =====================

The F-test based confidence intervals are those of Shrout & Fleiss (1979, pp. 424-425) for the
single-coder forms and of McGraw & Wong (1996, Table 7) for the k-coder forms; ICC(2,*) uses
Satterthwaite's approximate degrees of freedom.

References
----------
Shrout, P. E., & Fleiss, J. L. (1979). Intraclass correlations: uses in assessing rater
reliability. *Psychological Bulletin*, 86(2), 420-428.
McGraw, K. O., & Wong, S. P. (1996). Forming inferences about some intraclass correlation
coefficients. *Psychological Methods*, 1(1), 30-46 (correction: 1(4), 390).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from coderel.stats.distributions import f_ppf, f_sf

IccForm = Literal["icc_1_1", "icc_2_1", "icc_3_1", "icc_1_k", "icc_2_k", "icc_3_k"]
ICC_FORMS: tuple[IccForm, ...] = ("icc_1_1", "icc_2_1", "icc_3_1", "icc_1_k", "icc_2_k", "icc_3_k")
#: Shrout & Fleiss (1979) names of the forms.
SHROUT_FLEISS: dict[str, str] = {
    "icc_1_1": "ICC(1,1)",
    "icc_2_1": "ICC(2,1)",
    "icc_3_1": "ICC(3,1)",
    "icc_1_k": "ICC(1,k)",
    "icc_2_k": "ICC(2,k)",
    "icc_3_k": "ICC(3,k)",
}
#: McGraw & Wong (1996) names of the same forms.
MCGRAW_WONG: dict[str, str] = {
    "icc_1_1": "ICC(1)",
    "icc_2_1": "ICC(A,1)",
    "icc_3_1": "ICC(C,1)",
    "icc_1_k": "ICC(k)",
    "icc_2_k": "ICC(A,k)",
    "icc_3_k": "ICC(C,k)",
}
#: The model of each form in McGraw & Wong's (1996) words.
MODELS: dict[str, str] = {
    "icc_1_1": "one-way random effects, single coder",
    "icc_2_1": "two-way random effects, absolute agreement, single coder",
    "icc_3_1": "two-way mixed effects, consistency, single coder",
    "icc_1_k": "one-way random effects, mean of k coders",
    "icc_2_k": "two-way random effects, absolute agreement, mean of k coders",
    "icc_3_k": "two-way mixed effects, consistency, mean of k coders",
}

# Column positions of the per-unit contributions.
_N, _T, _T2, _Q, _C = 0, 1, 2, 3, 4


def icc_width(k: int) -> int:
    """Number of contribution columns for ``k`` coders: n, T, T^2, Q and one total per coder."""
    return 4 + k


def complete_rows(values: np.ndarray) -> np.ndarray:
    """Boolean per unit: every coder gave a value (no ``nan``); none without coders."""
    values = np.asarray(values, dtype=float)
    if values.shape[1] == 0:
        return np.zeros(values.shape[0], dtype=bool)
    return np.all(np.isfinite(values), axis=1)


def icc_contributions(values: np.ndarray, centre: float | None = None) -> np.ndarray:
    """Each unit's share of the ANOVA sums (U x (4 + k)); zeros for incomplete units.

    Parameters
    ----------
    values
        Units x coders array of numbers, ``nan`` where a coder gave no value.
    centre
        The mean of the complete values of all units, when ``values`` holds only some of them
        (else taken from ``values``).

    Returns
    -------
    numpy.ndarray
        Columns: complete (1/0), row total T_u, T_u^2, sum of squared values Q_u, then the k
        values themselves (their weighted sums are the coder totals). Values are centred on the
        mean of the complete values first: every mean square is unchanged by a shift, and the
        differences of large sums lose no precision.
    """
    x = np.asarray(values, dtype=float)
    ok = complete_rows(x)
    out = np.zeros((x.shape[0], icc_width(x.shape[1])))
    if not ok.any():
        return out
    xc = x[ok] - (float(np.mean(x[ok])) if centre is None else centre)
    t = xc.sum(axis=1)
    out[ok, _N] = 1.0
    out[ok, _T] = t
    out[ok, _T2] = t**2
    out[ok, _Q] = (xc**2).sum(axis=1)
    out[ok, _C:] = xc
    return out


@dataclass(frozen=True)
class MeanSquares:
    """Mean squares of the units x coders ANOVA (arrays over replicates, or scalars).

    ``bms`` between units (rows), ``wms`` within units (one-way), ``jms`` between coders
    (columns, "judges"), ``ems`` residual (two-way), ``n`` units, ``k`` coders.
    """

    n: np.ndarray
    k: int
    bms: np.ndarray
    wms: np.ndarray
    jms: np.ndarray
    ems: np.ndarray


def _div(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    num, den = np.broadcast_arrays(np.asarray(num, float), np.asarray(den, float))
    out = np.full(num.shape, np.nan)
    np.divide(num, den, out=out, where=den > 0)
    return out


def mean_squares(sums: np.ndarray, k: int) -> MeanSquares:
    """Mean squares from summed contributions ``sums`` (R x (4 + k)) of :func:`icc_contributions`.

    With n units, grand total G and correction CF = G^2 / (n k): total SS = sum Q - CF, between
    units SS = sum T^2 / k - CF, between coders SS = sum_j C_j^2 / n - CF, within units SS =
    total - between units, residual SS = total - between units - between coders (Shrout & Fleiss
    1979, Table 1; degrees of freedom n - 1, n (k - 1), k - 1 and (n - 1)(k - 1)).
    """
    s = np.atleast_2d(np.asarray(sums, dtype=float))
    n = s[:, _N]
    cf = _div(s[:, _T] ** 2, n * k)
    ss_total = s[:, _Q] - cf
    ss_rows = s[:, _T2] / max(k, 1) - cf
    ss_cols = _div((s[:, _C : _C + k] ** 2).sum(axis=1), n) - cf
    ss_within = ss_total - ss_rows
    ss_error = ss_within - ss_cols
    return MeanSquares(
        n=n,
        k=k,
        bms=_div(ss_rows, n - 1.0),
        wms=_div(ss_within, n * (k - 1.0)),
        jms=_div(ss_cols, np.full_like(n, k - 1.0)),
        ems=_div(ss_error, (n - 1.0) * (k - 1.0)),
    )


def icc_from_mean_squares(ms: MeanSquares, form: str) -> np.ndarray:
    """One form of ICC from mean squares (Shrout & Fleiss 1979, eqs. 2-4 and 6; ``nan`` when
    its denominator is not positive, e.g. no variation at all)."""
    k, n = ms.k, ms.n
    bms, wms, jms, ems = ms.bms, ms.wms, ms.jms, ms.ems
    if form == "icc_1_1":
        return _div(bms - wms, bms + (k - 1) * wms)
    if form == "icc_2_1":
        return _div(bms - ems, bms + (k - 1) * ems + _div(k * (jms - ems), n))
    if form == "icc_3_1":
        return _div(bms - ems, bms + (k - 1) * ems)
    if form == "icc_1_k":
        return _div(bms - wms, bms)
    if form == "icc_2_k":
        return _div(bms - ems, bms + _div(jms - ems, n))
    if form == "icc_3_k":
        return _div(bms - ems, bms)
    raise ValueError(f"unknown ICC form {form!r}; one of {', '.join(ICC_FORMS)}")


def icc_from_sums(sums: np.ndarray, k: int, form: str) -> np.ndarray:
    """R values of one ICC form from R rows of summed contributions; ``nan`` with fewer than two
    complete units or fewer than two coders."""
    ms = mean_squares(sums, k)
    out = icc_from_mean_squares(ms, form)
    if k < 2:
        return np.full(out.shape, np.nan)
    return np.where(ms.n >= 2, out, np.nan)


@dataclass(frozen=True)
class FInterval:
    """An F-test based interval of one form, with the F test of ICC = 0.

    ``f`` is the observed ratio (BMS/WMS for one-way forms, BMS/EMS for two-way forms), ``df1``
    and ``df2`` its degrees of freedom and ``p_value`` the one-sided probability of a larger F
    when the population ICC is 0 (Shrout & Fleiss 1979, p. 425; McGraw & Wong 1996, Table 8).
    """

    ci: tuple[float, float] | None
    f: float | None
    df1: float
    df2: float
    p_value: float | None


def _finite(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


def f_interval(ms: MeanSquares, form: str, level: float = 0.95) -> FInterval:
    """The F-test based confidence interval of one form on the full sample.

    ``ms`` holds scalar (length-one) mean squares. One-way and consistency forms use exact F
    quantiles: with F0 the observed ratio, FL = F0 / F(1 - a/2; df1, df2) and FU = F0 *
    F(1 - a/2; df2, df1), the single-coder bounds are (F - 1) / (F + k - 1) and the k-coder
    bounds 1 - 1 / F (Shrout & Fleiss 1979, p. 424; McGraw & Wong 1996, Table 7). Absolute
    agreement forms use Satterthwaite's degrees of freedom v (Shrout & Fleiss 1979, p. 425),
    F* = F(1 - a/2; n - 1, v) and F_* = F(1 - a/2; v, n - 1):
    lower = n (BMS - F* EMS) / (F* [k JMS + (k n - k - n) EMS] + n BMS) for ICC(2,1) and
    n (BMS - F* EMS) / (F* (JMS - EMS) + n BMS) for ICC(2,k), the upper bounds likewise with F_*.
    """
    n, k = float(np.ravel(ms.n)[0]), ms.k
    bms, wms, jms, ems = (float(np.ravel(v)[0]) for v in (ms.bms, ms.wms, ms.jms, ms.ems))
    alpha = 1.0 - level
    one_way = form in ("icc_1_1", "icc_1_k")
    df1 = n - 1.0
    df2 = n * (k - 1.0) if one_way else (n - 1.0) * (k - 1.0)
    denom = wms if one_way else ems
    if not (n >= 2 and k >= 2 and np.isfinite(bms) and np.isfinite(denom)) or denom <= 0:
        return FInterval(None, None, df1, df2, None)
    f0 = bms / denom
    p = float(f_sf(f0, df1, df2))
    if form in ("icc_2_1", "icc_2_k"):
        return FInterval(_absolute_interval(form, n, k, bms, jms, ems, alpha), f0, df1, df2, p)
    fl = f0 / f_ppf(1 - alpha / 2, df1, df2)
    fu = f0 * f_ppf(1 - alpha / 2, df2, df1)
    if form in ("icc_1_1", "icc_3_1"):
        lo, hi = (fl - 1) / (fl + k - 1), (fu - 1) / (fu + k - 1)
    else:
        lo, hi = 1 - 1 / fl, 1 - 1 / fu
    ci = (float(lo), float(hi)) if np.isfinite(lo) and np.isfinite(hi) else None
    return FInterval(ci, f0, df1, df2, p)


def _absolute_interval(
    form: str, n: float, k: int, bms: float, jms: float, ems: float, alpha: float
) -> tuple[float, float] | None:
    rho = float(icc_from_mean_squares(_scalar_ms(n, k, bms, jms, ems), "icc_2_1")[0])
    if not np.isfinite(rho):
        return None
    fj = jms / ems
    a = k * rho
    b = n * (1 + (k - 1) * rho) - k * rho
    v_den = (n - 1) * a**2 * fj**2 + b**2
    if v_den <= 0:
        return None
    v = (k - 1) * (n - 1) * (a * fj + b) ** 2 / v_den
    f_star = f_ppf(1 - alpha / 2, n - 1, v)
    f_low_star = f_ppf(1 - alpha / 2, v, n - 1)
    if form == "icc_2_1":
        c = k * jms + (k * n - k - n) * ems
        lo = n * (bms - f_star * ems) / (f_star * c + n * bms)
        hi = n * (f_low_star * bms - ems) / (c + n * f_low_star * bms)
    else:
        lo = n * (bms - f_star * ems) / (f_star * (jms - ems) + n * bms)
        hi = n * (f_low_star * bms - ems) / (jms - ems + n * f_low_star * bms)
    if not (np.isfinite(lo) and np.isfinite(hi)):
        return None
    return float(lo), float(hi)


def _scalar_ms(n: float, k: int, bms: float, jms: float, ems: float) -> MeanSquares:
    one = np.ones(1)
    return MeanSquares(one * n, k, one * bms, one * np.nan, one * jms, one * ems)
