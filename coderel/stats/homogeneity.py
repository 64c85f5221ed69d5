"""Marginal homogeneity and symmetry of a two-coder table: does one coder use a category more?

Input is a K x K table of counts (rows coder A, columns coder B, the codebook's categories in
order). Agreement coefficients say how often two coders agree; these tests ask whether their
disagreements lean one way, i.e. whether the two coders' category shares (the margins) differ.

* Stuart-Maxwell: X^2 = d' V^+ d with d = row margins - column margins, V_ii = n_i. + n_.i -
  2 n_ii, V_ij = -(n_ij + n_ji) (Stuart 1955; Maxwell 1970); df = rank of V (K - 1 when the
  disagreements connect all categories).
* Bhapkar: the same with V - d d' / n (Bhapkar 1966); equal to X^2_SM / (1 - X^2_SM / n) by the
  Sherman-Morrison identity.
* Bowker's symmetry test: sum over i < j of (n_ij - n_ji)^2 / (n_ij + n_ji), df = K (K - 1) / 2
  (Bowker 1948), over the categories either coder used.
* McNemar (two categories): (n_12 - n_21)^2 / (n_12 + n_21) on 1 df, and the exact two-sided
  binomial p-value (McNemar 1947).

Categories that neither coder used are left out (they carry no information and would make V
singular); a category that only ever appears where the coders agree adds nothing to d or V
either, and the pseudo-inverse handles it, as it handles disagreements that fall into separate
groups of categories (the statistic is then the sum over the groups, with df summed too).
Checked against statsmodels' ``SquareTable`` and ``mcnemar`` in tests/test_coder_diagnostics.py.

References
----------
Bowker, A. H. (1948). A test for symmetry in contingency tables. *Journal of the American
Statistical Association*, 43(244), 572-574.
Bhapkar, V. P. (1966). A note on the equivalence of two test criteria for hypotheses in
categorical data. *Journal of the American Statistical Association*, 61(313), 228-235.
Maxwell, A. E. (1970). Comparing the classification of subjects by two independent judges.
*British Journal of Psychiatry*, 116(535), 651-655.
McNemar, Q. (1947). Note on the sampling error of the difference between correlated proportions
or percentages. *Psychometrika*, 12(2), 153-157.
Stuart, A. (1955). A test for homogeneity of the marginal distributions in a two-way
classification. *Biometrika*, 42(3/4), 412-416.
Agresti, A. (2002). *Categorical Data Analysis* (2nd ed.), section 10.3. Wiley.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

#: No disagreement between the two coders: the margins are equal and the tests are 0/0.
NO_DISAGREEMENT = "no-disagreement"
#: Fewer than two categories used by the two coders.
ONE_CATEGORY_USED = "one-category-used"
#: The variable has more than two categories (McNemar needs exactly two).
NOT_TWO_CATEGORIES = "not-two-categories"


@dataclass(frozen=True)
class ChiSquareTest:
    """A chi-square test: statistic, degrees of freedom and p-value, or a reason for none.

    ``exact_p_value`` is set for McNemar's test only (the two-sided binomial p-value).
    """

    statistic: float | None
    df: int | None
    p_value: float | None
    reason: str | None = None
    exact_p_value: float | None = None

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "statistic": self.statistic,
            "df": self.df,
            "p_value": self.p_value,
            "reason": self.reason,
        }
        if self.exact_p_value is not None:
            out["exact_p_value"] = self.exact_p_value
        return out


def _chi2_sf(statistic: float, df: int) -> float:
    from scipy.stats import chi2  # imported here: start-up time of the CLI

    return float(chi2.sf(statistic, df))


def _used(table: np.ndarray) -> np.ndarray:
    """The table restricted to categories either coder used."""
    keep = (table.sum(axis=0) + table.sum(axis=1)) > 0
    return table[np.ix_(keep, keep)]


def _check(table: Any) -> np.ndarray:
    t = np.asarray(table, dtype=float)
    if t.ndim != 2 or t.shape[0] != t.shape[1]:
        raise ValueError(f"a square table of counts is needed, not shape {t.shape}")
    if np.any(t < 0) or not np.all(np.isfinite(t)):
        raise ValueError("table counts must be finite and not negative")
    return t


def _margins_covariance(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """d (row - column margins) and V of the Stuart-Maxwell statistic, in counts."""
    off = t + t.T
    v = -off.copy()
    np.fill_diagonal(v, t.sum(axis=1) + t.sum(axis=0) - 2.0 * np.diag(t))
    return t.sum(axis=1) - t.sum(axis=0), v


def stuart_maxwell(table: Any) -> ChiSquareTest:
    """Stuart-Maxwell test of marginal homogeneity (Stuart 1955; Maxwell 1970).

    Examples
    --------
    Stuart's (1955) unaided distance vision of 7,477 women, right eye by left eye (Agresti 2002,
    section 10.3, X^2 = 11.96 on 3 df; from memory):

    >>> t = [[1520, 266, 124, 66], [234, 1512, 432, 78], [117, 362, 1772, 205],
    ...      [36, 82, 179, 492]]
    >>> r = stuart_maxwell(t)
    >>> round(r.statistic, 2), r.df
    (11.96, 3)
    """
    t = _used(_check(table))
    if t.shape[0] < 2:
        return ChiSquareTest(None, None, None, ONE_CATEGORY_USED)
    d, v = _margins_covariance(t)
    df = int(np.linalg.matrix_rank(v))
    if df == 0:
        return ChiSquareTest(None, None, None, NO_DISAGREEMENT)
    stat = float(d @ np.linalg.pinv(v) @ d)
    stat = max(stat, 0.0)
    return ChiSquareTest(stat, df, _chi2_sf(stat, df))


def bhapkar(table: Any) -> ChiSquareTest:
    """Bhapkar's (1966) test of marginal homogeneity: X^2_SM / (1 - X^2_SM / n).

    >>> t = [[1520, 266, 124, 66], [234, 1512, 432, 78], [117, 362, 1772, 205],
    ...      [36, 82, 179, 492]]
    >>> round(bhapkar(t).statistic, 2)
    11.98
    """
    sm = stuart_maxwell(table)
    if sm.statistic is None:
        return sm
    n = float(_check(table).sum())
    den = 1.0 - sm.statistic / n
    if den <= 0:
        return ChiSquareTest(None, sm.df, None, NO_DISAGREEMENT)
    stat = sm.statistic / den
    return ChiSquareTest(stat, sm.df, _chi2_sf(stat, sm.df))


def bowker(table: Any) -> ChiSquareTest:
    """Bowker's (1948) test of symmetry, n_ij = n_ji for every pair of categories."""
    t = _used(_check(table))
    k = t.shape[0]
    if k < 2:
        return ChiSquareTest(None, None, None, ONE_CATEGORY_USED)
    iu = np.triu_indices(k, 1)
    upper, lower = t[iu], t.T[iu]
    total = upper + lower
    if not np.any(total > 0):
        return ChiSquareTest(None, None, None, NO_DISAGREEMENT)
    ok = total > 0
    stat = float(((upper[ok] - lower[ok]) ** 2 / total[ok]).sum())
    df = k * (k - 1) // 2
    return ChiSquareTest(stat, df, _chi2_sf(stat, df))


def mcnemar(table: Any) -> ChiSquareTest:
    """McNemar's (1947) test for a 2 x 2 table: chi-square without continuity correction on 1 df,
    and the exact two-sided binomial p-value of the smaller off-diagonal count."""
    t = _check(table)
    if t.shape != (2, 2):
        return ChiSquareTest(None, None, None, NOT_TWO_CATEGORIES)
    b, c = float(t[0, 1]), float(t[1, 0])
    if b + c == 0:
        return ChiSquareTest(None, None, None, NO_DISAGREEMENT)
    from scipy.stats import binom

    stat = (b - c) ** 2 / (b + c)
    exact = min(1.0, 2.0 * float(binom.cdf(min(b, c), b + c, 0.5)))
    return ChiSquareTest(stat, 1, _chi2_sf(stat, 1), exact_p_value=exact)
