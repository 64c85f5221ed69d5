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
from coderel.stats.bootstrap import PoissonUnitWeights, evaluate_plans
from coderel.stats.plan import Scale, build_plan


def _crowd(n_units: int = 400, n_coders: int = 12, seed: int = 3) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = np.full((n_units, n_coders), -1)
    truth = rng.integers(0, 4, n_units)
    for u in range(n_units):
        who = rng.choice(n_coders, size=int(rng.integers(3, 6)), replace=False)
        noisy = rng.random(len(who)) < 0.3
        x[u, who] = np.where(noisy, rng.integers(0, 4, len(who)), truth[u])
    return x


def test_sparse_pair_columns_give_the_dense_results(monkeypatch):
    x = _crowd()
    scale = Scale("categorical", "nominal", 4)
    weights = PoissonUnitWeights.for_units([f"i{u}" for u in range(len(x))], 100, seed=1)
    monkeypatch.setattr(plan_module, "SPARSE_PAIR_CELLS", 10**12)
    dense_plan = build_plan(x, scale)
    monkeypatch.setattr(plan_module, "SPARSE_PAIR_CELLS", 0)
    sparse_plan = build_plan(x, scale)
    assert not hasattr(dense_plan.contributions, "nnz")
    assert hasattr(sparse_plan.contributions, "nnz")
    dense = evaluate_plans([dense_plan], weights, block_units=128)[0]
    thin = evaluate_plans([sparse_plan], weights, block_units=128)[0]
    assert set(dense) == set(thin)
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
