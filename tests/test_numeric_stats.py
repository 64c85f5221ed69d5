"""Intraclass correlations, Lin's concordance and Bland-Altman limits: published values,
statsmodels' ANOVA and direct computations."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats

from coderel.stats.bootstrap import unit_weights
from coderel.stats.concordance import ccc_contributions, ccc_from_sums, concordance
from coderel.stats.icc import (
    ICC_FORMS,
    f_interval,
    icc_contributions,
    icc_from_sums,
    mean_squares,
)
from coderel.stats.limits import limits_of_agreement, proportional_bias

# Shrout, P. E., & Fleiss, J. L. (1979). Intraclass correlations: uses in assessing rater
# reliability. Psychological Bulletin, 86(2), 420-428. Table 2: six targets rated by four judges.
SHROUT_FLEISS = np.array(
    [[9, 2, 5, 8], [6, 1, 3, 2], [8, 4, 6, 8], [7, 1, 2, 6], [10, 5, 6, 9], [6, 2, 4, 7]],
    dtype=float,
)
# Shrout & Fleiss (1979), Table 4: the six forms on the Table 2 data.
SHROUT_FLEISS_TABLE4 = {
    "icc_1_1": 0.17,
    "icc_2_1": 0.29,
    "icc_3_1": 0.71,
    "icc_1_k": 0.44,
    "icc_2_k": 0.62,
    "icc_3_k": 0.91,
}


def _sums(values: np.ndarray) -> np.ndarray:
    return icc_contributions(values).sum(axis=0)[None, :]


@pytest.mark.parametrize(("form", "published"), SHROUT_FLEISS_TABLE4.items())
def test_shrout_fleiss_table4(form, published):
    value = icc_from_sums(_sums(SHROUT_FLEISS), 4, form)[0]
    assert round(float(value), 2) == published


def _long(values: np.ndarray) -> pd.DataFrame:
    n, k = values.shape
    return pd.DataFrame(
        {
            "y": values.ravel(),
            "unit": np.repeat([f"u{i}" for i in range(n)], k),
            "coder": np.tile([f"c{j}" for j in range(k)], n),
        }
    )


def _statsmodels_mean_squares(values: np.ndarray) -> dict[str, float]:
    """An independent two-way (additive) and one-way ANOVA by statsmodels' OLS and anova_lm."""
    frame = _long(values)
    two = sm.stats.anova_lm(smf.ols("y ~ C(unit) + C(coder)", data=frame).fit(), typ=1)
    one = sm.stats.anova_lm(smf.ols("y ~ C(unit)", data=frame).fit(), typ=1)
    return {
        "bms": two.loc["C(unit)", "mean_sq"],
        "jms": two.loc["C(coder)", "mean_sq"],
        "ems": two.loc["Residual", "mean_sq"],
        "wms": one.loc["Residual", "mean_sq"],
    }


def _assert_mean_squares(values: np.ndarray) -> None:
    ms = mean_squares(_sums(values), values.shape[1])
    ref = _statsmodels_mean_squares(values)
    for key, expected in ref.items():
        assert float(getattr(ms, key)[0]) == pytest.approx(expected, rel=1e-9, abs=1e-9), key


def test_shrout_fleiss_mean_squares_against_statsmodels():
    _assert_mean_squares(SHROUT_FLEISS)
    # Shrout & Fleiss (1979), Table 3 (from memory): BMS 11.24, WMS 6.26, JMS 32.49, EMS 1.02.
    ms = mean_squares(_sums(SHROUT_FLEISS), 4)
    got = [round(float(v[0]), 2) for v in (ms.bms, ms.wms, ms.jms, ms.ems)]
    assert got == [11.24, 6.26, 32.49, 1.02]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_mean_squares_against_statsmodels_on_random_data(seed):
    rng = np.random.default_rng(seed)
    n, k = rng.integers(5, 40), rng.integers(2, 6)
    values = rng.normal(50, 10, size=(n, 1)) + rng.normal(0, 3, size=(1, k))
    values = values + rng.normal(0, 4, size=(n, k)) + 1e6  # a large offset: no lost precision
    _assert_mean_squares(values)


def test_incomplete_units_are_left_out():
    rng = np.random.default_rng(7)
    values = rng.normal(size=(30, 3)) + rng.normal(size=(30, 1))
    gappy = values.copy()
    gappy[[2, 5, 11], [0, 2, 1]] = np.nan
    keep = np.ones(30, bool)
    keep[[2, 5, 11]] = False
    for form in ICC_FORMS:
        assert icc_from_sums(_sums(gappy), 3, form)[0] == pytest.approx(
            icc_from_sums(_sums(values[keep]), 3, form)[0], rel=1e-12
        )


