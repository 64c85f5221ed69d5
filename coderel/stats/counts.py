"""Per-unit summary counts built from a units x coders matrix of value indices.

The input of every function here is ``X``: an integer array of shape (U, C) holding, for each
unit and coder, the index of the value in the variable's domain (the codebook's categories in
their order, or the distinct observed values of a numeric or multi-select variable), and ``-1``
where the coder gave no value. Outputs are arrays over units that later get summed with unit
weights (:mod:`coderel.stats.bootstrap`).
"""

from __future__ import annotations

from collections.abc import Callable
from itertools import combinations

import numpy as np

PairDistance = Callable[[np.ndarray, np.ndarray], np.ndarray]


def value_counts(x: np.ndarray, k: int) -> np.ndarray:
    """Units x domain counts: how many coders gave each value to each unit."""
    n_units = x.shape[0]
    rows = np.repeat(np.arange(n_units), x.shape[1])
    flat = x.ravel()
    ok = flat >= 0
    counts = np.bincount(rows[ok] * k + flat[ok], minlength=n_units * k)
    return counts.reshape(n_units, k).astype(float)


def unit_value_sums(x: np.ndarray, table: np.ndarray, units: np.ndarray) -> np.ndarray:
    """Per unit, the sum over its values of ``table[value]`` (rows of a K x r table, or entries
    of a length-K vector), for the units where ``units`` holds and zero elsewhere.

    The same as ``value_counts(x, K) @ table`` without the units x K matrix.
    """
    table = np.asarray(table, dtype=float)
    out = np.zeros((x.shape[0], *table.shape[1:]))
    for j in range(x.shape[1]):
        given = (x[:, j] >= 0) & units
        out[given] += table[x[given, j]]
    return out


def values_per_unit(x: np.ndarray) -> np.ndarray:
    """Number of values m_u per unit."""
    return (x >= 0).sum(axis=1).astype(float)


def fleiss_units(x: np.ndarray) -> tuple[np.ndarray, int]:
    """The units Fleiss' kappa uses and their number of values m.

    Fleiss (1971) needs the same number of ratings m for every unit, not the same raters: with
    rotating coders (each unit coded by 2 of 3) every unit counts. Units are kept when their
    number of values is the most common one among units with two or more values; on a tie, the
    larger number (more ratings per unit). Returns a boolean mask over units and m (0 when no
    unit has two values).

    >>> x = np.array([[0, 1, -1], [-1, 0, 0], [1, 1, 1], [0, -1, -1]])
    >>> mask, m = fleiss_units(x)
    >>> mask.tolist(), m
    ([True, True, False, False], 2)
    """
    per_unit = (x >= 0).sum(axis=1)
    rated = per_unit[per_unit >= 2]
    if rated.size == 0:
        return np.zeros(x.shape[0], dtype=bool), 0
    sizes, freq = np.unique(rated, return_counts=True)
    m = int(sizes[freq == freq.max()].max())
    return per_unit == m, m


def coder_pairs(n_coders: int) -> list[tuple[int, int]]:
    """All pairs (i, j) of coder columns with i < j."""
    return list(combinations(range(n_coders), 2))


def unit_pair_sums(x: np.ndarray, dist: PairDistance) -> np.ndarray:
    """Per unit, the sum over ordered pairs of values (i != j) of a distance ``dist(a, b)``.

    ``dist`` takes two index arrays and returns distances; missing values contribute nothing.
    """
    out = np.zeros(x.shape[0])
    for i, j in coder_pairs(x.shape[1]):
        both = (x[:, i] >= 0) & (x[:, j] >= 0)
        if both.any():
            out[both] += 2.0 * dist(x[both, i], x[both, j])
    return out


def unit_disagreement(x: np.ndarray, dist: PairDistance) -> np.ndarray:
    """Per-unit observed disagreement of Krippendorff's alpha, sum_{i != j} delta / (m_u - 1).

    Zero for units with fewer than two values (they are not pairable).
    """
    m = values_per_unit(x)
    sums = unit_pair_sums(x, dist)
    out = np.zeros_like(sums)
    ok = m >= 2
    out[ok] = sums[ok] / (m[ok] - 1.0)
    return out


def unit_agreeing_pairs(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per unit, ordered pairs of values that are equal, and all ordered pairs, m (m - 1).

    Each unit's values sorted, a value equal to the one before it closes one more equal pair
    with each earlier member of its run: one pass over the coders, not one per coder pair.

    >>> equal, pairs = unit_agreeing_pairs(np.array([[2, 2, 2, -1], [0, 1, 0, 1], [-1, 3, -1, -1]]))
    >>> equal.tolist(), pairs.tolist()
    ([6.0, 4.0, 0.0], [6.0, 12.0, 0.0])
    """
    m = values_per_unit(x)
    xs = np.sort(x, axis=1)
    run = np.zeros(x.shape[0], dtype=np.int64)
    equal = np.zeros(x.shape[0], dtype=np.int64)
    for j in range(1, x.shape[1]):
        same = (xs[:, j] == xs[:, j - 1]) & (xs[:, j] >= 0)
        run = np.where(same, run + 1, 0)
        equal += run
    return 2.0 * equal, m * (m - 1.0)


def coincidences_upper(counts: np.ndarray, iu: tuple[np.ndarray, np.ndarray]) -> np.ndarray:
    """Per-unit coincidences o_ck = n_uc n_uk / (m_u - 1) for the cells (c, k) listed in ``iu``.

    Krippendorff (2011), the coincidence matrix; units with fewer than two values give zero.
    """
    m = counts.sum(axis=1)
    scale = np.zeros_like(m)
    ok = m >= 2
    scale[ok] = 1.0 / (m[ok] - 1.0)
    return counts[:, iu[0]] * counts[:, iu[1]] * scale[:, None]


def one_hot(index: np.ndarray, k: int, mask: np.ndarray) -> np.ndarray:
    """Units x k indicator of ``index`` where ``mask`` holds, zero rows elsewhere."""
    out = np.zeros((index.shape[0], k))
    rows = np.nonzero(mask)[0]
    out[rows, index[rows]] = 1.0
    return out


def confusion_table(a: np.ndarray, b: np.ndarray, k: int) -> np.ndarray:
    """K x K counts of units coded by both coders: rows coder a, columns coder b."""
    both = (a >= 0) & (b >= 0)
    flat = np.bincount(a[both] * k + b[both], minlength=k * k)
    return flat.reshape(k, k)
