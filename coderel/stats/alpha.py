"""Krippendorff's alpha from coincidences, at the nominal, ordinal, interval and ratio levels.

alpha = 1 - D_o / D_e = 1 - (n - 1) * sum_u d_u / sum_{c,k} n_c n_k delta_ck, where the sums run
over pairable values only (units with two or more values), n_c are the marginal totals of the
coincidence matrix, and d_u is unit u's sum over ordered pairs of its values of delta divided by
m_u - 1 (Krippendorff 2011, "Computing Krippendorff's alpha-reliability", section C). The
ordinal metric depends on the marginals and is recomputed from them (for bootstrap replicates:
from each replicate's marginals); interval and ratio metrics depend on the values only.

Functions are vectorised over a leading replicate axis ``R``.

Ratio and set (Jaccard) distances over many distinct values are summed without a K x K matrix:
:func:`metric_factor` writes the expected-disagreement sum as per-value features whose weighted
sums are as cheap as the interval moments (see there for the method and its error bound).

References
----------
Krippendorff, K. (2004). *Content Analysis: An Introduction to Its Methodology* (2nd ed.). Sage.
Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Departmental Papers (ASC) 43,
University of Pennsylvania.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

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


@dataclass(frozen=True)
class MetricFactor:
    """Features of a distance over a value domain: sum_{c,k} n_c n_k delta_ck from sums over c.

    ``diagonal`` (K,) holds G_cc = 2 delta(c, c0), ``factor`` (K x r) a matrix F with
    G ~ F F^T, and ``bound`` the largest diagonal entry of the remainder G - F F^T
    (:func:`metric_factor`).
    """

    diagonal: np.ndarray
    factor: np.ndarray
    bound: float

    @property
    def rank(self) -> int:
        return int(self.factor.shape[1])


def metric_factor(
    distance_to: Callable[[int], np.ndarray],
    size: int,
    reference: int,
    tolerance: float = 1e-15,
) -> MetricFactor:
    """Factor a distance whose similarity 1 - delta is positive semi-definite.

    When s_ck = 1 - delta_ck is a positive semi-definite kernel with s_cc = 1, there are
    feature vectors phi_c with ||phi_c - phi_k||^2 = 2 delta_ck. Taken relative to a reference
    value c0 (psi_c = phi_c - phi_c0, which keeps the sums free of cancellation when all
    distances are small), their Gram matrix is G_ck = delta(c, c0) + delta(k, c0) - delta_ck and

        sum_{c,k} n_c n_k delta_ck = N sum_c n_c G_cc - n^T G n,    N = sum_c n_c,

    the same identity as the interval metric's 2 N sum v^2 - 2 (sum v)^2 (Krippendorff 2011).
    G is factored as F F^T by the pivoted Cholesky decomposition, one column of distances at a
    time, stopping when the largest remaining diagonal entry is at most ``tolerance`` times the
    largest G_cc (Harbrecht, Peters & Schneider 2012, "On the low-rank approximation by the
    pivoted Cholesky decomposition", *Applied Numerical Mathematics* 62, 428-440). The
    remainder E = G - F F^T is positive semi-definite, so |n^T E n| <= N^2 max_c E_cc for
    non-negative counts: the expected disagreement is off by at most ``bound`` times N^2, about
    1e-15 of its largest possible value; the rank is small for smooth kernels (a few dozen for
    ten thousand ratio values spread over four orders of magnitude), so the cost is K x rank
    instead of K x K.

    Parameters
    ----------
    distance_to
        ``distance_to(p)`` returns delta(c, p) for every value c (an array of length ``size``).
    size
        K, the number of values.
    reference
        The index of c0; a central value keeps the features small.
    tolerance
        Stop when every remaining diagonal entry is at most this share of the largest G_cc.
    """
    if size == 0:
        return MetricFactor(np.zeros(0), np.zeros((0, 0)), 0.0)
    to_reference = np.asarray(distance_to(reference), dtype=float)
    diagonal = 2.0 * to_reference
    residual = diagonal.copy()
    stop = tolerance * float(diagonal.max())
    columns = np.zeros((size, min(size, 64)))
    rank = 0
    while rank < size:
        p = int(np.argmax(residual))
        if residual[p] <= stop:
            break
        if rank == columns.shape[1]:
            columns = np.hstack([columns, np.zeros((size, min(size - rank, rank)))])
        column = to_reference + to_reference[p] - np.asarray(distance_to(p), dtype=float)
        column -= columns[:, :rank] @ columns[p, :rank]
        columns[:, rank] = column / np.sqrt(residual[p])
        residual -= columns[:, rank] ** 2
        residual[p] = 0.0
        np.maximum(residual, 0.0, out=residual)
        rank += 1
    return MetricFactor(diagonal, columns[:, :rank].copy(), float(residual.max()))


def alpha_factored(
    n: np.ndarray, s_g: np.ndarray, s_f: np.ndarray, d_sum: np.ndarray, factor: MetricFactor
) -> np.ndarray:
    """Alpha from the features of :func:`metric_factor`.

    ``n`` (R,) pairable values, ``s_g`` (R,) their summed G_cc, ``s_f`` (R x r) their summed
    feature rows, ``d_sum`` (R,) the summed unit disagreement. The expected-disagreement sum is
    n s_g - ||s_f||^2; below the factor's error bound plus rounding (1e-13 of the largest
    distance, per pair of values) it is taken as no variation.
    """
    expected = n * s_g - (s_f**2).sum(axis=1)
    largest = float(factor.diagonal.max()) if factor.diagonal.size else 0.0
    return _alpha(n, d_sum, expected, tolerance=factor.bound + 1e-13 * largest)


def ratio_factor(values: np.ndarray) -> MetricFactor | None:
    """:func:`metric_factor` of the ratio distance over ``values``; None when the values have
    both signs (then 1 - delta is not a positive semi-definite kernel).

    For values of one sign, 1 - delta(a, b) = 4ab / (a + b)^2 = sech^2((ln|a| - ln|b|) / 2), a
    function of the log difference whose Fourier transform is positive, hence positive definite
    (Bochner's theorem); a zero is at distance 1 from every other value and 0 from itself,
    which keeps the kernel positive semi-definite.
    """
    values = np.asarray(values, dtype=float)
    if not len(values):
        return metric_factor(lambda p: np.zeros(0), 0, 0)
    if values.min() < 0.0 < values.max():
        return None
    dist = ratio_distance(values)
    everything = np.arange(len(values))
    middle = int(np.argsort(values, kind="stable")[len(values) // 2])
    return metric_factor(lambda p: dist(everything, p), len(values), middle)


def jaccard_distance(sets: list[frozenset]):
    """Jaccard distance 1 - |A & B| / |A | B| between the code sets at two index arrays (two
    empty sets: 0), from a sets x codes membership matrix."""
    codes = sorted({c for s in sets for c in s}, key=repr)
    where = {c: i for i, c in enumerate(codes)}
    member = np.zeros((len(sets), len(codes)), dtype=np.int64)
    for i, s in enumerate(sets):
        member[i, [where[c] for c in s]] = 1
    size = member.sum(axis=1)

    def dist(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        a, b = np.broadcast_arrays(np.asarray(a), np.asarray(b))
        both = (member[a] * member[b]).sum(axis=-1)
        union = size[a] + size[b] - both
        out = np.zeros(a.shape)
        np.divide(both, union, out=out, where=union > 0)
        return np.where(union > 0, 1.0 - out, 0.0)

    return dist


def jaccard_factor(sets: list[frozenset]) -> MetricFactor:
    """:func:`metric_factor` of the Jaccard distance between code sets: the Jaccard index is a
    positive semi-definite kernel (Bouchard, Jousselme & Dore 2013, "A proof for the positive
    definiteness of the Jaccard index matrix", *International Journal of Approximate Reasoning*
    54, 615-626; two empty sets count as identical, at distance 1 from every other set)."""
    dist = jaccard_distance(sets)
    everything = np.arange(len(sets))
    return metric_factor(lambda p: dist(everything, p), len(sets), 0)
