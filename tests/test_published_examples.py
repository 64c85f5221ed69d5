"""Published worked examples reproduced by the stats core and by ``coderel.agreement``.

Every expected number carries its source beside it. "(memory)" marks a published figure that was
recalled rather than re-read; where a general-purpose library reproduces it, the test also checks
that library's value to 1e-9. Krippendorff's (2011) four-observer example and the textbook table
[[20, 5], [10, 15]] in the core are tested in tests/test_agree_published.py and
tests/test_stats_core.py; they are not repeated here.
"""

from __future__ import annotations

import re
from pathlib import Path

import krippendorff
import numpy as np
import pytest
from scipy.stats import norm
from statsmodels.stats.inter_rater import aggregate_raters, cohens_kappa, fleiss_kappa

from coderel.agree import COEFFICIENTS, THIN_DATA, agreement
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.stats.counts import unit_agreeing_pairs
from coderel.stats.kappa import (
    cohen_kappa_table,
    fleiss_category_kappas,
    fleiss_null_se,
    z_test,
)
from coderel.stats.plan import Scale, build_plan
from coderel.stats.undefined import REASONS

N = None


# --------------------------------------------------------------------------------------------
# helpers: coders x units data (None = no value) -> Codings through the public constructor
# --------------------------------------------------------------------------------------------


def _codings(data: list[list[int | None]], levels: dict[str, str], k: int) -> Codings:
    """One variable per level over the same coders x units data, categories 1..k."""
    scale = tuple(Category(i, f"c{i}") for i in range(1, k + 1))
    variables = tuple(
        Variable(
            name=name, level=level, categories=scale if level in ("nominal", "ordinal") else ()
        )
        for name, level in levels.items()
    )
    cb = Codebook(title="published example", variables=variables)
    records = [
        {
            "unit": f"u{u:03d}",
            "coder": f"coder{c}",
            "variable": v.name,
            "value": row[u] if v.is_categorical or row[u] is None else float(row[u]),
        }
        for v in variables
        for c, row in enumerate(data)
        for u in range(len(row))
    ]
    return Codings.from_records(cb, records)


def _pairs_from_table(table: list[list[int]]) -> tuple[np.ndarray, np.ndarray]:
    """Two coders' category indices (0-based) rebuilt from a K x K table (rows coder A)."""
    t = np.asarray(table)
    k = t.shape[0]
    cells = [(i, j) for i in range(k) for j in range(k)]
    a = np.repeat([i for i, _ in cells], t.ravel())
    b = np.repeat([j for _, j in cells], t.ravel())
    return a, b


def _x(data: list[list[int | None]]) -> np.ndarray:
    """Units x coders value indices (codes 1..k -> 0..k-1, None -> -1)."""
    return np.array([[-1 if v is None else v - 1 for v in row] for row in data]).T


# --------------------------------------------------------------------------------------------
# Krippendorff's alpha: three coders, fifteen units
# Wikipedia contributors, "Krippendorff's alpha", section "A computational example" (the
# encyclopedic example); nominal 0.691358 and interval 0.810845 are asserted to six decimals in
# the `krippendorff` package's own tests.
# --------------------------------------------------------------------------------------------

THREE_CODERS = [
    [N, N, N, N, N, 3, 4, 1, 2, 1, 1, 3, 3, N, 3],
    [1, N, 2, 1, 3, 3, 4, 3, N, N, N, N, N, N, N],
    [N, N, 2, 1, 3, 4, 4, N, 2, 1, 1, 3, 3, N, 4],
]
THREE_CODER_LEVELS = {"nom": "nominal", "ord": "ordinal", "int": "interval", "rat": "ratio"}


def test_three_coders_fifteen_units_published_nominal_and_interval():
    result = agreement(_codings(THREE_CODERS, THREE_CODER_LEVELS, 4), replicates=100, seed=1)
    nominal = result.variable("nom").coefficients["krippendorff_alpha"].estimate
    interval = result.variable("int").coefficients["krippendorff_alpha"].estimate
    assert nominal == pytest.approx(0.691358, abs=5e-7)  # published, six decimals
    assert interval == pytest.approx(0.810845, abs=5e-7)  # published, six decimals
    # Units 1, 2 and 14 hold fewer than two values: 26 pairable values remain.
    assert result.variable("nom").pairable_values == 26