def test_bootstrap_sums_equal_the_resampled_anova():
    """A replicate's weighted sums give exactly the ANOVA of the resampled units."""
    rng = np.random.default_rng(3)
    values = rng.normal(size=(25, 4)) + rng.normal(size=(25, 1))
    w = unit_weights(25, 5, seed=11)
    reps = w @ icc_contributions(values)
    for r in range(5):
        resampled = np.repeat(values, w[r].astype(int), axis=0)
        for form in ICC_FORMS:
            direct = icc_from_sums(_sums(resampled), 4, form)[0]
            assert icc_from_sums(reps[r : r + 1], 4, form)[0] == pytest.approx(direct, rel=1e-9)


def test_icc_properties():
    rng = np.random.default_rng(5)
    values = rng.normal(size=(20, 3)) + 2 * rng.normal(size=(20, 1))
    base = {f: icc_from_sums(_sums(values), 3, f)[0] for f in ICC_FORMS}
    moved = values * 3.5 - 20  # a change of unit and origin
    swapped = values[rng.permutation(20)][:, [2, 0, 1]]
    for form in ICC_FORMS:
        assert icc_from_sums(_sums(moved), 3, form)[0] == pytest.approx(base[form], rel=1e-9)
        assert icc_from_sums(_sums(swapped), 3, form)[0] == pytest.approx(base[form], rel=1e-9)
    same = np.repeat(rng.normal(size=(20, 1)), 3, axis=1)
    for form in ICC_FORMS:
        assert icc_from_sums(_sums(same), 3, form)[0] == pytest.approx(1.0)
    constant = np.full((10, 3), 4.0)
    assert all(np.isnan(icc_from_sums(_sums(constant), 3, f)[0]) for f in ICC_FORMS)
    assert np.isnan(icc_from_sums(_sums(values[:1]), 3, "icc_2_1")[0])


@pytest.mark.parametrize("form", ["icc_1_1", "icc_3_1", "icc_1_k", "icc_3_k"])
def test_exact_f_bounds_invert_the_pivot(form):
    """At the exact bounds, F0 (1 - rho) / (1 + (k - 1) rho) (single coder) or F0 (1 - rho)
    (mean of k) sits at the F quantiles (Shrout & Fleiss 1979, p. 424; McGraw & Wong 1996,
    Table 7): the bounds are where the test of H0: ICC = rho0 just rejects."""
    k = 4
    ms = mean_squares(_sums(SHROUT_FLEISS), k)
    res = f_interval(ms, form, 0.95)
    lo, hi = res.ci
    for bound, tail in ((lo, 0.025), (hi, 0.975)):
        pivot = res.f * (1 - bound) / (1 + (k - 1) * bound) if form.endswith("_1") else None
        if pivot is None:
            pivot = res.f * (1 - bound)
        assert stats.f.sf(pivot, res.df1, res.df2) == pytest.approx(tail, abs=1e-9)


def test_f_test_against_statsmodels():
    """The F test of ICC = 0 of the two-way forms is the ANOVA's F test of units."""
    frame = _long(SHROUT_FLEISS)
    table = sm.stats.anova_lm(smf.ols("y ~ C(unit) + C(coder)", data=frame).fit(), typ=1)
    res = f_interval(mean_squares(_sums(SHROUT_FLEISS), 4), "icc_3_1")
    assert res.f == pytest.approx(table.loc["C(unit)", "F"], rel=1e-9)
    assert res.p_value == pytest.approx(table.loc["C(unit)", "PR(>F)"], rel=1e-9)
    assert (res.df1, res.df2) == (5, 15)


def test_absolute_agreement_interval_covers():
    """Satterthwaite's interval of ICC(2,1) and ICC(2,k) (Shrout & Fleiss 1979, p. 425; McGraw &
    Wong 1996, Table 7) covers the true value in about 95% of samples of the two-way random model
    (simulation; the tolerance allows for 400 samples and the approximation)."""
    rng = np.random.default_rng(2026)
    n, k, s_unit, s_coder, s_err = 30, 4, 2.0, 1.0, 1.0
    true_1 = s_unit**2 / (s_unit**2 + s_coder**2 + s_err**2)
    true_k = s_unit**2 / (s_unit**2 + (s_coder**2 + s_err**2) / k)
    hits = {"icc_2_1": 0, "icc_2_k": 0}
    samples = 400
    for _ in range(samples):
        values = (
            rng.normal(0, s_unit, (n, 1))
            + rng.normal(0, s_coder, (1, k))
            + rng.normal(0, s_err, (n, k))
        )
        ms = mean_squares(_sums(values), k)
        for form, true in (("icc_2_1", true_1), ("icc_2_k", true_k)):
            lo, hi = f_interval(ms, form).ci
            hits[form] += lo <= true <= hi
    for form, hit in hits.items():
        assert 0.91 <= hit / samples <= 0.99, form


