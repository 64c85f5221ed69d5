"""Plans built partition by partition with the project's facts add up to the whole project's plan.

The dask engine builds each partition's per-unit contributions on a worker
(coderel/engine/plans.py) with the facts of all units that a plan needs (Fleiss' m, the sparse
choice, complete units, coder pairs with units in common, the centres of the ICC and Lin's sums).
The oracle is the in-process plan of all units (its coefficients are checked against published
values in tests/test_agree_published.py and tests/test_numeric_stats.py): the partitions' column
sums must add up to its column sums and give the same coefficients (to 1e-12), and the power
sums of the jackknife must give the acceleration of Efron & Tibshirani (1993, *An Introduction to
the Bootstrap*, eq. 14.15), here computed from scipy's sample skewness.
"""

from __future__ import annotations

from itertools import pairwise

import numpy as np
import pytest
from scipy import stats

from coderel.engine.plans import PartTargets, project_facts, target_facts
from coderel.stats.intervals import JackknifeSums, acceleration, bca_interval
from coderel.stats.plan import MixedColumns, Scale, build_plan, column_sums


def _x(rng, n_units: int, n_coders: int, k: int, per_unit: tuple[int, int] | None = None):
    """Units x coders value indices: each unit's true value, a coder's own 25% of the time,
    10% of cells blank (or ``per_unit`` coders of each unit, a crowd)."""
    truth = rng.integers(0, k, n_units)
    x = np.where(
        rng.random((n_units, n_coders)) < 0.25,
        rng.integers(0, k, (n_units, n_coders)),
        truth[:, None],
    )
    if per_unit is None:
        x[rng.random(x.shape) < 0.1] = -1
        return x
    keep = (
        rng.random((n_units, n_coders)).argsort(axis=1) < rng.integers(*per_unit, n_units)[:, None]
    )
    return np.where(keep, x, -1)


SCALES = {
    "nominal": (Scale("categorical", "nominal", 5), False, 4, None),
    "ordinal with ICCs": (Scale("categorical", "ordinal", 4), True, 3, None),
    "interval": (
        Scale("numeric", "interval", 6, values=np.array([0.5, 1, 2, 3.25, 7, 11])),
        False,
        3,
        None,
    ),
    "ratio": (Scale("numeric", "ratio", 5, values=np.array([1.0, 2, 4, 8, 16])), False, 2, None),
    "crowd (sparse pairs)": (Scale("categorical", "nominal", 3), False, 20, (2, 5)),
}


@pytest.mark.parametrize("name", list(SCALES))
def test_partition_plans_add_up_to_the_plan_of_all_units(name, monkeypatch):
    scale, icc_ordinal, n_coders, per_unit = SCALES[name]
    if per_unit is not None:  # the sparse choice is made on the number of units of the project
        monkeypatch.setattr("coderel.stats.plan.SPARSE_PAIR_CELLS", 100_000)
    rng = np.random.default_rng(7)
    x = _x(rng, 900, n_coders, scale.size, per_unit)
    whole = build_plan(x, scale, icc_ordinal=icc_ordinal)
    cuts = [0, 100, 450, 900]  # unequal partitions; the first has no unit with 5 values
    parts = [PartTargets([], [x[a:b]]) for a, b in pairwise(cuts)]
    specs = [(scale, icc_ordinal)]
    added = target_facts(parts[0], specs)[0]
    for part in parts[1:]:
        added = added + target_facts(part, specs)[0]
    facts = project_facts(added, len(x))
    plans = [build_plan(p.xs[0], scale, icc_ordinal=icc_ordinal, facts=facts) for p in parts]
    assert {p.contributions.shape[1] for p in plans} == {whole.contributions.shape[1]}
    if per_unit is not None:  # sparse pair columns in every part, as in the whole
        assert isinstance(whole.contributions, MixedColumns)
        assert all(isinstance(p.contributions, MixedColumns) for p in plans)
    total = sum(column_sums(p.contributions) for p in plans)
    np.testing.assert_allclose(total, column_sums(whole.contributions), rtol=0, atol=1e-9)
    template = build_plan(np.full((0, n_coders), -1), scale, icc_ordinal=icc_ordinal, facts=facts)
    assert set(template.formulas) == set(whole.formulas)
    checked = 0
    for key in whole.formulas:
        expected = whole.point(key)
        got = float(template.formulas[key](total[None, :])[0])
        if np.isnan(expected):
            assert np.isnan(got), key
            continue
        assert abs(got - expected) <= 1e-12, (key, got, expected)
        checked += 1
    assert checked >= 3


def test_jackknife_power_sums_give_efrons_acceleration():
    rng = np.random.default_rng(3)
    values = 0.7 + rng.gamma(2.0, 1e-4, 5_000)  # skewed, close together, as jackknife values are
    values[[10, 20]] = np.nan  # undefined leave-one-out values are left out
    finite = values[np.isfinite(values)]
    # Efron & Tibshirani (1993), eq. 14.15, in terms of the sample skewness g1:
    # a = sum d^3 / (6 (sum d^2)^1.5) with d = mean - theta = -g1 / (6 sqrt(n))
    expected = -stats.skew(finite, bias=True) / (6.0 * np.sqrt(finite.size))
    pieces = np.array_split(values, 7)
    sums = JackknifeSums(0, 0.0, 0.0, 0.0)
    for piece in pieces:
        sums = sums + JackknifeSums.of(piece, 0.7003)
    assert sums.count == finite.size
    assert acceleration(sums) == pytest.approx(expected, rel=1e-9)
    assert acceleration(values) == pytest.approx(expected, rel=1e-9)
    same = JackknifeSums.of(np.full(50, 0.3), 0.25)  # no spread: no acceleration
    assert acceleration(same) == 0.0 == acceleration(np.full(50, 0.3))


def test_a_replicate_within_rounding_of_the_estimate_is_a_tie():
    rng = np.random.default_rng(5)
    reps = rng.normal(0.6, 0.05, 400)
    point = 0.6
    reps[17] = point
    nudged = reps.copy()
    nudged[17] = point - 4e-16  # the same sums added in another order
    jack = rng.normal(0.6, 1e-3, 300)
    assert bca_interval(nudged, point, jack, 0.95) == bca_interval(reps, point, jack, 0.95)
    apart = reps.copy()
    apart[17] = point - 1e-6  # a real difference still counts
    assert bca_interval(apart, point, jack, 0.95) != bca_interval(reps, point, jack, 0.95)