@pytest.mark.parametrize("name", list(THREE_CODER_LEVELS))
def test_three_coders_fifteen_units_all_levels_match_krippendorff_package(name):
    level = THREE_CODER_LEVELS[name]
    result = agreement(_codings(THREE_CODERS, THREE_CODER_LEVELS, 4), replicates=0, seed=1)
    got = result.variable(name).coefficients["krippendorff_alpha"].estimate
    ref = krippendorff.alpha(
        reliability_data=np.array(THREE_CODERS, dtype=float),
        level_of_measurement=level,
        value_domain=[1, 2, 3, 4] if level in ("nominal", "ordinal") else None,
    )
    assert got == pytest.approx(ref, abs=1e-9)


# --------------------------------------------------------------------------------------------
# Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. Psychological
# Bulletin, 76(5), 378-382: 30 patients, 6 psychiatrists per patient, 5 diagnoses. Fleiss printed
# only the patients x diagnoses counts; the rater-level rows below are those of statsmodels'
# test suite (statsmodels/stats/tests/test_inter_rater.py, `diagnoses`), which aggregate to the
# published table (column totals 26 26 30 55 43). Published kappa .430; per-category kappas
# .245 .245 .520 .471 .566 (memory). The seven-digit kappa 0.4302445 is the published .430 carried
# further by the formula of Fleiss (1971, eqs. 2-5) on that table (statsmodels' fleiss_kappa
# gives it too); z 17.65183 is kappa / SE_0 with the null-hypothesis variance of Fleiss, Nee &
# Landis (1979), written out below (from memory of that paper's formula).
# --------------------------------------------------------------------------------------------

DIAGNOSES = [
    [4, 4, 4, 4, 4, 4], [2, 2, 2, 5, 5, 5], [2, 3, 3, 3, 3, 5], [5, 5, 5, 5, 5, 5],
    [2, 2, 2, 4, 4, 4], [1, 1, 3, 3, 3, 3], [3, 3, 3, 3, 5, 5], [1, 1, 3, 3, 3, 4],
    [1, 1, 4, 4, 4, 4], [5, 5, 5, 5, 5, 5], [1, 4, 4, 4, 4, 4], [1, 2, 4, 4, 4, 4],
    [2, 2, 2, 3, 3, 3], [1, 4, 4, 4, 4, 4], [2, 2, 4, 4, 4, 5], [3, 3, 3, 3, 3, 5],
    [1, 1, 1, 4, 5, 5], [1, 1, 1, 1, 1, 2], [2, 2, 4, 4, 4, 4], [1, 3, 3, 5, 5, 5],
    [5, 5, 5, 5, 5, 5], [2, 4, 4, 4, 4, 4], [2, 2, 4, 5, 5, 5], [1, 1, 4, 4, 4, 4],
    [1, 4, 4, 4, 4, 5], [2, 2, 2, 2, 2, 4], [1, 1, 1, 1, 5, 5], [2, 2, 4, 4, 4, 4],
    [1, 3, 3, 3, 3, 3], [5, 5, 5, 5, 5, 5],
]  # fmt: skip


def _diagnosis_counts() -> np.ndarray:
    x = np.array(DIAGNOSES)
    return np.stack([(x == c).sum(axis=1) for c in range(1, 6)], axis=1).astype(float)


def test_fleiss_1971_table_aggregates_to_published_totals():
    counts = _diagnosis_counts()
    assert counts.sum(axis=0).tolist() == [26, 26, 30, 55, 43]  # Fleiss (1971), table totals
    ref, _ = aggregate_raters(np.array(DIAGNOSES))
    assert np.array_equal(counts, ref)


