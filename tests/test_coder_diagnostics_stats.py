"""Coder diagnostics in the pure core: marginal homogeneity, symmetry, McNemar, drop-one alpha
and category shares, each against a published table or a reference library."""

import krippendorff
import numpy as np
import pytest
from statsmodels.stats.contingency_tables import SquareTable
from statsmodels.stats.contingency_tables import mcnemar as sm_mcnemar

from coderel.stats import homogeneity as H
from coderel.stats.coders import category_shares, drop_one_alpha, pairwise_agreement
from coderel.stats.plan import Scale

# Stuart, A. (1955). A test for homogeneity of the marginal distributions in a two-way
# classification. Biometrika 42, 412-416: unaided distance vision of 7,477 women, right eye (rows)
# by left eye (columns), grades highest to lowest. Agresti (2002), Categorical Data Analysis, 2nd
# ed., section 10.3: Stuart-Maxwell 11.96 and Bhapkar 11.98 on 3 df (values from memory).
STUART_1955 = np.array(
    [[1520, 266, 124, 66], [234, 1512, 432, 78], [117, 362, 1772, 205], [36, 82, 179, 492]]
)


def test_stuart_1955_printed_decimals():
    sm = H.stuart_maxwell(STUART_1955)
    bh = H.bhapkar(STUART_1955)
    assert round(sm.statistic, 2) == 11.96
    assert round(bh.statistic, 2) == 11.98
    assert sm.df == bh.df == 3


def test_stuart_1955_against_statsmodels():
    ref = SquareTable(STUART_1955, shift_zeros=False)
    for ours, method in ((H.stuart_maxwell, "stuart_maxwell"), (H.bhapkar, "bhapkar")):
        r, s = ours(STUART_1955), ref.homogeneity(method)
        assert r.statistic == pytest.approx(s.statistic, abs=1e-9)
        assert r.p_value == pytest.approx(s.pvalue, abs=1e-9)
        assert r.df == s.df
    b, s = H.bowker(STUART_1955), ref.symmetry("bowker")
    assert b.statistic == pytest.approx(s.statistic, abs=1e-9)
    assert b.p_value == pytest.approx(s.pvalue, abs=1e-9)
    assert b.df == s.df


@pytest.mark.parametrize("seed", range(8))
def test_random_tables_against_statsmodels(seed):
    """Tables with every cell positive (statsmodels needs an invertible covariance)."""
    rng = np.random.default_rng(seed)
    k = int(rng.integers(2, 6))
    t = rng.integers(1, 40, size=(k, k)) + np.diag(rng.integers(20, 90, size=k))
    ref = SquareTable(t, shift_zeros=False)
    for ours, method in ((H.stuart_maxwell, "stuart_maxwell"), (H.bhapkar, "bhapkar")):
        assert ours(t).statistic == pytest.approx(ref.homogeneity(method).statistic, abs=1e-9)
        assert ours(t).p_value == pytest.approx(ref.homogeneity(method).pvalue, abs=1e-9)
    assert H.bowker(t).statistic == pytest.approx(ref.symmetry().statistic, abs=1e-9)


def test_unused_category_is_left_out():
    """A category neither coder used adds a zero row and column; the tests are unchanged."""
    t = np.array([[30, 5, 2], [9, 40, 4], [1, 7, 25]])
    padded = np.zeros((4, 4), int)
    padded[np.ix_([0, 1, 3], [0, 1, 3])] = t
    for f in (H.stuart_maxwell, H.bhapkar, H.bowker):
        assert f(padded).statistic == pytest.approx(f(t).statistic, abs=1e-12)
        assert f(padded).df == f(t).df