def test_shrout_fleiss_absolute_interval():
    # Shrout & Fleiss (1979), p. 425 (from memory): ICC(2,1) on Table 2 lies between .019 and .761.
    lo, hi = f_interval(mean_squares(_sums(SHROUT_FLEISS), 4), "icc_2_1").ci
    assert (round(lo, 3), round(hi, 3)) == (0.019, 0.761)


# --- Lin's concordance correlation coefficient ---------------------------------------------


def _direct_ccc(x: np.ndarray, y: np.ndarray) -> float:
    """Lin (1989), eq. 3, written out: 2 s_xy / (s_x^2 + s_y^2 + (x_bar - y_bar)^2), divisor n."""
    n = len(x)
    sxy = np.sum((x - x.mean()) * (y - y.mean())) / n
    return 2 * sxy / (np.var(x) + np.var(y) + (x.mean() - y.mean()) ** 2)


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_ccc_direct(seed):
    rng = np.random.default_rng(seed)
    x = rng.normal(100, 15, 40)
    y = 0.9 * x + rng.normal(8, 6, 40)
    got = ccc_from_sums(ccc_contributions(x, y, centre=100.0).sum(axis=0)[None, :])[0]
    assert got == pytest.approx(_direct_ccc(x, y), rel=1e-12)
    c = concordance(x, y)
    assert c.estimate == pytest.approx(_direct_ccc(x, y), rel=1e-12)
    # rho_c = r * C_b (Lin 1989, section 2), r from scipy.
    assert c.pearson_r == pytest.approx(stats.pearsonr(x, y).statistic, rel=1e-12)
    assert c.pearson_r * c.bias_correction == pytest.approx(c.estimate, rel=1e-12)


def test_ccc_missing_values_and_bootstrap():
    rng = np.random.default_rng(9)
    x = rng.normal(size=30)
    y = x + rng.normal(0, 0.5, 30)
    x[[1, 4]] = np.nan
    y[7] = np.nan
    both = np.isfinite(x) & np.isfinite(y)
    assert concordance(x, y).estimate == pytest.approx(_direct_ccc(x[both], y[both]))
    w = unit_weights(30, 4, seed=2)
    reps = ccc_from_sums(w @ ccc_contributions(x, y))
    for r in range(4):
        idx = np.repeat(np.arange(30), w[r].astype(int))
        idx = idx[both[idx]]
        assert reps[r] == pytest.approx(_direct_ccc(x[idx], y[idx]), rel=1e-9)


def test_ccc_special_cases():
    x = np.arange(10.0) - 4.5
    assert concordance(x, x).estimate == pytest.approx(1.0)
    assert concordance(x, -x).estimate == pytest.approx(-1.0)
    assert concordance(x, x + 5).estimate < 1  # a location shift lowers it, r stays 1
    assert concordance(np.full(5, 2.0), np.full(5, 2.0)).estimate is None
    assert concordance(np.array([1.0]), np.array([2.0])).estimate is None


def test_ccc_one_coder_constant():
    """A coder who gave one value throughout: rho_c = 0 (no covariance), no interval, no warning
    (the test suite turns warnings into errors)."""
    x = np.array([3.0, 3.0, 3.0, 3.0])
    y = np.array([3.0, 4.0, 3.0, 9.0])
    c = concordance(x, y)
    assert c.estimate == pytest.approx(0.0)
    assert c.ci_z is None
    # Centred, a constant 0.3 leaves a variance of about -1e-17 from rounding: still 0.
    x = np.full(7, 0.3)
    assert concordance(x, x + np.array([0, 0.1, 0, 0.1, 0, 0, 0.2])).estimate == pytest.approx(0)


