"""Krippendorff's alpha from coincidences, at the nominal, ordinal, interval and ratio levels.

alpha = 1 - D_o / D_e = 1 - (n - 1) * sum_u d_u / sum_{c,k} n_c n_k delta_ck, where the sums run
over pairable values only (units with two or more values), n_c are the marginal totals of the
coincidence matrix, and d_u is unit u's sum over ordered pairs of its values of delta divided by
m_u - 1 (Krippendorff 2011, "Computing Krippendorff's alpha-reliability", section C). The
ordinal metric depends on the marginals and is recomputed from them (for bootstrap replicates:
from each replicate's marginals); interval and ratio metrics depend on the values only.

Functions are vectorised over a leading replicate axis ``R``.

References
----------
Krippendorff, K. (2004). *Content Analysis: An Introduction to Its Methodology* (2nd ed.). Sage.
Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Departmental Papers (ASC) 43,
University of Pennsylvania.
"""

from __future__ import annotations

import numpy as np


def _alpha(
    n: np.ndarray, d_sum: np.ndarray, expected: np.ndarray, tolerance: float = 1e-12
) -> np.ndarray:
    """1 - (n - 1) * summed unit disagreement / expected; ``nan`` with fewer than two values or
    no expected disagreement (expected <= tolerance * n^2).

    ``tolerance`` absorbs rounding where ``expected`` comes from a difference of sums (the
    interval moments). Where ``expected`` is a sum of non-negative terms that is exactly zero
    without variation (a fixed distance matrix and integer counts) pass 0, so that distances
    that are merely small (ratio distances between large numbers) are not taken for none.
    """
    out = np.full(np.shape(n), np.nan)
    ok = (n >= 2) & (expected > tolerance * np.maximum(n, 1.0) ** 2)
    out[ok] = 1.0 - (n[ok] - 1.0) * d_sum[ok] / expected[ok]
    return out


def alpha_nominal(counts: np.ndarray, d_sum: np.ndarray) -> np.ndarray:
    """Nominal alpha from marginal counts (R x K) and summed unit disagreement (R,)."""
    n = counts.sum(axis=1)
    return _alpha(n, d_sum, n**2 - (counts**2).sum(axis=1))


def alpha_with_metric(counts: np.ndarray, d_sum: np.ndarray, delta: np.ndarray) -> np.ndarray:
    """Alpha with a fixed distance matrix ``delta`` (K x K) over the value domain."""
    n = counts.sum(axis=1)
    expected = np.einsum("rk,rk->r", counts @ delta, counts)
    return _alpha(n, d_sum, expected, tolerance=0.0)


def ordinal_deltas(counts: np.ndarray, iu: tuple[np.ndarray, np.ndarray]) -> np.ndarray:
    """Ordinal metric for the cells (c < k) in ``iu``: (sum_{g=c}^{k} n_g - (n_c + n_k) / 2)^2.

    ``counts`` (R x K) over the codebook's full ordered scale, so unused categories count.
    """
    cum = np.cumsum(counts, axis=1)
    c, k = iu
    span = cum[:, k] - cum[:, c] + counts[:, c] - (counts[:, c] + counts[:, k]) / 2.0
    return span**2


def alpha_ordinal(
    counts: np.ndarray, coincidences: np.ndarray, iu: tuple[np.ndarray, np.ndarray]
) -> np.ndarray:
    """Ordinal alpha from marginals (R x K) and upper-triangle coincidences (R x P)."""
    n = counts.sum(axis=1)
    delta = ordinal_deltas(counts, iu)
    observed = (coincidences * delta).sum(axis=1)
    expected = (counts[:, iu[0]] * counts[:, iu[1]] * delta).sum(axis=1)
    return _alpha(n, observed, expected)


def alpha_interval_moments(
    n: np.ndarray, s1: np.ndarray, s2: np.ndarray, d_sum: np.ndarray
) -> np.ndarray:
    """Interval alpha from the count, sum and sum of squares of pairable values.

    sum_{c,k} n_c n_k (v_c - v_k)^2 = 2 n sum v^2 - 2 (sum v)^2; values should be centred.
    """
    return _alpha(n, d_sum, 2.0 * n * s2 - 2.0 * s1**2)


def interval_distance(values: np.ndarray):
    """Squared difference between the values at two index arrays."""
    return lambda a, b: (values[a] - values[b]) ** 2


def ratio_distance(values: np.ndarray):
    """((v_a - v_b) / (v_a + v_b))^2, zero when both are zero (Krippendorff 2011)."""

    def dist(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        va, vb = values[a], values[b]
        s = va + vb
        out = np.zeros(np.broadcast(va, vb).shape)
        np.divide((va - vb) ** 2, s**2, out=out, where=s != 0)
        return out

    return dist


def ratio_delta(values: np.ndarray) -> np.ndarray:
    """Ratio distance matrix over a value domain."""
    idx = np.arange(len(values))
    return ratio_distance(np.asarray(values, float))(idx[:, None], idx[None, :])


def jaccard_delta(sets: list[frozenset]) -> np.ndarray:
    """Jaccard distance 1 - |A & B| / |A | B| between code sets (two empty sets: 0)."""
    k = len(sets)
    out = np.zeros((k, k))
    for i in range(k):
        for j in range(i + 1, k):
            union = len(sets[i] | sets[j])
            d = 1.0 - len(sets[i] & sets[j]) / union if union else 0.0
            out[i, j] = out[j, i] = d
    return out