def test_fleiss_1971_kappa_through_engine():
    # Coders are columns; in Fleiss (1971) the six psychiatrists differ between patients, which
    # Fleiss' kappa allows (it uses only the counts per patient and diagnosis).
    data = np.array(DIAGNOSES).T.tolist()
    result = agreement(_codings(data, {"diagnosis": "nominal"}, 5), replicates=100, seed=2)
    fleiss = result.variable("diagnosis").coefficients["fleiss_kappa"].estimate
    assert round(fleiss, 3) == 0.430  # Fleiss (1971): .430
    assert fleiss == pytest.approx(0.4302445, abs=5e-8)  # Fleiss (1971) formula, seven digits
    assert fleiss == pytest.approx(fleiss_kappa(_diagnosis_counts(), method="fleiss"), abs=1e-12)
    # With every coder coding every unit, Scott's pi in its multi-coder form is Fleiss' kappa.
    scott = result.variable("diagnosis").coefficients["scott_pi"].estimate
    assert scott == pytest.approx(fleiss, abs=1e-12)


def test_fleiss_1971_standard_error_z_and_category_kappas_through_engine():
    data = np.array(DIAGNOSES).T.tolist()
    v = agreement(_codings(data, {"diagnosis": "nominal"}, 5), replicates=100, seed=2).variable(
        "diagnosis"
    )
    fleiss = v.coefficients["fleiss_kappa"]
    assert v.fleiss_units == 30
    # z = kappa / SE_0, SE_0 from the Fleiss, Nee & Landis (1979) null variance.
    assert fleiss.z == pytest.approx(17.65183, abs=5e-5)
    assert fleiss.se == pytest.approx(0.4302445 / 17.65183, rel=1e-6)
    per_category = [v.category_agreement[code]["fleiss_kappa"] for code in range(1, 6)]
    assert np.round(per_category, 3).tolist() == [0.245, 0.245, 0.520, 0.471, 0.566]  # (memory)


def test_fleiss_1971_per_category_kappas():
    got = fleiss_category_kappas(_diagnosis_counts())
    published = [0.245, 0.245, 0.520, 0.471, 0.566]  # Fleiss (1971), per diagnosis (memory)
    assert np.round(got, 3).tolist() == published
    # Fleiss (1971) eq. 11: kappa_j = 1 - sum_i n_ij (m - n_ij) / (N m (m - 1) p_j q_j); the
    # overall kappa is the p_j q_j-weighted mean of the per-category kappas (Fleiss 1971).
    counts = _diagnosis_counts()
    p = counts.sum(axis=0) / counts.sum()
    weighted = float((got * p * (1 - p)).sum() / (p * (1 - p)).sum())
    assert weighted == pytest.approx(fleiss_kappa(counts), abs=1e-12)


def test_fleiss_1971_null_standard_error_and_z():
    counts = _diagnosis_counts()
    p = counts.sum(axis=0) / counts.sum()
    se0 = fleiss_null_se(p, n_units=30, raters=6)
    # Fleiss, Nee & Landis (1979), written out here: with q = 1 - p and N subjects rated by m
    # raters, var_0 = 2 / (N m (m - 1)) [(sum p q)^2 - sum p q (q - p)] / (sum p q)^2.
    q = 1 - p
    s = float((p * q).sum())
    var0 = 2 / (30 * 6 * 5) * (s**2 - float((p * q * (q - p)).sum())) / s**2
    assert se0 == pytest.approx(var0**0.5, rel=1e-12)
    assert se0 == pytest.approx(0.4302445 / 17.65183, rel=1e-6)
    z, p_value = z_test(0.4302445, se0)
    assert z == pytest.approx(17.65183, abs=5e-6)
    # Two-sided normal p-value 2 (1 - Phi(z)), about 1e-69: a number, not 0 (scipy as reference).
    assert p_value == pytest.approx(2 * norm.sf(z), rel=1e-9)
    assert 0 < p_value < 1e-60


# --------------------------------------------------------------------------------------------
# Fleiss' kappa, ten subjects x fourteen raters, five categories: the worked example of the
# encyclopedic article "Fleiss' kappa" (Wikipedia contributors), reproduced in statsmodels' test
# suite (`table0`, whose last column is the printed per-subject agreement P_i).
# Published: kappa 0.210 (statsmodels: 0.2099307), P-bar 0.378 and P_e 0.213 (memory).
# --------------------------------------------------------------------------------------------

