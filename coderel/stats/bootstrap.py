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
unit's own contribution, evaluated in blocks of units so that it, too, needs O(units) memory.

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

from coderel.stats.plan import Plan, column_sums

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


def unit_keys(unit_ids: Iterable[object], seed: int) -> np.ndarray:
    """A 64-bit key per unit: BLAKE2b (8-byte digest) of ``"<seed>\\x1f<unit ID>"`` in UTF-8."""
    prefix = f"{int(seed)}\x1f".encode()
    keys = [
        int.from_bytes(hashlib.blake2b(prefix + str(u).encode(), digest_size=8).digest(), "little")
        for u in unit_ids
    ]
    return np.array(keys, dtype=np.uint64)


def _mix64(z: np.ndarray) -> None:
    """SplitMix64's output function, in place on a uint64 array (wrapping arithmetic)."""
    z ^= z >> np.uint64(30)
    z *= _MIX1
    z ^= z >> np.uint64(27)
    z *= _MIX2
    z ^= z >> np.uint64(31)


def poisson_weights(keys: np.ndarray, replicates: int, first: int = 0) -> np.ndarray:
    """R x len(keys) Poisson(1) weights of replicates ``first .. first + R - 1`` for these units.

    Entry (b, u) depends only on ``keys[u]`` and ``first + b``: any split of units or replicates
    into blocks gives the same numbers.
    """
    keys = np.asarray(keys, dtype=np.uint64)
    counters = np.arange(first + 1, first + replicates + 1, dtype=np.uint64)
    offsets = counters * np.uint64(_GAMMA)  # wraps modulo 2^64
    z = keys[None, :] + offsets[:, None]  # wraps modulo 2^64
    _mix64(z)
    z >>= np.uint64(11)
    t = _THRESHOLDS
    w = (z >= t[0]).astype(np.uint8)
    w += z >= t[1]
    tail = z >= t[2]
    w += tail
    if tail.any():
        zt = z[tail]
        extra = np.zeros(zt.shape, dtype=np.uint8)
        for threshold in t[3:]:
            extra += zt >= threshold
        w[tail] += extra
    return w.astype(float)


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
    return np.flatnonzero(c.getnnz(axis=1) if sparse.issparse(c) else np.any(c != 0, axis=1))


def jackknife_rows(plan: Plan, total: np.ndarray, own: Any) -> dict[str, np.ndarray]:
    """Leave-one-out values of every formula for units whose contributions are the rows of
    ``own`` (dense or sparse): ``formula(total - own)``."""
    jack_sums = total[None, :] - (own.toarray() if sparse.issparse(own) else own)
    return {name: np.asarray(formula(jack_sums), float) for name, formula in plan.formulas.items()}


def _jackknife(plan: Plan, total: np.ndarray, block: int) -> dict[str, np.ndarray]:
    """Leave-one-out values of every formula over the units that contribute, in unit blocks."""
    rows = contributing_rows(plan)
    parts: dict[str, list[np.ndarray]] = {name: [] for name in plan.formulas}
    for start in range(0, len(rows), block):
        values = jackknife_rows(plan, total, plan.contributions[rows[start : start + block]])
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


def block_products(contributions: Sequence[Any], w: np.ndarray) -> list[np.ndarray]:
    """``w @ c`` (R x M) for each plan's contributions ``c`` of one block of units (dense or
    sparse rows), ``w`` the block's R x units weights."""
    out = []
    wt = None
    for c in contributions:
        if sparse.issparse(c):
            # (C^T W^T)^T: scipy's fastest product, sparse rows times a C-ordered block
            if wt is None:
                wt = np.ascontiguousarray(w.T)
            out.append((c.T.tocsr() @ wt).T)
        else:
            out.append(w @ c)
    return out


#: Blocks of units per run: a run's block products are added up from zero, then the runs' sums
#: are added in unit order. The same order on one machine or many (a worker makes one run), so
#: the sums do not depend on the engine or the number of workers.
RUN_BLOCKS = 8


def run_sums(
    contributions: Sequence[Any],
    weights_of: Callable[[int, int], np.ndarray],
    replicates: int,
    block: int,
    step: Callable[[], None] | None = None,
) -> list[np.ndarray]:
    """R x M sums of one run of units: the plans' contributions of these units (dense or sparse
    rows) times their weights (``weights_of(start, stop)``, positions within the run), block by
    block, each block's product added in order."""
    n = contributions[0].shape[0] if contributions else 0
    sums = [np.zeros((replicates, c.shape[1])) for c in contributions]
    for start in range(0, n, block):
        stop = min(start + block, n)
        products = block_products([c[start:stop] for c in contributions], weights_of(start, stop))
        for i, product in enumerate(products):
            sums[i] += product
        if step is not None:
            step()
    return sums


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
    width = max((p.contributions.shape[1] for p in plans), default=1)
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
        sums = [np.zeros((replicates, p.contributions.shape[1])) for p in plans]
        done = [0]

        def step() -> None:
            done[0] += 1
            if progress is not None:
                progress(done[0], steps)

        for start in range(0, n_units, block * RUN_BLOCKS):
            stop = min(start + block * RUN_BLOCKS, n_units)
            part = run_sums(
                [p.contributions[start:stop] for p in plans],
                lambda a, b, start=start: weights.block(start + a, start + b),  # type: ignore[union-attr]
                replicates,
                block,
                step,
            )
            for i, run in enumerate(part):
                sums[i] += run
    results: list[dict[str, Evaluated]] = []
    for i, plan in enumerate(plans):
        results.append(_evaluate(plan, sums[i], block))
        sums[i] = None
        if progress is not None:
            progress(len(starts) + i + 1, steps)
    return results
