"""Packed contributions (coderel/stats/packed.py): the bootstrap's per-unit columns held in few
bytes and given back bit for bit, and the bootstrap sums made from them equal to those of the
float64 columns.

The oracle is numpy itself: every packed array is compared, bit for bit, with the float64 array
it was made from, and every sum with the same product over that array.
"""

from __future__ import annotations

import numpy as np
import pytest

import coderel.stats.packed as packed_module
from coderel.stats.bootstrap import PoissonUnitWeights, evaluate_plans, run_sums, unit_weights
from coderel.stats.packed import (
    Packed,
    RowTable,
    TypedColumns,
    as_array,
    dense_column_sums,
    pack,
)
from coderel.stats.plan import MixedColumns, Scale, build_plan


def _coded(n_units: int, n_coders: int, k: int, seed: int, missing: float = 0.1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, k, n_units)
    x = np.where(
        rng.random((n_units, n_coders)) < 0.7,
        truth[:, None],
        rng.integers(0, k, (n_units, n_coders)),
    )
    return np.where(rng.random(x.shape) < missing, -1, x)


def _bits(a: np.ndarray) -> np.ndarray:
    return np.ascontiguousarray(a, dtype=float).view(np.uint64)


@pytest.mark.parametrize("level", ["nominal", "ordinal"])
def test_categorical_plan_holds_few_bytes_per_unit(level):
    """Guards the memory of `agree` at scale (issue 14, item 3): a categorical variable with 3
    coders and 5 categories used to hold 60-69 float64 columns per unit (480-552 bytes; 1.4 GB
    for 100,000 units x 30 variables). Each unit's row is one of at most 6^3 distinct rows, so
    the packed plan holds about one byte per unit plus the table of distinct rows."""
    x = _coded(20_000, 3, 5, seed=1)
    plan = build_plan(x, Scale("categorical", level, 5))
    c = plan.contributions
    assert isinstance(c, RowTable)
    assert c.nbytes / x.shape[0] <= 16
    assert c.nbytes * 30 < 8 * c.shape[0] * c.shape[1]  # under a thirtieth of float64


def test_numeric_plan_keeps_whole_columns_in_small_integers():
    """Interval values with many distinct numbers: rows are nearly all distinct, so columns are
    held by type; the counts among them take one byte per unit, not eight."""
    rng = np.random.default_rng(2)
    values = np.round(rng.normal(50, 10, 3000), 3)
    x = rng.integers(0, len(values), (5000, 3))
    x[rng.random(x.shape) < 0.1] = -1
    plan = build_plan(x, Scale("numeric", "interval", len(values), values=np.sort(values)))
    c = plan.contributions
    assert isinstance(c, TypedColumns)
    kinds = {v.dtype for v in c.values}
    assert np.dtype(np.int8) in kinds
    assert c.nbytes < 8 * c.shape[0] * c.shape[1]


def _awkward(n: int = 3000) -> np.ndarray:
    rng = np.random.default_rng(3)
    a = rng.integers(-3, 4, (n, 9)).astype(float)
    a[:, 1] = rng.integers(-200, 200, n)  # int16
    a[:, 2] = rng.integers(-(2**20), 2**20, n)  # int32
    a[:, 3] = rng.random(n)  # float64
    a[:, 4] = a[:, 0] / 4  # float32
    a[:, 5] = -0.0  # not an integer's zero
    a[::7, 6] = np.nan
    a[::11, 7] = np.inf
    a[:, 8] = 2.0**40  # beyond int32
    return a


@pytest.mark.parametrize("rows", [slice(None), slice(5, 1200), np.array([4, 0, 2999, 4])])
@pytest.mark.parametrize("distinct", [None, 40])
def test_packed_columns_give_back_every_bit(rows, distinct):
    a = _awkward()
    if distinct is not None:  # few distinct rows: a table of rows
        a = a[np.random.default_rng(4).integers(0, distinct, len(a))]
    p = pack(a)
    assert isinstance(p, RowTable if distinct else TypedColumns)
    assert p.nbytes < a.nbytes
    part, ref = p[rows], a[rows]
    np.testing.assert_array_equal(_bits(part.toarray()), _bits(ref))
    # the column sums of the unpacked rows, by the same (pairwise) sums
    np.testing.assert_array_equal(_bits(part.column_sums()), _bits(dense_column_sums(ref)))
    np.testing.assert_array_equal(part.nonzero_rows(), np.flatnonzero(np.any(ref != 0, axis=1)))
    w = np.random.default_rng(5).random((3, ref.shape[0]))
    np.testing.assert_array_equal(_bits(w @ part), _bits(w @ ref))
    # the distinct rows hold each column's values: the same whole-number test and largest value
    d = part.distinct_rows()
    np.testing.assert_array_equal(
        np.all(d == np.rint(d), axis=0), np.all(ref == np.rint(ref), axis=0)
    )
    np.testing.assert_array_equal(np.max(np.abs(d), axis=0), np.max(np.abs(ref), axis=0))