TEN_SUBJECTS = [
    [0, 0, 0, 0, 14], [0, 2, 6, 4, 2], [0, 0, 3, 5, 6], [0, 3, 9, 2, 0], [2, 2, 8, 1, 1],
    [7, 7, 0, 0, 0], [3, 2, 6, 3, 0], [2, 5, 3, 2, 2], [6, 5, 2, 1, 0], [0, 2, 2, 3, 7],
]  # fmt: skip
TEN_SUBJECTS_P_I = [1.000, 0.253, 0.308, 0.440, 0.330, 0.462, 0.242, 0.176, 0.286, 0.286]


def _raters_from_counts(table: list[list[int]]) -> np.ndarray:
    """Units x raters category indices with each row's counts laid out rater by rater."""
    return np.array([np.repeat(np.arange(len(row)), row) for row in table])


def test_ten_subjects_fourteen_raters():
    x = _raters_from_counts(TEN_SUBJECTS)
    assert x.shape == (10, 14)
    plan = build_plan(x, Scale("categorical", "nominal", 5))
    kappa = plan.point("fleiss_kappa")
    assert round(kappa, 3) == 0.210  # published
    assert kappa == pytest.approx(fleiss_kappa(np.array(TEN_SUBJECTS)), abs=1e-12)
    # Per-subject agreement P_i = equal ordered pairs / all ordered pairs (printed column).
    equal, pairs = unit_agreeing_pairs(x)
    assert np.round(equal / pairs, 3).tolist() == TEN_SUBJECTS_P_I
    # Every subject has 14 ratings, so pairwise percent agreement is P-bar.
    assert round(plan.point("percent_agreement"), 3) == 0.378  # (memory)
    p_bar = plan.point("percent_agreement")
    p_e = (p_bar - kappa) / (1 - kappa)
    assert round(p_e, 3) == 0.213  # (memory)


# --------------------------------------------------------------------------------------------
# Cohen's kappa with its large-sample standard error, on a small 3 x 3 table [[0, 4, 1],
# [0, 8, 0], [0, 1, 5]] (a worked example of software documentation; its figures from memory):
# kappa 0.4842 (Cohen 1960), SE 0.1380; linear-weighted kappa 0.4701 (Cohen 1968), SE 0.1457.
# The SE is the non-null large-sample formula of Fleiss, Cohen & Everitt (1969), Psychological
# Bulletin 72(5), 323-327; every figure is also checked against statsmodels' cohens_kappa
# (kappa and std_kappa), whose implementation follows the same papers.
# --------------------------------------------------------------------------------------------

THREE_POINT_TABLE = [[0, 4, 1], [0, 8, 0], [0, 1, 5]]


def test_three_point_cohen_table_kappa_and_ase():
    kappa, se = cohen_kappa_table(THREE_POINT_TABLE)
    assert round(kappa, 4) == 0.4842  # Cohen (1960); from memory
    assert round(se, 4) == 0.1380  # Fleiss, Cohen & Everitt (1969); from memory
    ref = cohens_kappa(np.array(THREE_POINT_TABLE))
    assert kappa == pytest.approx(ref.kappa, abs=1e-12)
    assert se == pytest.approx(ref.std_kappa, abs=1e-12)


def test_three_point_weighted_kappa_and_ase():
    kappa, se = cohen_kappa_table(THREE_POINT_TABLE, "linear")
    assert round(kappa, 4) == 0.4701  # Cohen (1968), linear weights; from memory
    assert round(se, 4) == 0.1457  # Fleiss, Cohen & Everitt (1969); from memory
    ref = cohens_kappa(np.array(THREE_POINT_TABLE), weights=[0, 1, 2])
    assert kappa == pytest.approx(ref.kappa, abs=1e-12)
    assert se == pytest.approx(ref.std_kappa, abs=1e-12)