def test_ccc_z_standard_error_matches_simulation():
    """Lin's (1989) asymptotic SE of Z = arctanh(rho_c) against the spread of Z over simulated
    bivariate normal samples with a location shift and unequal scales."""
    rng = np.random.default_rng(1989)
    n, samples = 60, 3000
    cov = np.array([[1.0, 0.72], [0.72, 1.3]])
    draws = rng.multivariate_normal([0.0, 0.4], cov, size=(samples, n))
    x, y = draws[..., 0], draws[..., 1]
    mx, my = x.mean(axis=1), y.mean(axis=1)
    sxy = ((x - mx[:, None]) * (y - my[:, None])).mean(axis=1)
    rc = 2 * sxy / (x.var(axis=1) + y.var(axis=1) + (mx - my) ** 2)
    empirical = float(np.std(np.arctanh(rc)))
    formula = float(np.mean([concordance(x[i], y[i]).se_z for i in range(200)]))
    assert formula == pytest.approx(empirical, rel=0.1)


# --- Bland-Altman limits of agreement ---------------------------------------------------------

# Bland, J. M., & Altman, D. G. (1986). Statistical methods for assessing agreement between two
# methods of clinical measurement. Lancet, 327(8476), 307-310, Table 1: peak expiratory flow rate
# (l/min) of 17 subjects, first reading on the Wright and on the mini Wright meter (data from
# memory; they reproduce the paper's mean difference -2.1 and SD 38.8).
WRIGHT = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427]
MINI = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451]


def test_bland_altman_1986_example():
    loa = limits_of_agreement(np.array(WRIGHT, float), np.array(MINI, float), multiple=2.0)
    assert round(loa.mean_difference, 1) == -2.1
    assert round(loa.sd, 1) == 38.8
    # The paper's limits with 2 SD: -79.7 and 75.5 l/min (from the rounded -2.1 and 38.8).
    assert loa.lower == pytest.approx(-79.7, abs=0.1)
    assert loa.upper == pytest.approx(75.5, abs=0.1)
    # Its interval of the lower limit (from memory): SE sqrt(3 s^2 / n) = 16.3, t(16) = 2.12,
    # -79.7 -+ 2.12 x 16.3 = -114.3 to -45.1 (the paper rounds before multiplying).
    assert loa.lower_ci[0] == pytest.approx(-114.3, abs=0.3)
    assert loa.lower_ci[1] == pytest.approx(-45.1, abs=0.3)


def test_bland_altman_formulas():
    rng = np.random.default_rng(4)
    a = rng.normal(50, 10, 40)
    b = a + rng.normal(1.5, 3, 40)
    b[3] = np.nan
    loa = limits_of_agreement(a, b)
    d = (a - b)[np.isfinite(b)]
    n = len(d)
    assert loa.n == n == 39
    assert loa.mean_difference == pytest.approx(d.mean())
    assert loa.sd == pytest.approx(d.std(ddof=1))
    assert loa.lower == pytest.approx(d.mean() - 1.96 * d.std(ddof=1))
    t = stats.t.ppf(0.975, n - 1)
    se_mean = d.std(ddof=1) / np.sqrt(n)
    assert loa.mean_difference_ci == pytest.approx((d.mean() - t * se_mean, d.mean() + t * se_mean))
    se_limit = np.sqrt(3 * d.var(ddof=1) / n)
    assert loa.upper_ci == pytest.approx((loa.upper - t * se_limit, loa.upper + t * se_limit))


def test_proportional_bias_against_statsmodels():
    rng = np.random.default_rng(8)
    a = rng.uniform(10, 200, 50)
    b = a * 1.15 + rng.normal(0, 4, 50)  # differences grow with the magnitude
    loa = limits_of_agreement(a, b)
    means, diffs = (a + b) / 2, a - b
    fit = sm.OLS(diffs, sm.add_constant(means)).fit()
    pb = loa.proportional_bias
    assert pb.slope == pytest.approx(fit.params[1], rel=1e-9)
    assert pb.se == pytest.approx(fit.bse[1], rel=1e-9)
    assert pb.p_value == pytest.approx(fit.pvalues[1], rel=1e-6, abs=1e-300)
    assert pb.significant
    flat = limits_of_agreement(np.array(WRIGHT, float), np.array(MINI, float))
    assert not flat.proportional_bias.significant


def test_limits_small_samples():
    assert limits_of_agreement(np.array([1.0]), np.array([2.0])).sd is None
    two = limits_of_agreement(np.array([1.0, 2.0]), np.array([2.0, 2.5]))
    assert two.sd is not None
    assert two.lower_ci is None
    assert two.proportional_bias is None
    assert limits_of_agreement(np.array([np.nan]), np.array([1.0])).n == 0
    assert proportional_bias(np.full(5, 3.0), np.arange(5.0)) is None
