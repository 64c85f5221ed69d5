"""Published values and reference-library cross-checks for the pure agreement core."""

from __future__ import annotations

import krippendorff
import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import cohens_kappa, fleiss_kappa

from coderel.stats.bootstrap import evaluate_plans, unit_weights
from coderel.stats.kappa import cohen_kappa_table, fleiss_from_sums
from coderel.stats.plan import Scale, build_plan

N = None
# Krippendorff, K. (2011). Computing Krippendorff's Alpha-Reliability. Departmental Papers (ASC) 43:
# four observers (rows), twelve units (columns), missing values.
K2011 = [
    [1, 2, 3, 3, 2, 1, 4, 1, 2, N, N, N],
    [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, N, 3],
    [N, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, N],
    [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, N],
]


def _x(data):
    return np.array([[-1 if v is None else v - 1 for v in row] for row in data]).T


@pytest.mark.parametrize(
    ("level", "expected"),
    [
        ("nominal", 113 / 152),  # Krippendorff (2011): .743, exactly 113/152
        ("ordinal", 0.815),  # Krippendorff (2011): .815
        ("interval", 0.849),  # Krippendorff (2011): .849 (memory; 951/1120)
        ("ratio", 0.797),  # Krippendorff (2011): .797
    ],
)
def test_krippendorff_2011_published(level, expected):
    x = _x(K2011)
    if level in ("nominal", "ordinal"):
        scale = Scale("categorical", level, 5)
    else:
        scale = Scale("numeric", level, 5, values=np.arange(1.0, 6.0))
    got = build_plan(x, scale).point("krippendorff_alpha")
    assert got == pytest.approx(expected, abs=5e-4)
    ref = krippendorff.alpha(
        reliability_data=np.array(K2011, dtype=float),
        level_of_measurement=level,
        value_domain=[1, 2, 3, 4, 5],
    )
    assert got == pytest.approx(ref, abs=1e-9)


def test_cohen_textbook_table():
    # Textbook 2x2 table [[20, 5], [10, 15]]: kappa .40; FCE (1969) SE 0.1269961 (statsmodels).
    k, se = cohen_kappa_table([[20, 5], [10, 15]])
    assert k == pytest.approx(0.4, abs=1e-12)
    assert se == pytest.approx(0.1269961, abs=1e-7)
    ref = cohens_kappa(np.array([[20, 5], [10, 15]]))
    assert se == pytest.approx(ref.std_kappa, abs=1e-12)


def test_artstein_poesio_table1():
    # Artstein & Poesio (2008), Table 1: kappa .348, pi .341 (memory), S .4 (memory).
    t = np.array([[20, 20], [10, 50]])
    a = np.repeat([0, 0, 1, 1], t.ravel())
    b = np.repeat([0, 1, 0, 1], t.ravel())
    plan = build_plan(np.column_stack([a, b]), Scale("categorical", "nominal", 2))
    assert plan.point("cohen_kappa") == pytest.approx(0.348, abs=5e-4)
    assert plan.point("scott_pi") == pytest.approx(0.341, abs=5e-4)
    assert plan.point("brennan_prediger") == pytest.approx(0.4, abs=1e-12)


def test_fleiss_wikipedia_table():
    # 10 subjects x 14 raters, 5 categories; statsmodels fleiss_kappa: 0.2099307.
    t = np.array(
        [[0, 0, 0, 0, 14], [0, 2, 6, 4, 2], [0, 0, 3, 5, 6], [0, 3, 9, 2, 0], [2, 2, 8, 1, 1],
         [7, 7, 0, 0, 0], [3, 2, 6, 3, 0], [2, 5, 3, 2, 2], [6, 5, 2, 1, 0], [0, 2, 2, 3, 7]],
        dtype=float,
    )  # fmt: skip
    k = fleiss_from_sums(np.array([10.0]), t.sum(0)[None], np.array([(t**2).sum()]), 14)[0]
    assert k == pytest.approx(fleiss_kappa(t), abs=1e-12)
    assert k == pytest.approx(0.2099307, abs=1e-7)


def test_random_crosschecks_against_references():
    rng = np.random.default_rng(7)
    for _ in range(20):
        k = int(rng.integers(2, 6))
        a = rng.integers(0, k, 60)
        b = np.where(rng.random(60) < 0.6, a, rng.integers(0, k, 60))
        x = np.column_stack([a, b])
        plan = build_plan(x, Scale("categorical", "ordinal", k))
        labels = list(range(k))
        assert plan.point("cohen_kappa") == pytest.approx(
            cohen_kappa_score(a, b, labels=labels), abs=1e-9
        )
        for w in ("linear", "quadratic"):
            got = plan.point(f"weighted_kappa_{w}")
            ref = cohen_kappa_score(a, b, labels=labels, weights=w)
            if np.isfinite(got):
                assert got == pytest.approx(ref, abs=1e-9)
        xm = np.column_stack([a, b, rng.integers(0, k, 60)])
        xm[rng.random(xm.shape) < 0.1] = -1
        data = np.where(xm >= 0, xm, np.nan).T
        for level in ("nominal", "ordinal"):
            got = build_plan(xm, Scale("categorical", level, k)).point("krippendorff_alpha")
            ref = krippendorff.alpha(
                reliability_data=data, level_of_measurement=level, value_domain=labels
            )
            assert got == pytest.approx(ref, abs=1e-9)


def test_full_weight_row_reproduces_point_and_seed_is_stable():
    x = _x(K2011)
    plan = build_plan(x, Scale("categorical", "ordinal", 5))
    w = unit_weights(x.shape[0], 50, seed=3)
    ones = np.vstack([np.ones(x.shape[0]), w])
    res = evaluate_plans([plan], ones)[0]["krippendorff_alpha"]
    assert res.replicates[0] == res.point
    again = evaluate_plans([plan], np.vstack([np.ones(x.shape[0]), unit_weights(12, 50, 3)]))
    assert np.array_equal(again[0]["krippendorff_alpha"].replicates, res.replicates, equal_nan=True)