def test_three_point_table_through_engine_with_first_category_unused():
    # Coder B never uses category 1: the codebook's full three-point scale still counts.
    a, b = _pairs_from_table(THREE_POINT_TABLE)
    codings = _codings([list(a + 1), list(b + 1)], {"rating": "ordinal"}, 3)
    v = agreement(codings, replicates=100, seed=3).variable("rating")
    assert round(v.coefficients["cohen_kappa"].estimate, 4) == 0.4842  # as above
    assert round(v.coefficients["weighted_kappa_linear"].estimate, 4) == 0.4701  # as above
    quad = cohens_kappa(np.array(THREE_POINT_TABLE), wt="quadratic").kappa
    assert v.coefficients["weighted_kappa_quadratic"].estimate == pytest.approx(quad, abs=1e-12)


def test_three_point_table_standard_errors_through_engine():
    a, b = _pairs_from_table(THREE_POINT_TABLE)
    codings = _codings([list(a + 1), list(b + 1)], {"rating": "ordinal"}, 3)
    c = agreement(codings, replicates=100, seed=3).variable("rating").coefficients
    assert round(c["cohen_kappa"].se, 4) == 0.1380  # Fleiss, Cohen & Everitt (1969), as above
    assert round(c["weighted_kappa_linear"].se, 4) == 0.1457  # as above
    ref = cohens_kappa(np.array(THREE_POINT_TABLE), wt="quadratic")
    assert c["weighted_kappa_quadratic"].se == pytest.approx(ref.std_kappa, abs=1e-12)


def test_textbook_table_through_engine():
    # Two coders, 50 items, table [[20, 5], [10, 15]]: p_o .70, p_e .50, kappa .40 (memory);
    # the FCE (1969) SE 0.1269961 is checked in tests/test_stats_core.py.
    a, b = _pairs_from_table([[20, 5], [10, 15]])
    codings = _codings([list(a + 1), list(b + 1)], {"yes_no": "nominal"}, 2)
    v = agreement(codings, replicates=100, seed=4).variable("yes_no")
    assert v.coefficients["percent_agreement"].estimate == pytest.approx(0.70, abs=1e-12)
    assert v.coefficients["cohen_kappa"].estimate == pytest.approx(0.40, abs=1e-12)
    assert v.pairable_values == 100


# --------------------------------------------------------------------------------------------
# Artstein, R., & Poesio, M. (2008). Inter-coder agreement for computational linguistics.
# Computational Linguistics, 34(4), 555-596, Table 1 [[20, 20], [10, 50]]: kappa .348 (asserted
# in scikit-learn's tests), pi .341 and S .4 (memory). The core is checked in
# tests/test_stats_core.py; here the engine, alpha through the two-coder identity and AC1 by hand.
# --------------------------------------------------------------------------------------------


def test_artstein_poesio_table1_through_engine():
    a, b = _pairs_from_table([[20, 20], [10, 50]])
    codings = _codings([list(a + 1), list(b + 1)], {"label": "nominal"}, 2)
    c = agreement(codings, replicates=100, seed=5).variable("label").coefficients
    assert round(c["cohen_kappa"].estimate, 3) == 0.348
    assert round(c["scott_pi"].estimate, 3) == 0.341  # (memory)
    assert c["brennan_prediger"].estimate == pytest.approx(0.4, abs=1e-12)  # S (memory)
    assert c["pabak"].estimate == pytest.approx(0.4, abs=1e-12)  # 2 p_o - 1, p_o = .7
    # Two coders, complete data: 1 - alpha = (1 - pi) (2N - 1) / (2N), N = 100 units
    # (Krippendorff 2004, relation of alpha to Scott's pi).
    pi, alpha = c["scott_pi"].estimate, c["krippendorff_alpha"].estimate
    assert 1 - alpha == pytest.approx((1 - pi) * 199 / 200, abs=1e-12)
    # Gwet (2008) AC1: p_e = sum pi_k (1 - pi_k) / (q - 1); pi = (.35, .65).
    p_e = 2 * 0.35 * 0.65
    assert c["gwet_ac1"].estimate == pytest.approx((0.7 - p_e) / (1 - p_e), abs=1e-12)


