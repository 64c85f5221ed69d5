"""Ratio alpha over many distinct values, without a K x K matrix of distances (issue 14).

coderel sums the expected disagreement of ratio and set distances through a low-rank factor of
the distances (coderel.stats.alpha.metric_factor: pivoted Cholesky of their Gram matrix). The
references are the krippendorff package (Castro 2017, the ``krippendorff`` package on PyPI:
``alpha`` and its ``_ratio_metric``), which follows Krippendorff (2011), "Computing
Krippendorff's alpha-reliability", and the dense K x K form the statistics used before.
"""

from __future__ import annotations

import krippendorff
import numpy as np
import pytest
from krippendorff.krippendorff import _ratio_metric

from coderel.stats import alpha as A
from coderel.stats.counts import unit_disagreement
from coderel.stats.plan import Scale, build_plan


def _indices(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    observed = np.unique(values[~np.isnan(values)])
    index = np.where(np.isnan(values), -1, np.searchsorted(observed, np.nan_to_num(values)))
    return index, observed


def _data(rng: np.random.Generator, domain: np.ndarray, units: int, coders: int) -> np.ndarray:
    truth = rng.integers(0, len(domain), units)
    noisy = rng.random((units, coders)) < 0.3
    idx = np.where(noisy, rng.integers(0, len(domain), (units, coders)), truth[:, None])
    values = domain[idx].astype(float)
    values[rng.random((units, coders)) < 0.1] = np.nan
    return values


DOMAINS = {
    "lognormal": lambda rng: np.round(rng.lognormal(3, 1, 400), 2),
    "wide spread": lambda rng: np.round(rng.lognormal(0, 4, 400), 4),
    "with zero": lambda rng: np.concatenate([[0.0], np.round(rng.lognormal(0, 3, 300), 3)]),
    "large numbers": lambda rng: 1e9 + np.arange(1.0, 300.0),
    "negative only": lambda rng: -np.round(rng.lognormal(3, 1, 300), 2),
    "both signs": lambda rng: np.round(rng.normal(0, 10, 200), 1),
}


@pytest.mark.parametrize("name", sorted(DOMAINS))
def test_ratio_alpha_with_hundreds_of_values_matches_krippendorff(name):
    # Reference: krippendorff.alpha, level "ratio", on the same reliability data (coders x units).
    rng = np.random.default_rng(sorted(DOMAINS).index(name))
    values = _data(rng, DOMAINS[name](rng), units=150, coders=3)
    index, observed = _indices(values)
    assert len(observed) > 100
    scale = Scale("numeric", "ratio", len(observed), values=observed)
    got = build_plan(index, scale).point("krippendorff_alpha")
    ref = krippendorff.alpha(reliability_data=values.T, level_of_measurement="ratio")
    assert got == pytest.approx(ref, abs=1e-9)


def test_ratio_factor_of_ten_thousand_values_is_small_and_exact_to_its_bound():
    # The expected-disagreement sum sum_{c,k} n_c n_k delta_ck for 10,000 distinct values (the
    # benchmark's domain: lognormal(3, 1), here with three decimals), against the same sum over the full
    # distance matrix of the krippendorff package's ratio metric, evaluated in row blocks.
    rng = np.random.default_rng(14)
    pool = np.unique(np.round(rng.lognormal(3, 1, 20_000), 3))
    values = np.sort(rng.choice(pool, 10_000, replace=False))
    assert len(values) == 10_000
    factor = A.ratio_factor(values)
    assert factor is not None
    assert factor.rank < 100  # K x rank numbers instead of K x K
    assert factor.bound <= 1e-15 * factor.diagonal.max()
    counts = rng.poisson([[2.0], [3.0], [4.0]], (3, len(values))).astype(float)
    reference = np.zeros(3)
    for start in range(0, len(values), 1000):
        block = slice(start, start + 1000)
        dist = _ratio_metric(values[block, None], values[None, :], None, None, None)
        reference += ((counts[:, block] @ dist) * counts).sum(axis=1)
    total = counts.sum(axis=1)
    got = total * (counts @ factor.diagonal) - ((counts @ factor.factor) ** 2).sum(axis=1)
    assert np.all(np.abs(got - reference) <= 1e-12 * reference + factor.bound * total**2)


def test_bootstrap_replicates_equal_the_dense_distance_form():
    # Every replicate's alpha from the factor equals alpha from the K x K distances
    # (Krippendorff 2011: 1 - (n - 1) D_o / sum n_c n_k delta_ck) on the same weighted sums.
    rng = np.random.default_rng(5)
    domain = np.round(rng.lognormal(2, 1.5, 500), 2)
    values = _data(rng, domain, units=300, coders=4)
    index, observed = _indices(values)
    scale = Scale("numeric", "ratio", len(observed), values=observed)
    plan = build_plan(index, scale)
    weights = rng.poisson(1.0, (50, index.shape[0])).astype(float)
    got = plan.formulas["krippendorff_alpha"](weights @ plan.contributions)
    counts = np.zeros((index.shape[0], len(observed)))
    rows = np.repeat(np.arange(index.shape[0]), index.shape[1])
    ok = index.ravel() >= 0
    np.add.at(counts, (rows[ok], index.ravel()[ok]), 1.0)
    pairable = counts.sum(axis=1) >= 2
    sums = weights @ (counts * pairable[:, None])
    delta = A.ratio_delta(observed)
    d_unit = unit_disagreement(index, A.ratio_distance(observed))
    expected = np.einsum("rk,rk->r", sums @ delta, sums)
    dense = 1.0 - (sums.sum(axis=1) - 1.0) * (weights @ d_unit) / expected
    assert np.allclose(got, dense, rtol=0, atol=1e-10)


def test_one_value_only_is_no_variation():
    # All values equal: no expected disagreement, so alpha is undefined (Krippendorff 2011),
    # also when the factor's rounding would leave a tiny remainder.
    values = np.array([[5.0, 5.0, 5.0], [5.0, 5.0, np.nan]])
    index, observed = _indices(values)
    scale = Scale("numeric", "ratio", len(observed), values=observed)
    assert np.isnan(build_plan(index, scale).point("krippendorff_alpha"))
    # A bootstrap replicate that drew only units holding one of several values.
    values = np.array([[1.5, 1.5], [2.25, 2.25], [7.0, 9.5]])
    index, observed = _indices(values)
    scale = Scale("numeric", "ratio", len(observed), values=observed)
    plan = build_plan(index, scale)
    only_first = np.array([[3.0, 0.0, 0.0]])
    assert np.isnan(plan.formulas["krippendorff_alpha"](only_first @ plan.contributions)[0])
