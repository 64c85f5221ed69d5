"""Coder-pair agreement tables of a crowd design (many coders, each unit coded by a few).

Cohen's kappa of a coder pair needs four sums over the units both coders coded: their number n,
the number on which they agree, and each coder's category counts (the margins). All four are
linear functions of the pair's K x K agreement table (rows: the first coder's category, columns:
the second's): n is its total, agreement its trace, the margins its row and column sums. So a unit
needs to contribute only ONE number per pair it belongs to, a 1 in the cell (a, c) of the two
values it was given; the per-unit contributions of all pairs are a sparse units x (P K K) matrix
with one non-zero per unit and pair present (:func:`pair_tables`). Its weighted column sums are the
P weighted tables, exact for integer weights, and every pair quantity is derived from them
(:func:`pair_margins`).

The jackknife of Light's kappa (the mean of Cohen's kappa over the pairs, Light 1971) needs no
pass over all pairs per unit: leaving unit u out changes only the tables of u's own pairs, each by
one count in the cell u filled, so the leave-one-out kappa of pair p is one of at most K x K
values per pair, computed once (:func:`light_leave_one_out`).

References
----------
Cohen, J. (1960). A coefficient of agreement for nominal scales. *Educational and Psychological
Measurement*, 20(1), 37-46.
Light, R. J. (1971). Measures of response agreement for qualitative data: Some generalizations
and alternatives. *Psychological Bulletin*, 76(5), 365-377.
Efron, B., & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
ch. 11 (the jackknife: leave-one-out values of a statistic).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
from scipy import sparse

from coderel.stats import kappa as KA


def div(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    """num / den, ``nan`` where den is not positive (no warnings)."""
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    out = np.full(np.broadcast(num, den).shape, np.nan)
    np.divide(num, den, out=out, where=den > 0)
    return out


def nanmean_rows(stack: np.ndarray) -> np.ndarray:
    """Mean over axis 0 ignoring nan, nan where every entry is nan (no warnings)."""
    ok = np.isfinite(stack)
    count = ok.sum(axis=0)
    total = np.where(ok, stack, 0.0).sum(axis=0)
    return div(total, count)


def pair_tables(x: np.ndarray, pairs: Sequence[tuple[int, int]], k: int) -> sparse.csr_matrix:
    """Units x (P K K) one-hot agreement cells of coder pairs (CSR, ones).

    Column ``p K K + a K + c`` holds a 1 for every unit that coder ``pairs[p][0]`` gave category
    ``a`` and coder ``pairs[p][1]`` category ``c``; a unit not coded by both coders of a pair has
    no entry for it. ``x`` is units x coders category indices, ``-1`` for no value.

    >>> x = np.array([[0, 1, -1], [1, 1, 1]])
    >>> pair_tables(x, [(0, 1), (0, 2), (1, 2)], 2).toarray().astype(int)
    array([[0, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0],
           [0, 0, 0, 1, 0, 0, 0, 1, 0, 0, 0, 1]])
    """
    n_units, cells = x.shape[0], k * k
    rows, cols = [], []
    for p, (i, j) in enumerate(pairs):
        a, c = x[:, i], x[:, j]
        both = np.flatnonzero((a >= 0) & (c >= 0))
        rows.append(both)
        cols.append(p * cells + a[both].astype(np.int64) * k + c[both])
    row = np.concatenate(rows) if rows else np.empty(0, np.int64)
    col = np.concatenate(cols) if cols else np.empty(0, np.int64)
    order = np.argsort(row, kind="stable")  # by unit, each unit's pairs in pair order
    indptr = np.zeros(n_units + 1, dtype=np.int64)
    np.cumsum(np.bincount(row, minlength=n_units), out=indptr[1:])
    shape = (n_units, len(pairs) * cells)
    return sparse.csr_matrix((np.ones(len(row)), col[order], indptr), shape=shape)


def pair_margins(tables: np.ndarray, k: int):
    """n, agreements, row margins and column margins of summed pair tables.

    ``tables``: R x (P K K) weighted sums of :func:`pair_tables`. Returns arrays R x P (n and
    agreements) and R x P x K (the first and the second coder's category counts).
    """
    t = tables.reshape(tables.shape[0], -1, k, k)
    n = t.sum(axis=(2, 3))
    agree = np.trace(t, axis1=2, axis2=3)
    return n, agree, t.sum(axis=3), t.sum(axis=2)


def pair_kappas(tables: np.ndarray, k: int) -> np.ndarray:
    """P x R Cohen's kappa (Cohen 1960) of every pair from R rows of summed pair tables.

    Each pair's kappa is ``(p_o - p_e) / (1 - p_e)`` with p_o the share of the pair's units on
    which the two coders agree and p_e the sum over categories of the product of their marginal
    shares; ``nan`` where the pair has no unit or p_e is 1.
    """
    n, agree, rows, cols = pair_margins(tables, k)
    out = np.empty((n.shape[1], n.shape[0]))
    for p in range(n.shape[1]):
        size = n[:, p]
        p_o = div(agree[:, p], size)
        r, c = div(rows[:, p], size[:, None]), div(cols[:, p], size[:, None])
        out[p] = KA.cohen_from_margins(p_o, r, c)
    return out


def light_from_tables(tables: np.ndarray, k: int) -> np.ndarray:
    """Light's kappa (Light 1971): the mean of Cohen's kappa over the coder pairs whose kappa is
    defined, from R rows of summed pair tables; ``nan`` where no pair's kappa is defined."""
    return nanmean_rows(pair_kappas(tables, k))


def light_leave_one_out(total: np.ndarray, k: int) -> Callable[[sparse.csr_matrix], np.ndarray]:
    """Light's kappa with each unit left out (the jackknife, Efron & Tibshirani 1993, ch. 11).

    Parameters
    ----------
    total
        The summed pair tables of all units (P K K,), :func:`pair_tables` summed over units.
    k
        Categories.

    Returns
    -------
    callable
        ``values(own)``: for the pair-table rows ``own`` (J x P K K) of J units, Light's kappa of
        ``total - own[j]`` for each. Leaving a unit out lowers one cell of each of its pairs'
        tables by one, so the leave-one-out kappa of pair p is the kappa of its table less one
        count in cell (a, c): at most K x K values per pair, computed here once. The mean over
        pairs then replaces the unit's own pairs' kappas in the full-sample sum (a sparse
        product with the rows).
    """
    cells = k * k
    n_pairs = total.size // cells if cells else 0
    full = pair_kappas(total[None, :], k)[:, 0]  # P
    # Every pair table less one count in each cell: rows (p, cell) of P K K tables.
    less = np.repeat(total.reshape(n_pairs, 1, cells), cells, axis=1)
    less[:, np.arange(cells), np.arange(cells)] -= 1.0
    loo = _cell_kappas(less, k)  # P x K K
    ok_full = np.isfinite(full)
    base_sum = np.where(ok_full, full, 0.0).sum()
    base_count = float(ok_full.sum())
    ok_loo = np.isfinite(loo)
    d_sum = (np.where(ok_loo, loo, 0.0) - np.where(ok_full, full, 0.0)[:, None]).ravel()
    d_count = (ok_loo.astype(float) - ok_full.astype(float)[:, None]).ravel()

    def values(own: sparse.csr_matrix) -> np.ndarray:
        return div(base_sum + own @ d_sum, base_count + own @ d_count)

    return values


def _cell_kappas(less: np.ndarray, k: int) -> np.ndarray:
    """P x K K Cohen's kappas of the tables ``less[p, cell]`` (P x K K x K K)."""
    n_pairs, cells = less.shape[0], k * k
    t = less.reshape(n_pairs * cells, k, k)
    n = t.sum(axis=(1, 2))
    p_o = div(np.trace(t, axis1=1, axis2=2), n)
    r, c = div(t.sum(axis=2), n[:, None]), div(t.sum(axis=1), n[:, None])
    return KA.cohen_from_margins(p_o, r, c).reshape(n_pairs, cells)