def test_separate_groups_of_disagreement_sum():
    """Disagreements only within {0, 1} and within {2, 3}: the pseudo-inverse gives the sum of
    the two groups' statistics on 1 + 1 df (each a 2 x 2 McNemar)."""
    t = np.array([[20, 8, 0, 0], [2, 30, 0, 0], [0, 0, 25, 1], [0, 0, 9, 15]])
    r = H.stuart_maxwell(t)
    expected = (8 - 2) ** 2 / 10 + (1 - 9) ** 2 / 10
    assert r.statistic == pytest.approx(expected, abs=1e-9)
    assert r.df == 2


def test_no_disagreement_has_a_reason_not_a_number():
    t = np.diag([10, 5, 3])
    assert H.stuart_maxwell(t).reason == H.NO_DISAGREEMENT
    assert H.bowker(t).reason == H.NO_DISAGREEMENT
    assert H.mcnemar(np.diag([4, 6])).reason == H.NO_DISAGREEMENT
    assert H.stuart_maxwell([[7]]).reason == H.ONE_CATEGORY_USED
    assert H.mcnemar(np.ones((3, 3))).reason == H.NOT_TWO_CATEGORIES


@pytest.mark.parametrize("table", [[[59, 6], [16, 80]], [[10, 1], [9, 30]], [[5, 3], [3, 5]]])
def test_mcnemar_against_statsmodels(table):
    ours = H.mcnemar(table)
    chi = sm_mcnemar(np.array(table), exact=False, correction=False)
    exact = sm_mcnemar(np.array(table), exact=True)
    assert ours.statistic == pytest.approx(chi.statistic, abs=1e-9)
    assert ours.p_value == pytest.approx(chi.pvalue, abs=1e-9)
    assert ours.exact_p_value == pytest.approx(exact.pvalue, abs=1e-9)
    # On a 2 x 2 table Stuart-Maxwell is McNemar's chi-square (Agresti 2002, section 10.3).
    assert H.stuart_maxwell(table).statistic == pytest.approx(ours.statistic, abs=1e-9)


def _reference_alpha(x: np.ndarray, level: str, k: int) -> float:
    data = np.where(x >= 0, x, np.nan).T.astype(float)
    return krippendorff.alpha(
        reliability_data=data, level_of_measurement=level, value_domain=list(range(k))
    )


@pytest.mark.parametrize(("level", "seed"), [("nominal", 1), ("ordinal", 2), ("nominal", 3)])
def test_drop_one_alpha_against_krippendorff_package(level, seed):
    """Alpha without coder c equals the krippendorff package on the other coders' columns."""
    rng = np.random.default_rng(seed)
    k, units, coders = 5, 60, 4
    truth = rng.integers(0, k, size=units)
    x = np.where(rng.random((units, coders)) < 0.75, truth[:, None], rng.integers(0, k, (units, 4)))
    x[rng.random(x.shape) < 0.1] = -1
    got = drop_one_alpha(x, Scale("categorical", level, k))
    for c in range(coders):
        keep = [i for i in range(coders) if i != c]
        assert got[c] == pytest.approx(_reference_alpha(x[:, keep], level, k), abs=1e-9)


def test_drop_one_alpha_needs_three_coders():
    x = np.array([[0, 1], [1, 1]])
    assert np.isnan(drop_one_alpha(x, Scale("categorical", "nominal", 2))).all()


def test_category_shares_and_pairwise_agreement():
    x = np.array([[0, 0, 1], [1, 1, 1], [0, -1, 0], [2, 2, 2]])
    shares, pooled, n = category_shares(x, 4)
    assert n.tolist() == [4, 3, 4]
    assert shares[1].tolist() == pytest.approx([1 / 3, 1 / 3, 1 / 3, 0])
    assert pooled.tolist() == pytest.approx([4 / 11, 4 / 11, 3 / 11, 0])
    pairs, both, same = pairwise_agreement(x)
    assert pairs == [(0, 1), (0, 2), (1, 2)]
    assert both.sum(axis=0).tolist() == [3, 4, 3]
    assert same.sum(axis=0).tolist() == [3, 3, 2]
