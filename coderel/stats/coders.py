"""Per-coder diagnostics on a units x coders matrix of value indices (pure numpy).

* :func:`drop_one_alpha`: Krippendorff's alpha of a variable computed without each coder in turn,
  so a team sees which coder lowers it (alpha's definition is unchanged: the remaining coders'
  values, Krippendorff 2011).
* :func:`category_shares`: each coder's share of each category beside the pooled share (who
  over-uses a category).
* :func:`pairwise_agreement`: per pair of coders, the units both coded and those where they gave
  the same value, as per-unit 0/1 arrays that a bootstrap can weight.

References
----------
Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Departmental Papers (ASC) 43,
University of Pennsylvania.
"""

from __future__ import annotations

import numpy as np

from coderel.stats.plan import Scale, alpha_point


def drop_one_alpha(x: np.ndarray, scale: Scale) -> np.ndarray:
    """Alpha without each coder in turn: element c is alpha on every coder but c.

    ``nan`` where alpha is undefined on the remaining coders (one coder left, no pairable values,
    no variation). Values are indices into ``scale``'s domain, ``-1`` for no value.

    Examples
    --------
    Three coders; the third disagrees on every unit, so alpha rises without them:

    >>> import numpy as np
    >>> x = np.array([[0, 0, 1], [1, 1, 0], [0, 0, 1], [1, 1, 0]])
    >>> drop_one_alpha(x, Scale("categorical", "nominal", 2)).round(3).tolist()
    [-0.75, -0.75, 1.0]
    """
    x = np.asarray(x)
    n = x.shape[1]
    out = np.full(n, np.nan)
    if n < 3:
        return out
    for c in range(n):
        keep = [i for i in range(n) if i != c]
        out[c] = alpha_point(x[:, keep], scale)
    return out


def category_shares(x: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each coder's share of each category, and the pooled share.

    Parameters
    ----------
    x
        Units x coders of category indices (``-1``: no value).
    k
        Number of categories (the codebook's, used or not).

    Returns
    -------
    shares, pooled, values
        ``shares`` (C x K; ``nan`` rows for a coder without values), ``pooled`` (K,; ``nan``
        without any value), and how many values each coder gave (C,).

    Examples
    --------
    >>> import numpy as np
    >>> s, p, n = category_shares(np.array([[0, 1], [0, 1], [1, 1], [-1, 0]]), 2)
    >>> s.tolist(), p.tolist(), n.tolist()
    ([[0.6666666666666666, 0.3333333333333333], [0.25, 0.75]], [0.42857142857142855, \
0.5714285714285714], [3.0, 4.0])
    """
    x = np.asarray(x)
    n_coders = x.shape[1]
    rows = np.repeat(np.arange(n_coders)[None, :], x.shape[0], axis=0).ravel()
    flat = x.ravel()
    ok = flat >= 0
    counts = np.bincount(rows[ok] * k + flat[ok], minlength=n_coders * k).reshape(n_coders, k)
    counts = counts.astype(float)
    n = counts.sum(axis=1)
    shares = np.full_like(counts, np.nan)
    np.divide(counts, n[:, None], out=shares, where=n[:, None] > 0)
    total = counts.sum()
    pooled = counts.sum(axis=0) / total if total > 0 else np.full(k, np.nan)
    return shares, pooled, n


def pairwise_agreement(x: np.ndarray) -> tuple[list[tuple[int, int]], np.ndarray, np.ndarray]:
    """Per pair of coders (i < j): per-unit indicators of "both coded" and "both gave the same".

    Returns the pairs and two arrays of shape (U, P); a pair's percent agreement is
    ``same[:, p].sum() / both[:, p].sum()``, and a bootstrap replicate is ``W @ same``,
    ``W @ both``.
    """
    x = np.asarray(x)
    n = x.shape[1]
    pairs = [(i, j) for i in range(n) for j in range(i + 1, n)]
    both = np.zeros((x.shape[0], len(pairs)))
    same = np.zeros_like(both)
    for p, (i, j) in enumerate(pairs):
        b = (x[:, i] >= 0) & (x[:, j] >= 0)
        both[:, p] = b
        same[:, p] = b & (x[:, i] == x[:, j])
    return pairs, both, same
