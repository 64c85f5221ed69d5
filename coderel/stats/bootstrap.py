"""Unit-level bootstrap with unit weights that are a pure function of (seed, unit ID, replicate).

Every variable and coefficient shares one set of unit weights. A replicate's sums are
``W @ contributions``; the formulas of :mod:`coderel.stats.plan` then act on all R rows at once.
The weights are never held for all units at once: :func:`evaluate_plans` walks the units in blocks
(``R x block`` weights at a time) and adds each block's product to the sums, so memory is bounded by
the per-unit contributions, not by ``R x units``.

Two schemes:

``poisson`` (the default)
    Unit u's weight in replicate b is a Poisson(1) count (Hanley & MacGibbon 2006; Chamandy et
    al. 2012), drawn by inverting the Poisson(1) distribution at a uniform number that depends
    only on (seed, unit ID, b): a 64-bit key per unit from BLAKE2b of the seed and the UTF-8 unit
    ID, and the counter-based SplitMix64 output ``mix64(key + (b + 1) * gamma)`` (Steele, Lea &
    Flood 2014). The result therefore does not depend on the order of the input rows, on how the
    units are split into blocks, on the number of workers or on the engine.
``multinomial``
    The classic scheme (Efron & Tibshirani 1993, ch. 6): each replicate draws U units uniformly
    with replacement from one ``numpy.random.Generator(PCG64(seed))``; the weights are the
    multinomial(U, 1/U) counts. They depend on the order of the units and are held as one
    ``R x U`` matrix; kept for comparison (tests/test_bootstrap_coverage.py) and for callers that
    ask for it.

The jackknife (for the BCa acceleration) uses the identity leave-one-out sums = total - the
unit's own contribution, evaluated in blocks of units so that it, too, needs O(units) memory; a
plan may give a formula a leave-one-out function of its own (``Plan.leave_one_out``: Light's
kappa over a crowd design's pair tables, :func:`coderel.stats.pair_tables.light_leave_one_out`).

References
----------
Efron, B., & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
ch. 6 (bootstrap), 11 (jackknife) and 14 (BCa).
Hanley, J. A., & MacGibbon, B. (2006). Creating non-parametric bootstrap samples using Poisson
frequencies. *Computer Methods and Programs in Biomedicine*, 83(1), 57-62.
Chamandy, N., Muralidharan, O., Najmi, A., & Naidu, S. (2012). *Estimating uncertainty for
massive data streams*. Google technical report.
Steele, G. L., Lea, D., & Flood, C. H. (2014). Fast splittable pseudorandom number generators.
*OOPSLA 2014*, 453-472 (SplitMix64 and its mixing function).
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from scipy import sparse

from coderel.stats.packed import Packed, as_array
from coderel.stats.plan import MixedColumns, Plan, column_sums

Progress = Callable[[int, int], None]
Scheme = Literal["poisson", "multinomial"]
SCHEMES: tuple[str, ...] = ("poisson", "multinomial")
#: Memory the bootstrap's weight blocks and jackknife blocks may take unless told otherwise.
DEFAULT_MEMORY = 512 * 2**20

_GAMMA = 0x9E3779B97F4A7C15  # SplitMix64's increment (Steele, Lea & Flood 2014)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)


def _poisson_thresholds() -> np.ndarray:
    """floor(F(k) * 2^53) for the Poisson(1) distribution function F, k = 0, 1, ... while < 2^53.

    A 53-bit uniform integer z gives the count k = #{j : thresholds[j] <= z} (inversion).
    """
    out: list[int] = []
    terms: list[float] = []
    k, term = 0, math.exp(-1.0)
    while True:
        terms.append(term)
        t = math.floor(math.fsum(terms) * 2.0**53)
        if t >= 2**53:
            break
        out.append(t)
        k += 1
        term /= k
    return np.array(out, dtype=np.uint64)


_THRESHOLDS = _poisson_thresholds()
#: The largest Poisson weight :func:`poisson_weights` can give (the number of thresholds).
_MAX_POISSON = len(_THRESHOLDS)


def unit_keys(unit_ids: Iterable[object], seed: int) -> np.ndarray:
    """A 64-bit key per unit: BLAKE2b (8-byte digest) of ``"<seed>\\x1f<unit ID>"`` in UTF-8."""
    prefix = f"{int(seed)}\x1f".encode()
    keys = [
        int.from_bytes(hashlib.blake2b(prefix + str(u).encode(), digest_size=8).digest(), "little")
        for u in unit_ids
    ]
    return np.array(keys, dtype=np.uint64)


_SHIFTS = tuple(np.uint64(v) for v in (30, 27, 31, 11))
#: Entries of the weights made at a time (their scratch arrays stay in the processor's cache).
_CHUNK_ENTRIES = 1 << 16


def _mix64(z: np.ndarray, scratch: np.ndarray) -> None:
    """SplitMix64's output function, in place on a uint64 array (wrapping arithmetic);
    ``scratch`` is a uint64 array of the same shape."""
    s30, s27, s31, _ = _SHIFTS
    np.right_shift(z, s30, out=scratch)
    z ^= scratch
    z *= _MIX1
    np.right_shift(z, s27, out=scratch)
    z ^= scratch
    z *= _MIX2
    np.right_shift(z, s31, out=scratch)
    z ^= scratch


def poisson_weights(keys: np.ndarray, replicates: int, first: int = 0) -> np.ndarray:
    """R x len(keys) Poisson(1) weights of replicates ``first .. first + R - 1`` for these units.

    Entry (b, u) depends only on ``keys[u]`` and ``first + b``: any split of units or replicates
    into blocks gives the same numbers. The array is a view of a units x R C-ordered one (its
    transpose is contiguous, as the sparse products want it); the numbers are made a few units
    at a time so that their scratch arrays stay in the processor's cache.
    """
    keys = np.asarray(keys, dtype=np.uint64)
    counters = np.arange(first + 1, first + replicates + 1, dtype=np.uint64)
    offsets = counters * np.uint64(_GAMMA)  # wraps modulo 2^64
    n = len(keys)
    out = np.empty((n, replicates))
    step = max(1, _CHUNK_ENTRIES // max(replicates, 1))
    z = np.empty((min(step, n), replicates), dtype=np.uint64)
    scratch = np.empty_like(z)
    count = np.empty(z.shape, dtype=np.uint8)
    above = np.empty(z.shape, dtype=bool)
    t = _THRESHOLDS
    for start in range(0, n, step):
        m = min(step, n - start)
        zc, sc, cc, ac = z[:m], scratch[:m], count[:m], above[:m]
        np.add(keys[start : start + m, None], offsets[None, :], out=zc)  # wraps modulo 2^64
        _mix64(zc, sc)
        zc >>= _SHIFTS[3]  # a 53-bit uniform integer
        # inversion: the count is the number of thresholds at or below z
        np.greater_equal(zc, t[0], out=ac)
        cc[...] = ac
        np.greater_equal(zc, t[1], out=ac)
        cc += ac
        np.greater_equal(zc, t[2], out=ac)
        cc += ac
        tail = np.flatnonzero(ac)  # counts of 3 or more (8% of them): the other thresholds
        if tail.size:
            zt = zc.reshape(-1)[tail]
            cc.reshape(-1)[tail] += (zt[:, None] >= t[None, 3:]).sum(axis=1, dtype=np.uint8)
        out[start : start + m] = cc
    return out.T


def unit_weights(n_units: int, replicates: int, seed: int) -> np.ndarray:
    """R x U multinomial weights: how often each unit is drawn in each replicate (rows sum to U).

    Each replicate draws U units uniformly with replacement (the unit-level bootstrap, Efron &
    Tibshirani 1993, ch. 6); the counts are multinomial(U, 1/U), obtained by counting the draws.
    """
    rng = np.random.Generator(np.random.PCG64(seed))
    if n_units == 0 or replicates <= 0:
        return np.zeros((max(replicates, 0), n_units))
    draws = rng.integers(0, n_units, size=(replicates, n_units))
    draws += (np.arange(replicates) * n_units)[:, None]
    counts = np.bincount(draws.ravel(), minlength=replicates * n_units)
    return counts.reshape(replicates, n_units).astype(float)


class UnitWeights:
    """Weights of every unit in every replicate, handed out in blocks of units."""

    replicates: int
    n_units: int

    def block(self, start: int, stop: int) -> np.ndarray:
        """R x (stop - start) weights of units ``start .. stop - 1``."""
        raise NotImplementedError


@dataclass(frozen=True)
class PoissonUnitWeights(UnitWeights):
    """Poisson(1) weights keyed by unit ID (see the module docstring)."""

    keys: np.ndarray
    replicates: int

    @classmethod
    def for_units(cls, unit_ids: Sequence[object], replicates: int, seed: int):
        return cls(unit_keys(unit_ids, seed), replicates)

    @property
    def n_units(self) -> int:  # type: ignore[override]
        return len(self.keys)

    def block(self, start: int, stop: int) -> np.ndarray:
        return poisson_weights(self.keys[start:stop], self.replicates)


@dataclass(frozen=True)
class MatrixUnitWeights(UnitWeights):
    """A weight matrix held in memory (multinomial weights, or any R x U matrix given)."""

    matrix: np.ndarray

    @property
    def replicates(self) -> int:  # type: ignore[override]
        return self.matrix.shape[0]

    @property
    def n_units(self) -> int:  # type: ignore[override]
        return self.matrix.shape[1]

    def block(self, start: int, stop: int) -> np.ndarray:
        return self.matrix[:, start:stop]


def make_weights(
    unit_ids: Sequence[object], replicates: int, seed: int, scheme: str = "poisson"
) -> UnitWeights:
    """The unit weights of a bootstrap scheme (``poisson`` or ``multinomial``) over these units."""
    if scheme == "multinomial":
        return MatrixUnitWeights(unit_weights(len(unit_ids), replicates, seed))
    if scheme != "poisson":
        raise ValueError(f"unknown bootstrap scheme {scheme!r}")
    return PoissonUnitWeights.for_units(unit_ids, replicates, seed)


def block_size(replicates: int, columns: int, memory: int = DEFAULT_MEMORY) -> int:
    """Units per block so that a block's weights (and their integer scratch copies, about 3 x 8
    bytes per entry) and a jackknife block (``columns`` sums per unit) fit in ``memory`` bytes."""
    per_unit = 8 * (3 * max(replicates, 1) + 2 * max(columns, 1))
    return max(64, int(memory // per_unit))


def jackknife_width(plans: Sequence[Plan]) -> int:
    """The most columns a jackknife block forms per unit over these plans (:func:`block_size`):
    all columns, or the dense ones of :class:`MixedColumns`."""
    widths = (
        p.contributions.dense.shape[1]
        if isinstance(p.contributions, MixedColumns)
        else p.contributions.shape[1]
        for p in plans
    )
    return max(widths, default=1)


@dataclass(frozen=True)
class Evaluated:
    """One coefficient: point estimate, bootstrap replicates (R,), jackknife values (J,)."""

    point: float
    replicates: np.ndarray
    jackknife: np.ndarray


def contributing_rows(plan: Plan) -> np.ndarray:
    """Positions of the units with a non-zero contribution (the jackknife's units)."""
    c = plan.contributions
    if not c.shape[1]:
        return np.array([], int)
    if isinstance(c, MixedColumns | Packed):
        return c.nonzero_rows()
    return np.flatnonzero(c.getnnz(axis=1) if sparse.issparse(c) else np.any(c != 0, axis=1))


def jackknife_rows(
    plan: Plan,
    total: np.ndarray,
    own: Any,
    prepared: dict[str, Callable[[Any], np.ndarray]] | None = None,
) -> dict[str, np.ndarray]:
    """Leave-one-out values of every formula for units whose contributions are the rows of
    ``own`` (dense, sparse or :class:`MixedColumns`): ``formula(total - own)``, or the formula's
    own ``plan.leave_one_out`` function (``prepared``: those functions already given ``total``).
    With :class:`MixedColumns` the other formulas read only the dense columns, so only those are
    formed."""
    if prepared is None:
        prepared = {name: make(total) for name, make in plan.leave_one_out.items()}
    if isinstance(own, MixedColumns):
        jack_sums = total[None, : own.dense.shape[1]] - as_array(own.dense)
    else:
        jack_sums = total[None, :] - (own.toarray() if sparse.issparse(own) else as_array(own))
    out = {}
    for name, formula in plan.formulas.items():
        fast = prepared.get(name)
        values = fast(own) if fast is not None else formula(jack_sums)
        out[name] = np.asarray(values, float)
    return out


def _jackknife(plan: Plan, total: np.ndarray, block: int) -> dict[str, np.ndarray]:
    """Leave-one-out values of every formula over the units that contribute, in unit blocks."""
    rows = contributing_rows(plan)
    prepared = {name: make(total) for name, make in plan.leave_one_out.items()}
    parts: dict[str, list[np.ndarray]] = {name: [] for name in plan.formulas}
    for start in range(0, len(rows), block):
        own = plan.contributions[rows[start : start + block]]
        values = jackknife_rows(plan, total, own, prepared)
        for name in plan.formulas:
            parts[name].append(values[name])
    return joined(parts)


def joined(parts: dict[str, list[np.ndarray]]) -> dict[str, np.ndarray]:
    """Each formula's jackknife values of consecutive blocks, joined in order."""
    return {
        name: np.concatenate(chunks) if chunks else np.empty(0) for name, chunks in parts.items()
    }


def evaluated(
    plan: Plan, sums: np.ndarray | None, jack: dict[str, np.ndarray]
) -> dict[str, Evaluated]:
    """Point value (all weights 1), replicate values (formulas over ``sums``, R x M) and the
    jackknife values of every formula of a plan."""
    total = column_sums(plan.contributions)
    out: dict[str, Evaluated] = {}
    for name, formula in plan.formulas.items():
        point = float(formula(total[None, :])[0])
        reps = formula(sums) if sums is not None else np.empty(0)
        out[name] = Evaluated(point, np.asarray(reps, float), jack[name])
    return out


def _evaluate(plan: Plan, sums: np.ndarray | None, block: int) -> dict[str, Evaluated]:
    total = column_sums(plan.contributions)
    return evaluated(plan, sums, _jackknife(plan, total, block))


def _whole_columns(t: sparse.csr_matrix, most: int) -> bool:
    """Whether sparse columns hold whole numbers small enough that sums of ``most`` times their
    largest one stay below 2^31 (32-bit integer products are then exact)."""
    data = t.data
    if not data.size:
        return True
    largest = float(np.max(np.abs(data)))
    return bool(np.array_equal(data, np.rint(data)) and largest * most < 2**31)


def _single_columns(d: Any, most: int) -> tuple[np.ndarray, np.ndarray] | None:
    """Positions of the dense columns holding whole numbers small enough that sums of ``most``
    times their largest one stay below 2^24 (single-precision products are then exact), and of
    the other columns; None when no column qualifies. ``d``: an array or packed columns (their
    distinct rows are tested)."""
    if isinstance(d, Packed):
        d = d.distinct_rows() if d.shape[0] else np.zeros(d.shape)
    if not d.size:
        return None
    ok = np.all(d == np.rint(d), axis=0) & (np.max(np.abs(d), axis=0) * most < 2**24)
    if not ok.any():
        return None
    return np.flatnonzero(ok), np.flatnonzero(~ok)


def _split(c: Any) -> tuple[Any, Any]:
    """A plan's contributions as (dense columns or None, sparse columns or None)."""
    if isinstance(c, MixedColumns):
        return c.dense, c.thin
    if sparse.issparse(c):
        return None, sparse.csr_matrix(c)
    return c, None


#: Blocks of units per run: a run's block products are added up from zero, then the runs' sums
#: are added in unit order. The same order on one machine or many (a worker makes one run), so
#: the sums do not depend on the engine or the number of workers.
RUN_BLOCKS = 8


@dataclass
class Totals:
    """One plan's R x M weighted sums while the runs of units add to them (:func:`run_sums`).

    ``dense``: R x (dense columns), float64. ``thin``: (sparse columns) x R, transposed as the
    sparse products give them; in 32-bit integers when every weight and entry is a whole number
    and no sum over all units can reach 2^31 (exact: the same numbers in half the bytes of a
    crowd design's pair-table sums, and each block's product is added to them directly), else
    float64.
    """

    dense: np.ndarray | None
    thin: np.ndarray | None

    @classmethod
    def zeros(cls, contributions: Any, replicates: int, integer_weights: bool) -> Totals:
        d, t = _split(contributions)
        n = contributions.shape[0]
        exact = t is not None and integer_weights and _whole_columns(t, n * _MAX_POISSON)
        return cls(
            None if d is None else np.zeros((replicates, d.shape[1])),
            None if t is None else np.zeros((t.shape[1], replicates), np.int32 if exact else float),
        )

    def array(self) -> np.ndarray:
        """The R x M float64 sums."""
        if self.thin is None:
            return self.dense
        if self.dense is None:
            return self.thin.T.astype(float, order="C")
        return np.hstack([self.dense, self.thin.T])


def run_sums(
    contributions: Sequence[Any],
    weights_of: Callable[[int, int], np.ndarray],
    replicates: int,
    block: int,
    step: Callable[[], None] | None = None,
    integer_weights: bool = False,
    into: list[Totals] | None = None,
) -> list[Any]:
    """R x M sums of one run of units: the plans' contributions of these units (dense, sparse or
    :class:`MixedColumns` rows) times their weights (``weights_of(start, stop)``, positions
    within the run), block by block, each block's product added in order.

    Dense columns take one dense product per block (``w @ c``); sparse columns the sparse rows'
    transpose times the C-ordered ``w.T`` (scipy's fastest product), added to M x R sums that
    are transposed once at the end of the run. ``integer_weights`` says that every weight is a
    whole number from 0 to :data:`_MAX_POISSON` (Poisson weights); it changes the time taken,
    never a number. With ``into`` (one :class:`Totals` per plan) the run's sums are added to
    those, which are returned, instead of being returned as new R x M arrays.
    """
    parts = [_split(c) for c in contributions]
    n = contributions[0].shape[0] if contributions else 0
    dense = [None if d is None else np.zeros((replicates, d.shape[1])) for d, _ in parts]
    # Whole-number weights and sparse columns: each block's sparse product in 32-bit integers,
    # exact (no sum can reach 2^31) and so equal to the double-precision product, in a quarter
    # of the time.
    whole = [
        t is not None and integer_weights and _whole_columns(t, min(block, n) * _MAX_POISSON)
        for _, t in parts
    ]
    # Those products go straight into 32-bit totals (exact in any order); other sparse sums
    # are added up over the run first, in 32-bit integers too when no sum over the run can
    # reach 2^31.
    thin: list[np.ndarray | None] = []
    direct: list[bool] = []  # products added to ``into`` as they come
    for i, (_, t) in enumerate(parts):
        direct.append(into is not None and whole[i] and into[i].thin.dtype == np.int32)
        if t is None or direct[i]:
            thin.append(into[i].thin if direct[i] else None)  # type: ignore[index]
            continue
        exact = whole[i] and _whole_columns(t, n * _MAX_POISSON)
        thin.append(np.zeros((t.shape[1], replicates), np.int32 if exact else float))
    # Likewise dense columns of whole numbers: single-precision products, exact below 2^24.
    single = [
        _single_columns(d, block * _MAX_POISSON) if d is not None and integer_weights else None
        for d, _ in parts
    ]
    for start in range(0, n, block):
        stop = min(start + block, n)
        w = weights_of(start, stop)
        wt = wt_whole = w32 = None
        for i, (d, t) in enumerate(parts):
            if d is not None and single[i] is None:
                dense[i] += w @ as_array(d[start:stop])
            elif d is not None:
                exact, rest = single[i]
                rows = as_array(d[start:stop])
                w32 = w.astype(np.float32) if w32 is None else w32  # once for every plan
                if rest.size:
                    dense[i][:, exact] += w32 @ rows[:, exact].astype(np.float32)
                    dense[i][:, rest] += w @ rows[:, rest]
                else:
                    dense[i] += w32 @ rows.astype(np.float32)
            if t is None:
                continue
            rows = t[start:stop].T.tocsr()
            if whole[i]:
                if wt_whole is None:  # once for every plan
                    wt_whole = w.T.astype(np.int32, order="C")
                thin[i] += rows.astype(np.int32) @ wt_whole
            else:
                wt = np.ascontiguousarray(w.T) if wt is None else wt  # once for every plan
                thin[i] += rows @ wt
        if step is not None:
            step()
    if into is None:
        return [
            d if t is None else t.T.astype(float, order="C") if d is None else np.hstack([d, t.T])
            for d, t in zip(dense, thin, strict=True)
        ]
    for i, (d, t) in enumerate(zip(dense, thin, strict=True)):
        if d is not None:
            into[i].dense += d
        if t is not None and not direct[i]:
            into[i].thin += t
        dense[i] = thin[i] = None
    return into


def evaluate_plans(
    plans: Sequence[Plan],
    weights: UnitWeights | np.ndarray | None,
    *,
    progress: Progress | None = None,
    memory: int = DEFAULT_MEMORY,
    block_units: int | None = None,
    sums: Sequence[np.ndarray] | None = None,
) -> list[dict[str, Evaluated]]:
    """Point, bootstrap and jackknife values of every coefficient of every plan.

    The units are walked in blocks: each block's weights (R x block) are made once and multiplied
    with every plan's contributions of those units, the products adding up to the R x M sums of
    each plan, in runs of :data:`RUN_BLOCKS` blocks (:func:`run_sums`). ``block_units`` (else
    chosen from ``memory`` bytes) sets the block; the results do not depend on it beyond
    floating-point rounding of the sums. ``progress(done, total)`` is called after each block of
    units and each plan's formulas. ``sums`` (one R x M array per plan, made elsewhere from the
    same weights, e.g. on a cluster's workers) skips the weighting.
    """
    if isinstance(weights, np.ndarray):
        weights = MatrixUnitWeights(weights)
    n_units = plans[0].contributions.shape[0] if plans else 0
    if weights is not None and weights.n_units != n_units:
        raise ValueError(f"weights for {weights.n_units} units, plans for {n_units}")
    width = jackknife_width(plans)
    replicates = weights.replicates if weights is not None else 0
    block = block_units or block_size(replicates, width, memory)
    if sums is not None:
        replicates = sums[0].shape[0] if len(sums) else 0
        block = block_units or block_size(replicates, width, memory)
        sums = list(sums)
        weights, starts = None, range(0)
    else:
        starts = range(0, n_units, block) if replicates else range(0)
        sums = [None] * len(plans)
    steps = len(starts) + len(plans)
    if replicates and weights is not None:
        whole = isinstance(weights, PoissonUnitWeights)
        sums = [Totals.zeros(p.contributions, replicates, whole) for p in plans]
        done = [0]

        def step() -> None:
            done[0] += 1
            if progress is not None:
                progress(done[0], steps)

        for start in range(0, n_units, block * RUN_BLOCKS):
            stop = min(start + block * RUN_BLOCKS, n_units)
            run_sums(
                [p.contributions[start:stop] for p in plans],
                lambda a, b, start=start: weights.block(start + a, start + b),  # type: ignore[union-attr]
                replicates,
                block,
                step,
                integer_weights=whole,
                into=sums,
            )
    results: list[dict[str, Evaluated]] = []
    for i, plan in enumerate(plans):
        # one plan's R x M float64 sums at a time
        plan_sums = sums[i].array() if isinstance(sums[i], Totals) else sums[i]
        sums[i] = None
        results.append(_evaluate(plan, plan_sums, block))
        del plan_sums
        if progress is not None:
            progress(len(starts) + i + 1, steps)
    return results
