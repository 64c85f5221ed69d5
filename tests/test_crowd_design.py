"""Crowd designs: many coders, each unit coded by a few of them (partial by construction).

Coefficients that need coder pairs use the pairs present: their per-unit columns are kept sparse
when dense ones would be large, with the same results as the dense form; Light's kappa (Light
1971, the mean of Cohen's kappa over coder pairs) is checked against scikit-learn's Cohen's kappa
averaged over the pairs.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score

import coderel.stats.plan as plan_module
from coderel.stats.bootstrap import PoissonUnitWeights, evaluate_plans, run_sums
from coderel.stats.counts import coder_pairs, confusion_table, unit_agreeing_pairs
from coderel.stats.packed import as_array
from coderel.stats.pair_tables import light_from_tables, light_leave_one_out, pair_tables
from coderel.stats.plan import MixedColumns, Scale, build_plan


def _crowd(n_units: int = 400, n_coders: int = 12, seed: int = 3) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = np.full((n_units, n_coders), -1)
    truth = rng.integers(0, 4, n_units)
    for u in range(n_units):
        who = rng.choice(n_coders, size=int(rng.integers(3, 6)), replace=False)
        noisy = rng.random(len(who)) < 0.3
        x[u, who] = np.where(noisy, rng.integers(0, 4, len(who)), truth[u])
    return x


def _awkward_crowd() -> np.ndarray:
    """A crowd design with unused categories, a pair whose kappa becomes undefined when its one
    disagreement is left out (then both coders always give category 2), and units no pair
    shares."""
    x = _crowd(n_units=300, n_coders=9, seed=11)
    x = np.where(x >= 0, x + 1, -1)  # categories 1..4 of 6: 0 and 5 stay unused
    x[:, 7:] = -1
    x[:40, 7:] = 2  # coders 7 and 8: always category 2 together (p_e = 1, kappa undefined)
    x[40, 7] = 3
    x[41:45, :] = -1
    x[41:45, 0] = 1  # units with one value: no pair
    x[50, :] = -1
    x[50, [5, 6]] = [0, 5]
    return x


@pytest.mark.parametrize(
    ("make", "scale"),
    [
        (_crowd, Scale("categorical", "nominal", 4)),
        (_crowd, Scale("categorical", "ordinal", 4)),
        (_awkward_crowd, Scale("categorical", "nominal", 6)),
        (_awkward_crowd, Scale("categorical", "ordinal", 6)),
    ],
)
def test_sparse_pair_columns_give_the_dense_results(monkeypatch, make, scale):
    """The pair tables (one non-zero per unit and pair) and Light's kappa's own jackknife give the
    numbers of dense per-pair columns (n, agreements, margins) and of the generic jackknife."""
    x = make()
    weights = PoissonUnitWeights.for_units([f"i{u}" for u in range(len(x))], 100, seed=1)
    monkeypatch.setattr(plan_module, "SPARSE_PAIR_CELLS", 10**12)
    dense_plan = build_plan(x, scale)
    monkeypatch.setattr(plan_module, "SPARSE_PAIR_CELLS", 0)
    sparse_plan = build_plan(x, scale)
    assert not isinstance(dense_plan.contributions, MixedColumns)
    assert isinstance(sparse_plan.contributions, MixedColumns)
    assert "light_kappa" in sparse_plan.leave_one_out
    assert not dense_plan.leave_one_out
    dense = evaluate_plans([dense_plan], weights, block_units=128)[0]
    thin = evaluate_plans([sparse_plan], weights, block_units=128)[0]
    assert list(dense) == list(thin)
    assert np.isfinite(dense["light_kappa"].point)
    assert np.isfinite(dense["light_kappa"].jackknife).all()
    for name, ev in dense.items():
        assert thin[name].point == pytest.approx(ev.point, abs=1e-12, nan_ok=True), name
        np.testing.assert_allclose(thin[name].replicates, ev.replicates, rtol=0, atol=1e-12)
        np.testing.assert_allclose(thin[name].jackknife, ev.jackknife, rtol=0, atol=1e-12)


def test_light_kappa_over_the_pairs_present():
    x = _crowd(n_units=600, n_coders=8, seed=5)
    kappas = []
    for i in range(x.shape[1]):
        for j in range(i + 1, x.shape[1]):
            both = (x[:, i] >= 0) & (x[:, j] >= 0)
            if both.sum() >= 2:
                kappas.append(cohen_kappa_score(x[both, i], x[both, j]))
    plan = build_plan(x, Scale("categorical", "nominal", 4))
    assert plan.point("light_kappa") == pytest.approx(np.mean(kappas), abs=1e-9)


def test_pair_tables_hold_one_count_per_unit_and_pair():
    x = _awkward_crowd()
    tables = pair_tables(x, coder_pairs(x.shape[1]), 6)
    both = [(x[:, i] >= 0) & (x[:, j] >= 0) for i, j in coder_pairs(x.shape[1])]
    assert tables.nnz == sum(int(b.sum()) for b in both)
    summed = np.asarray(tables.sum(axis=0)).reshape(-1, 6, 6)
    for p, (i, j) in enumerate(coder_pairs(x.shape[1])):
        np.testing.assert_array_equal(summed[p], confusion_table(x[:, i], x[:, j], 6))


def test_light_leave_one_out_is_light_of_the_tables_less_the_unit():
    x = _awkward_crowd()
    tables = pair_tables(x, coder_pairs(x.shape[1]), 6)
    total = np.asarray(tables.sum(axis=0)).ravel()
    fast = light_leave_one_out(total, 6)(tables)
    slow = light_from_tables(total[None, :] - tables.toarray(), 6)
    np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-12)
    # a unit in the pair whose kappa is undefined changes the mean only through its other pairs
    assert np.isfinite(fast).all()
    assert not np.allclose(fast, fast[0])


def test_whole_number_products_equal_the_float_products():
    """With Poisson weights, columns of whole numbers are summed in 32-bit integers (sparse) or
    single precision (dense), exactly: the same numbers as double precision."""
    x = _crowd(n_units=700, n_coders=10, seed=2)
    plan = build_plan(x, Scale("categorical", "ordinal", 4))
    weights = PoissonUnitWeights.for_units([f"i{u}" for u in range(len(x))], 50, seed=3)
    assert not isinstance(plan.contributions, MixedColumns)  # small: dense; make tables sparse
    thin = MixedColumns(plan.contributions, pair_tables(x, coder_pairs(10), 4))
    fast = run_sums([thin], weights.block, 50, 128, integer_weights=True)[0]
    slow = run_sums([thin], weights.block, 50, 128, integer_weights=False)[0]
    dense = as_array(thin.dense)
    whole = np.concatenate(
        [np.all(dense == np.rint(dense), axis=0), np.ones(thin.thin.shape[1], bool)]
    )
    assert 0 < whole.sum() < len(whole)
    np.testing.assert_array_equal(fast[:, whole], slow[:, whole])
    np.testing.assert_allclose(fast, slow, rtol=1e-13, atol=0)
    np.testing.assert_allclose(weights.block(0, len(x)) @ thin, slow, rtol=1e-13, atol=0)


def test_equal_pairs_per_unit_count_every_coder_pair():
    """Equal ordered pairs per unit from sorted values equal the count over every coder pair."""
    x = _awkward_crowd()
    equal, pairs = unit_agreeing_pairs(x)
    by_pairs = np.zeros(len(x))
    for i, j in coder_pairs(x.shape[1]):
        by_pairs += 2.0 * ((x[:, i] == x[:, j]) & (x[:, i] >= 0))
    np.testing.assert_array_equal(equal, by_pairs)
    m = (x >= 0).sum(axis=1)
    np.testing.assert_array_equal(pairs, m * (m - 1.0))
