"""The bootstrap's unit weights: Poisson(1) counts that are a pure function of (seed, unit ID,
replicate), so results do not depend on row order, blocks of units or engine.

References: Hanley & MacGibbon (2006), Creating non-parametric bootstrap samples using Poisson
frequencies, *Computer Methods and Programs in Biomedicine* 83, 57-62 (Poisson(1) weights);
the Poisson(1) probabilities themselves come from scipy.stats.poisson.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from coderel.agree import agreement
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.stats.bootstrap import (
    MatrixUnitWeights,
    PoissonUnitWeights,
    block_size,
    evaluate_plans,
    poisson_weights,
    unit_keys,
)
from coderel.stats.plan import Scale, build_plan


def test_weights_follow_poisson_one():
    keys = unit_keys([f"unit-{i}" for i in range(2000)], seed=4)
    w = poisson_weights(keys, 500)
    values, counts = np.unique(w, return_counts=True)
    expected = stats.poisson.pmf(values, 1.0) * w.size
    # counts 0..5 each within 5 binomial standard deviations of Poisson(1)
    for v, c, e in zip(values, counts, expected, strict=True):
        if v <= 5:
            assert abs(c - e) < 5 * np.sqrt(e), (v, c, e)
    chi2 = stats.chisquare(counts[:6], expected[:6] * counts[:6].sum() / expected[:6].sum())
    assert chi2.pvalue > 1e-4
    assert w.mean() == pytest.approx(1.0, abs=0.01)
    assert w.var() == pytest.approx(1.0, abs=0.02)


def test_weights_are_a_pure_function_of_seed_unit_and_replicate():
    ids = [f"u{i}" for i in range(300)]
    keys = unit_keys(ids, seed=9)
    full = poisson_weights(keys, 64)
    # any split of units and of replicates gives the same numbers
    parts = np.hstack([poisson_weights(keys[:17], 64), poisson_weights(keys[17:], 64)])
    assert np.array_equal(full, parts)
    assert np.array_equal(poisson_weights(keys, 24, first=40), full[40:])
    # another order of units: each unit keeps its column
    order = np.random.default_rng(1).permutation(len(ids))
    shuffled = poisson_weights(unit_keys([ids[i] for i in order], seed=9), 64)
    assert np.array_equal(shuffled, full[:, order])
    # another seed gives other weights; units are not correlated with each other
    assert not np.array_equal(poisson_weights(unit_keys(ids, seed=10), 64), full)
    assert abs(np.corrcoef(full.T)[np.triu_indices(len(ids), 1)].mean()) < 0.01


def test_blocks_of_units_give_the_same_sums_and_jackknife():
    rng = np.random.default_rng(3)
    x = rng.integers(0, 4, size=(503, 3))
    x[rng.random(x.shape) < 0.2] = -1
    plan = build_plan(x, Scale("categorical", "ordinal", 4))
    weights = PoissonUnitWeights.for_units([f"u{i}" for i in range(503)], 200, seed=5)
    one = evaluate_plans([plan], weights, block_units=10_000)[0]
    blocked = evaluate_plans([plan], weights, block_units=64)[0]
    for name, ev in one.items():
        assert blocked[name].point == ev.point
        np.testing.assert_allclose(blocked[name].replicates, ev.replicates, rtol=0, atol=1e-12)
        np.testing.assert_array_equal(blocked[name].jackknife, ev.jackknife)
    # an explicit matrix with the same numbers gives the same replicates
    matrix = MatrixUnitWeights(weights.block(0, 503))
    again = evaluate_plans([plan], matrix, block_units=100)[0]["krippendorff_alpha"]
    np.testing.assert_allclose(
        again.replicates, one["krippendorff_alpha"].replicates, rtol=0, atol=1e-12
    )


def test_block_size_follows_the_memory_budget():
    assert block_size(2000, 50, memory=2**30) > block_size(2000, 50, memory=2**26)
    # a block's weights and scratch copies stay inside the budget
    units = block_size(2000, 50, memory=2**26)
    assert units * 2000 * 8 * 3 <= 2**26
    assert block_size(2000, 50, memory=1) == 64  # never fewer than 64 units


def _codings(frame: pd.DataFrame) -> Codings:
    var = Variable("call", "nominal", categories=tuple(Category(i, f"c{i}") for i in (1, 2, 3)))
    return Codings.from_records(Codebook(title="order", variables=(var,)), frame)


def test_agreement_does_not_depend_on_row_order_or_memory():
    rng = np.random.default_rng(8)
    n = 150
    truth = rng.integers(1, 4, n)
    rows = [
        {
            "unit": f"u{u}",
            "coder": c,
            "variable": "call",
            "value": int(truth[u] if rng.random() < 0.8 else rng.integers(1, 4)),
        }
        for u in range(n)
        for c in ("ana", "ben", "cai")
    ]
    frame = pd.DataFrame(rows)
    first = agreement(_codings(frame), replicates=300, seed=2)
    shuffled = frame.sample(frac=1.0, random_state=4).reset_index(drop=True)
    again = agreement(_codings(shuffled), replicates=300, seed=2, memory=2**16)
    a, b = first.variable("call"), again.variable("call")
    for name, est in a.coefficients.items():
        if est is None or est.estimate is None:
            continue
        other = b.coefficients[name]
        assert other.estimate == pytest.approx(est.estimate, abs=1e-12), name
        if est.ci is not None:
            assert other.ci == pytest.approx(est.ci, abs=1e-12), name
    assert first.to_dict()["bootstrap"]["scheme"] == "poisson"


def test_weights_are_splitmix64_inverted_at_the_poisson_thresholds():
    """The chunked, in-place weights equal the plain definition computed with Python integers:
    z = mix64(key + (b + 1) * gamma) >> 11, weight = #{thresholds <= z} (Steele, Lea & Flood
    2014, SplitMix64; inversion of the Poisson(1) distribution function)."""
    from coderel.stats.bootstrap import _GAMMA, _THRESHOLDS

    def mix64(z: int) -> int:
        mask = 2**64 - 1
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & mask
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & mask
        return z ^ (z >> 31)

    keys = unit_keys([f"unit {i}" for i in range(40)], seed=123)
    got = poisson_weights(keys, 700, first=3)
    thresholds = [int(t) for t in _THRESHOLDS]
    for u in (0, 7, 39):
        for b in range(700):
            z = mix64((int(keys[u]) + (b + 4) * _GAMMA) % 2**64) >> 11
            assert got[b, u] == sum(t <= z for t in thresholds)
    assert got.max() >= 5  # the rare large counts are covered