def test_rows_with_one_key_are_still_told_apart(monkeypatch):
    """If two different rows ever hashed to one key, the rows are compared whole instead."""
    a = _awkward()[np.random.default_rng(6).integers(0, 30, 3000)]
    monkeypatch.setattr(packed_module, "_row_keys", lambda bits: np.zeros(len(bits), np.uint64))
    p = pack(a)
    assert isinstance(p, RowTable)
    assert len(p.table) == len(np.unique(a.view(np.uint64), axis=0))
    np.testing.assert_array_equal(_bits(p.toarray()), _bits(a))


def test_empty_columns_pack():
    for shape in [(0, 4), (5, 0), (0, 0)]:
        p = pack(np.zeros(shape))
        assert p.shape == shape
        assert p.toarray().shape == shape
        assert p.column_sums().shape == (shape[1],)


def _unpacked(c):
    if isinstance(c, MixedColumns):
        return MixedColumns(as_array(c.dense), c.thin)
    return as_array(c)


def _ordinal_three():
    return _coded(1500, 3, 5, seed=7), Scale("categorical", "ordinal", 5)


def _ordinal_two():
    return _coded(1500, 2, 4, seed=8), Scale("categorical", "ordinal", 4)


def _crowd():
    return _coded(1500, 12, 4, seed=9, missing=0.6), Scale("categorical", "nominal", 4)


def _interval():
    rng = np.random.default_rng(10)
    values = np.sort(np.unique(np.round(rng.normal(5, 2, 400), 2)))
    x = rng.integers(0, len(values), (1500, 3))
    x[rng.random(x.shape) < 0.1] = -1
    return x, Scale("numeric", "interval", len(values), values=values)


@pytest.mark.parametrize("make", [_ordinal_three, _ordinal_two, _crowd, _interval])
def test_bootstrap_sums_of_packed_and_float_columns_are_equal(monkeypatch, make):
    """Every replicate, jackknife value and point of every coefficient is the same number, to
    the bit, from packed contributions as from the float64 array they hold (Poisson weights,
    whose whole-number products take single precision and 32-bit integers, and multinomial
    weights, double precision only)."""
    import coderel.stats.plan as plan_module

    monkeypatch.setattr(plan_module, "SPARSE_PAIR_CELLS", 50_000)  # 12 coders: sparse tables
    x, scale = make()
    plan = build_plan(x, scale, icc_ordinal=True)
    dense = type(plan)(_unpacked(plan.contributions), plan.formulas, plan.leave_one_out)
    c = plan.contributions
    assert isinstance(c.dense if isinstance(c, MixedColumns) else c, Packed)
    ids = [f"u{i}" for i in range(len(x))]
    poisson = PoissonUnitWeights.for_units(ids, 40, seed=8)
    for weights in (poisson, unit_weights(len(x), 40, 9)):
        got = evaluate_plans([plan], weights, block_units=100)[0]
        want = evaluate_plans([dense], weights, block_units=100)[0]
        assert list(got) == list(want)
        for name, ev in want.items():
            assert _bits(np.array(got[name].point)) == _bits(np.array(ev.point)), name
            np.testing.assert_array_equal(_bits(got[name].replicates), _bits(ev.replicates))
            np.testing.assert_array_equal(_bits(got[name].jackknife), _bits(ev.jackknife))

    # a run's sums on their own (the form a cluster's worker returns) are the same too
    def run(contributions):
        weights_of = lambda a, b: poisson.block(100 + a, 100 + b)  # noqa: E731
        return run_sums([contributions[100:900]], weights_of, 40, 64, integer_weights=True)[0]

    np.testing.assert_array_equal(_bits(run(plan.contributions)), _bits(run(dense.contributions)))


def test_whole_number_pair_sums_in_32_bit_totals_equal_the_float_sums(monkeypatch):
    """A crowd design's pair tables summed over all units in 32-bit integers (Poisson weights)
    give Light's kappa's replicates of the same weights summed in double precision."""
    import coderel.stats.plan as plan_module

    monkeypatch.setattr(plan_module, "SPARSE_PAIR_CELLS", 0)
    x, scale = _crowd()
    plan = build_plan(x, scale)
    assert isinstance(plan.contributions, MixedColumns)
    poisson = PoissonUnitWeights.for_units([f"u{i}" for i in range(len(x))], 40, seed=11)
    matrix = poisson.block(0, len(x))  # the same numbers, taken as any weights
    got = evaluate_plans([plan], poisson, block_units=100)[0]["light_kappa"]
    want = evaluate_plans([plan], matrix, block_units=100)[0]["light_kappa"]
    assert np.isfinite(want.replicates).all()
    np.testing.assert_array_equal(_bits(got.replicates), _bits(want.replicates))