# --------------------------------------------------------------------------------------------
# The prevalence paradox. Feinstein, A. R., & Cicchetti, D. V. (1990). High agreement but low
# kappa: I. The problems of two paradoxes. Journal of Clinical Epidemiology, 43(6), 543-549.
# Tables from memory: both have p_o = .85; kappa about .70 and .32. Gwet (2008) AC1 0.7007 and
# 0.8080 by its formula; PABAK (Byrt, Bishop & Carlin 1993) .70 for both.
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("table", "kappa", "ac1"),
    [([[40, 9], [6, 45]], 0.70, 0.7007), ([[80, 10], [5, 5]], 0.32, 0.8080)],
)
def test_prevalence_paradox_tables(table, kappa, ac1):
    a, b = _pairs_from_table(table)
    codings = _codings([list(a + 1), list(b + 1)], {"present": "nominal"}, 2)
    v = agreement(codings, replicates=200, seed=6).variable("present")
    c = v.coefficients
    assert c["percent_agreement"].estimate == pytest.approx(0.85, abs=1e-12)
    assert round(c["cohen_kappa"].estimate, 2) == kappa  # (memory)
    assert round(c["gwet_ac1"].estimate, 4) == ac1
    assert c["pabak"].estimate == pytest.approx(0.70, abs=1e-12)
    ref = cohens_kappa(np.array(table)).kappa
    assert c["cohen_kappa"].estimate == pytest.approx(ref, abs=1e-12)


def test_prevalence_paradox_is_flagged_in_words():
    # The skewed table: 85% agreement but alpha about .32 because "no" holds most values.
    a, b = _pairs_from_table([[80, 10], [5, 5]])
    codings = _codings([list(a + 1), list(b + 1)], {"present": "nominal"}, 2)
    v = agreement(codings, replicates=200, seed=6).variable("present")
    assert any("paradox" in note for note in v.notes)
    # The balanced table of the same p_o is not flagged.
    a, b = _pairs_from_table([[40, 9], [6, 45]])
    codings = _codings([list(a + 1), list(b + 1)], {"present": "nominal"}, 2)
    v = agreement(codings, replicates=200, seed=6).variable("present")
    assert not any("paradox" in note for note in v.notes)


@pytest.mark.parametrize(
    ("table", "p_pos", "p_neg"),
    [([[40, 9], [6, 45]], 80 / 95, 90 / 105), ([[80, 10], [5, 5]], 160 / 175, 10 / 25)],
)
def test_specific_agreement_per_category(table, p_pos, p_neg):
    # Cicchetti, D. V., & Feinstein, A. R. (1990). High agreement but low kappa: II. Resolving
    # the paradoxes. J. Clin. Epidemiol., 43(6), 551-558: p_pos = 2a / (2a + b + c) and
    # p_neg = 2d / (2d + b + c) for the table [[a, b], [c, d]]; on the skewed table p_neg falls
    # to .40 while p_pos stays high, which is where the low kappa comes from.
    a, b = _pairs_from_table(table)
    codings = _codings([list(a + 1), list(b + 1)], {"present": "nominal"}, 2)
    per_category = agreement(codings, replicates=0, seed=6).variable("present").category_agreement
    assert per_category[1]["specific_agreement"] == pytest.approx(p_pos, abs=1e-12)
    assert per_category[2]["specific_agreement"] == pytest.approx(p_neg, abs=1e-12)


# --------------------------------------------------------------------------------------------
# docs/coefficients.md documents every coefficient key and every reason the engine can give
# --------------------------------------------------------------------------------------------


def test_coefficients_doc_names_every_key_and_reason():
    doc = (Path(__file__).resolve().parents[1] / "docs" / "coefficients.md").read_text("utf-8")
    for key in COEFFICIENTS:
        assert f"`{key}`" in doc, key
    for reason in (*REASONS, THIN_DATA):
        assert f"`{reason}`" in doc, reason


def test_no_test_points_outside_the_repository():
    # A test reads only files of the repository (or its own temporary folders): no absolute path
    # to a machine's folders in any test module.
    tests = Path(__file__).resolve().parent
    roots = ("work", "home", "Users", "mnt", "opt", "srv")
    absolute = re.compile(r"""["'(\s]/(?:""" + "|".join(roots) + ")/")
    found = [
        f"{path.name}:{n}"
        for path in sorted(tests.glob("*.py"))
        for n, line in enumerate(path.read_text("utf-8").splitlines(), 1)
        if absolute.search(line)
    ]
    assert not found, found
