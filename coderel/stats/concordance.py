"""Lin's concordance correlation coefficient, from per-unit sums.

For two coders' values x and y on the n units both coded, with moments taken with divisor n,

    rho_c = 2 s_xy / (s_x^2 + s_y^2 + (mean_x - mean_y)^2)

(Lin 1989, eq. 2 with its sample counterpart, eq. 3): the Pearson correlation times a bias
correction factor C_b that measures how far the best-fitting line lies from the 45-degree line.
Its sums are sums over units of n, x, y, x^2, y^2 and x y, so :func:`ccc_contributions` gives
each unit's share and :func:`ccc_from_sums` acts on a matrix of weighted sums (R x 6): bootstrap
replicates are ``W @ contributions``. With more than two coders the coefficient is averaged over
coder pairs, each pair on its own units (:func:`mean_pairwise`).

References
----------
Lin, L. I.-K. (1989). A concordance correlation coefficient to evaluate reproducibility.
*Biometrics*, 45(1), 255-268. Lin, L. I.-K. (2000). A note on the concordance correlation
coefficient. *Biometrics*, 56(1), 324-325 (correction of the variance of Z).
"""

from __future__ import annotations

from dataclasses import dataclass
from statistics import NormalDist

import numpy as np

CCC_WIDTH = 6
_N, _X, _Y, _XX, _YY, _XY = range(CCC_WIDTH)


def ccc_contributions(x: np.ndarray, y: np.ndarray, centre: float = 0.0) -> np.ndarray:
    """Each unit's share of the sums (U x 6): both coded, x, y, x^2, y^2, x y.

    ``x`` and ``y`` hold ``nan`` where a coder gave no value; units lacking either value
    contribute zeros. ``centre`` is subtracted from both (a common shift leaves rho_c unchanged
    and keeps the differences of large sums exact).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    both = np.isfinite(x) & np.isfinite(y)
    xc = np.where(both, x - centre, 0.0)
    yc = np.where(both, y - centre, 0.0)
    return np.column_stack([both.astype(float), xc, yc, xc**2, yc**2, xc * yc])


@dataclass(frozen=True)
class Moments:
    """Means, variances and covariance with divisor n (arrays over replicates)."""

    n: np.ndarray
    mean_x: np.ndarray
    mean_y: np.ndarray
    var_x: np.ndarray
    var_y: np.ndarray
    cov: np.ndarray


def moments(sums: np.ndarray) -> Moments:
    """Moments with divisor n from summed contributions (R x 6)."""
    s = np.atleast_2d(np.asarray(sums, dtype=float))
    n = s[:, _N]
    safe = np.where(n > 0, n, 1.0)
    mx, my = s[:, _X] / safe, s[:, _Y] / safe
    return Moments(
        n=n,
        mean_x=mx,
        mean_y=my,
        # Rounding can leave a zero variance a hair below 0; it is 0.
        var_x=np.maximum(s[:, _XX] / safe - mx**2, 0.0),
        var_y=np.maximum(s[:, _YY] / safe - my**2, 0.0),
        cov=s[:, _XY] / safe - mx * my,
    )


def ccc_from_sums(sums: np.ndarray) -> np.ndarray:
    """Lin's rho_c from R rows of summed contributions; ``nan`` with fewer than two units or when
    the denominator is zero (both coders gave one and the same value throughout)."""
    m = moments(sums)
    den = m.var_x + m.var_y + (m.mean_x - m.mean_y) ** 2
    s = np.atleast_2d(np.asarray(sums, dtype=float))
    scale = (s[:, _XX] + s[:, _YY]) / np.where(m.n > 0, m.n, 1.0)
    out = np.full(m.n.shape, np.nan)
    ok = (m.n >= 2) & (den > 1e-12 * scale) & (den > 0)
    out[ok] = 2.0 * m.cov[ok] / den[ok]
    return out


def mean_pairwise(values: list[np.ndarray]) -> np.ndarray:
    """Mean over coder pairs of R-vectors, ignoring undefined (``nan``) pairs."""
    stack = np.stack(values)
    ok = np.isfinite(stack)
    count = ok.sum(axis=0)
    total = np.where(ok, stack, 0.0).sum(axis=0)
    out = np.full(count.shape, np.nan)
    np.divide(total, count, out=out, where=count > 0)
    return out


@dataclass(frozen=True)
class Concordance:
    """Lin's coefficient for one pair with its parts and the interval on the Z scale.

    ``pearson_r`` is the precision part, ``bias_correction`` (C_b = rho_c / r) the accuracy part,
    ``location_shift`` u = (mean_x - mean_y) / sqrt(s_x s_y); ``ci_z`` the interval from Lin's
    (1989) asymptotic normality of Z = arctanh(rho_c).
    """

    n: int
    estimate: float | None
    pearson_r: float | None
    bias_correction: float | None
    location_shift: float | None
    se_z: float | None
    ci_z: tuple[float, float] | None


def concordance(x: np.ndarray, y: np.ndarray, level: float = 0.95) -> Concordance:
    """Lin's rho_c of two coders with the interval of Lin (1989) on the Z scale.

    Z = arctanh(rho_c) is asymptotically normal with variance (Lin 1989, section 3, as corrected
    by Lin 2000; formula from memory)

        1 / (n - 2) * [ (1 - r^2) rho_c^2 / ((1 - rho_c^2) r^2)
                        + 2 rho_c^3 (1 - rho_c) u^2 / (r (1 - rho_c^2)^2)
                        - rho_c^4 u^4 / (2 r^2 (1 - rho_c^2)^2) ],

    with r the Pearson correlation and u the location shift; the interval is tanh(Z -+ z SE).
    No interval is given with fewer than four units, r = 0, or rho_c = +-1.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    both = np.isfinite(x) & np.isfinite(y)
    n = int(both.sum())
    centre = float(np.mean(np.concatenate([x[both], y[both]]))) if n else 0.0
    sums = ccc_contributions(x, y, centre).sum(axis=0)[None, :]
    rc = float(ccc_from_sums(sums)[0])
    if not np.isfinite(rc):
        return Concordance(n, None, None, None, None, None, None)
    m = moments(sums)
    sx, sy = float(np.sqrt(m.var_x[0])), float(np.sqrt(m.var_y[0]))
    if sx <= 0 or sy <= 0:
        return Concordance(n, rc, None, None, None, None, None)
    r = float(m.cov[0]) / (sx * sy)
    u = float(m.mean_x[0] - m.mean_y[0]) / np.sqrt(sx * sy)
    cb = rc / r if r != 0 else None
    se = None
    ci = None
    if n > 3 and r != 0 and abs(rc) < 1:
        one = 1.0 - rc**2
        var = (
            (1 - r**2) * rc**2 / (one * r**2)
            + 2 * rc**3 * (1 - rc) * u**2 / (r * one**2)
            - rc**4 * u**4 / (2 * r**2 * one**2)
        ) / (n - 2)
        if var > 0:
            se = float(np.sqrt(var))
            z = float(np.arctanh(rc))
            q = NormalDist().inv_cdf((1 + level) / 2)
            ci = (float(np.tanh(z - q * se)), float(np.tanh(z + q * se)))
    return Concordance(n, rc, r, cb, float(u), se, ci)
