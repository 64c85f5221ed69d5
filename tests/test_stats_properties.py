"""Cross-checks on random data (hypothesis) against reference libraries and published formulas.

Oracles, each outside the project:

* statsmodels ``cohens_kappa`` (kappa and ``std_kappa``, the large-sample SE of Fleiss, Cohen &
  Everitt 1969) and ``fleiss_kappa(method="fleiss")`` (Fleiss 1971);
* scikit-learn ``cohen_kappa_score`` with ``labels=`` fixed to the codebook's categories and
  ``weights=None | "linear" | "quadratic"`` (Cohen 1960, 1968);
* the ``krippendorff`` package (GPL, tests only) at four levels with missing values, with
  ``value_domain`` set to the codebook's categories for nominal and ordinal data;
* hand formulas written from the published definitions: Scott (1955), Brennan & Prediger (1981),
  Gwet (2008) AC1 and Gwet (2014) AC2 with his ordinal weights, Byrt, Bishop & Carlin (1993).

The category list always comes from a codebook of ``k`` categories, some of which may go unused.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import krippendorff
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from sklearn.metrics import cohen_kappa_score, confusion_matrix
from statsmodels.stats.inter_rater import cohens_kappa, fleiss_kappa

from coderel.agree import agreement
from coderel.codebook import Category, Codebook, Condition, Variable
from coderel.codebook.load import load_codebook
from coderel.codings import Codings
from coderel.io.read import read_codings
from coderel.stats.counts import confusion_table, value_counts
from coderel.stats.kappa import agreement_weights, cohen_kappa_table
from coderel.stats.plan import Scale, build_plan

TOL = 1e-9
FAST = settings(deadline=None, max_examples=50)
SLOW = settings(deadline=None, max_examples=20)  # for tests that go through agreement()


# --------------------------------------------------------------------------------------------
# strategies
# --------------------------------------------------------------------------------------------


@st.composite
def two_coders(draw, complete: bool = True):
    """(k, x): k codebook categories and a units x 2 matrix of indices (-1 = no value).

    Coder B copies coder A with a drawn probability, so agreement ranges from chance to perfect;
    the categories used may be fewer than ``k`` (unused codebook categories).
    """
    k = draw(st.integers(2, 6))
    n = draw(st.integers(4, 40))
    used = draw(st.integers(1, k))
    a = np.array(draw(st.lists(st.integers(0, used - 1), min_size=n, max_size=n)))
    other = np.array(draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n)))
    copy = np.array(draw(st.lists(st.booleans(), min_size=n, max_size=n)))
    b = np.where(copy, a, other)
    x = np.column_stack([a, b])
    if not complete:
        holes = np.array(draw(st.lists(st.integers(0, 5), min_size=2 * n, max_size=2 * n)))
        x = np.where(holes.reshape(n, 2) == 0, -1, x)
    return k, x


@st.composite
def many_coders(draw, min_coders: int = 2, max_coders: int = 5, missing: bool = True):
    """(k, x): units x coders indices with shared true categories plus noise, some missing."""
    k = draw(st.integers(2, 5))
    n = draw(st.integers(3, 30))
    c = draw(st.integers(min_coders, max_coders))
    seed = draw(st.integers(0, 2**32 - 1))
    noise = draw(st.sampled_from([0.0, 0.2, 0.5, 1.0]))
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, k, n)
    x = np.where(rng.random((n, c)) < noise, rng.integers(0, k, (n, c)), truth[:, None])
    if missing:
        x = np.where(rng.random((n, c)) < draw(st.sampled_from([0.0, 0.1, 0.3])), -1, x)
    return k, x


def _finite(value: float) -> bool:
    return value is not None and bool(np.isfinite(value))


def _quiet(fn, *args, **kwargs):
    """Call a reference function whose degenerate cases emit numpy warnings (errors here)."""
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        return fn(*args, **kwargs)


# --------------------------------------------------------------------------------------------
# Cohen's kappa, plain and weighted
# --------------------------------------------------------------------------------------------


@FAST
@given(two_coders())
def test_cohen_kappa_matches_sklearn_and_statsmodels(data):
    k, x = data
    a, b = x[:, 0], x[:, 1]
    plan = build_plan(x, Scale("categorical", "ordinal", k))
    labels = list(range(k))  # the codebook's full list, used or not
    table = confusion_table(a, b, k)
    for weights, name in ((None, "cohen_kappa"), ("linear", "weighted_kappa_linear")):
        got = plan.point(name)
        if not _finite(got):
            # Undefined exactly when both coders used one and the same category.
            assert len(set(a) | set(b)) == 1
            continue
        ref = cohen_kappa_score(a, b, labels=labels, weights=weights)
        assert got == pytest.approx(ref, abs=TOL)
    got_q = plan.point("weighted_kappa_quadratic")
    if _finite(got_q):
        ref_q = cohen_kappa_score(a, b, labels=labels, weights="quadratic")
        assert got_q == pytest.approx(ref_q, abs=TOL)
        sm_q = _quiet(cohens_kappa, table, wt="quadratic")
        assert got_q == pytest.approx(sm_q.kappa, abs=TOL)


@FAST
@given(two_coders(), st.sampled_from(["identity", "linear", "quadratic"]))
def test_cohen_table_and_large_sample_se_match_statsmodels(data, weights):
    k, x = data
    table = confusion_table(x[:, 0], x[:, 1], k)
    kappa, se = cohen_kappa_table(table, weights)
    wt = {"identity": None, "linear": "linear", "quadratic": "quadratic"}[weights]
    if kappa is None:
        assert len(set(x.ravel())) == 1
        return
    ref = _quiet(cohens_kappa, table, wt=wt) if wt else _quiet(cohens_kappa, table)
    assert kappa == pytest.approx(ref.kappa, abs=TOL)
    # Compare variances: where the variance is rounding noise (kappa fixed by a constant coder),
    # square roots of noise differ by more than 1e-9 while the variances agree; that noise reaches
    # a few 1e-12 on long tables (statsmodels' -5.0e-12 against an exact 0, one coder constant),
    # so the variances are compared to the 1e-10 below which the standard errors are not.
    assert se**2 == pytest.approx(ref.var_kappa, abs=1e-10)
    if ref.var_kappa > 1e-10:
        assert se == pytest.approx(ref.std_kappa, abs=TOL)
    # Same kappa from the plan over units (the two must agree).
    name = {"identity": "cohen_kappa", "linear": "weighted_kappa_linear"}.get(
        weights, "weighted_kappa_quadratic"
    )
    assert build_plan(x, Scale("categorical", "ordinal", k)).point(name) == pytest.approx(
        kappa, abs=TOL
    )


@FAST
@given(two_coders(complete=False))
def test_cohen_kappa_symmetric_and_uses_units_coded_by_both(data):
    k, x = data
    scale = Scale("categorical", "nominal", k)
    got = build_plan(x, scale).point("cohen_kappa")
    swapped = build_plan(x[:, ::-1], scale).point("cohen_kappa")
    both = (x >= 0).all(axis=1)
    if not _finite(got):
        assert not _finite(swapped)
        return
    assert got == pytest.approx(swapped, abs=TOL)
    ref = cohen_kappa_score(x[both, 0], x[both, 1], labels=list(range(k)))
    assert got == pytest.approx(ref, abs=TOL)


# --------------------------------------------------------------------------------------------
# Fleiss' kappa
# --------------------------------------------------------------------------------------------


@FAST
@given(many_coders(max_coders=6))
def test_fleiss_kappa_matches_statsmodels_on_units_with_the_modal_number_of_values(data):
    # Fleiss (1971) needs the same number of ratings per subject, not the same raters: the units
    # kept are those with the most common number m >= 2 of values (on a tie, the larger m).
    k, x = data
    got = build_plan(x, Scale("categorical", "nominal", k)).point("fleiss_kappa")
    m = (x >= 0).sum(axis=1)
    sizes = sorted({int(v) for v in m if v >= 2}, key=lambda v: (int((m == v).sum()), v))
    kept = m == (sizes[-1] if sizes else -1)
    counts = value_counts(x[kept], k)
    if not kept.any() or (counts.sum(axis=0) == counts.sum()).any():
        assert not _finite(got)  # no unit with two values, or one category only: undefined
        return
    ref = fleiss_kappa(counts, method="fleiss")
    assert got == pytest.approx(ref, abs=TOL)


# --------------------------------------------------------------------------------------------
# Krippendorff's alpha at four levels, with missing values
# --------------------------------------------------------------------------------------------


def _reliability_data(x: np.ndarray, values: np.ndarray | None = None) -> np.ndarray:
    """Coders x units floats for the krippendorff package (nan = missing)."""
    mapped = x.astype(float) if values is None else np.where(x >= 0, values[np.maximum(x, 0)], 0)
    return np.where(x >= 0, mapped, np.nan).T


def _pairable_distinct(x: np.ndarray) -> int:
    pairable = (x >= 0).sum(axis=1) >= 2
    return len(set(x[pairable].ravel()) - {-1})


@FAST
@given(many_coders(), st.sampled_from(["nominal", "ordinal"]))
def test_alpha_categorical_matches_krippendorff_package(data, level):
    k, x = data
    got = build_plan(x, Scale("categorical", level, k)).point("krippendorff_alpha")
    if _pairable_distinct(x) < 2:
        assert not _finite(got)  # no variation among pairable values
        return
    ref = krippendorff.alpha(
        reliability_data=_reliability_data(x),
        level_of_measurement=level,
        value_domain=list(range(k)),  # the codebook's ordered scale, unused categories included
    )
    assert got == pytest.approx(ref, abs=TOL)


@FAST
@given(
    many_coders(),
    st.sampled_from(["interval", "ratio"]),
    st.lists(st.integers(0, 500), min_size=5, max_size=5, unique=True),
)
def test_alpha_numeric_matches_krippendorff_package(data, level, numbers):
    _k, x = data
    pool = np.sort(np.array(numbers, dtype=float)) / 4.0  # 0 at times (ratio: 0 and 0 -> 0)
    assume((x >= 0).any())
    as_number = np.where(x >= 0, pool[np.maximum(x, 0)], np.nan)  # units x coders numbers
    # Index into the distinct observed numbers, as coderel.agree does.
    observed = np.unique(as_number[x >= 0])
    index = np.where(x >= 0, np.searchsorted(observed, np.nan_to_num(as_number)), -1)
    scale = Scale("numeric", level, len(observed), values=observed)
    got = build_plan(index, scale).point("krippendorff_alpha")
    if _pairable_distinct(index) < 2:
        assert not _finite(got)
        return
    ref = krippendorff.alpha(reliability_data=as_number.T, level_of_measurement=level)
    assert got == pytest.approx(ref, abs=TOL)


# --------------------------------------------------------------------------------------------
# Scott, Brennan-Prediger, Gwet AC1/AC2 and PABAK from their published definitions (two coders)
# --------------------------------------------------------------------------------------------


@FAST
@given(two_coders(complete=False))
def test_chance_corrected_family_matches_hand_formulas(data):
    k, x = data
    both = (x >= 0).all(axis=1)
    assume(both.sum() >= 1)
    plan = build_plan(x, Scale("categorical", "ordinal", k))
    a, b = x[both, 0], x[both, 1]
    n = len(a)
    p = np.zeros((k, k))
    np.add.at(p, (a, b), 1.0 / n)
    # Category shares from every coded value, a unit's only value included (Gwet 2014,
    # *Handbook of Inter-Rater Reliability*, 4th ed., ch. 2, raw-data form; from memory):
    # pi_k = mean over units with a value of r_ik / r_i. With no missing value this is Scott's
    # (1955) mean of the two coders' margins.
    coded = (x >= 0).any(axis=1)
    per_unit = value_counts(x[coded], k)
    pi = (per_unit / per_unit.sum(axis=1, keepdims=True)).mean(axis=0)
    p_o = float(np.trace(p))

    def cc(p_obs: float, p_e: float) -> float:
        return (p_obs - p_e) / (1 - p_e) if abs(1 - p_e) > 1e-12 else float("nan")

    expect = {
        "percent_agreement": p_o,
        "scott_pi": cc(p_o, float((pi**2).sum())),  # Scott (1955)
        "brennan_prediger": cc(p_o, 1.0 / k),  # Brennan & Prediger (1981), q = k from codebook
        "gwet_ac1": cc(p_o, float((pi * (1 - pi)).sum()) / (k - 1)),  # Gwet (2008)
    }
    # Gwet (2014) AC2 with ordinal weights: p_o,w = sum w_kl p_kl;
    # p_e = T_w / (q (q - 1)) sum pi_k (1 - pi_k), T_w the sum of all weights.
    w = agreement_weights(k, "gwet-ordinal")
    expect["gwet_ac2"] = cc(
        float((w * p).sum()), w.sum() / (k * (k - 1)) * float((pi * (1 - pi)).sum())
    )
    if k == 2:
        expect["pabak"] = 2 * p_o - 1  # Byrt, Bishop & Carlin (1993)
    else:
        assert "pabak" not in plan.formulas
    for name, value in expect.items():
        got = plan.point(name)
        if np.isfinite(value):
            assert got == pytest.approx(value, abs=TOL), name
        else:
            assert not np.isfinite(got), name


def test_gwet_ordinal_weights_follow_published_definition():
    # Gwet (2014), ordinal weights: w_kl = 1 - M(k, l) / M_max, M(k, l) = C(|k - l| + 1, 2)
    # for k != l (memory). Five categories: M = 1, 3, 6, 10 for distances 1..4, M_max = 10.
    w = agreement_weights(5, "gwet-ordinal")
    assert np.diag(w).tolist() == [1.0] * 5
    assert [w[0, d] for d in range(1, 5)] == pytest.approx([0.9, 0.7, 0.4, 0.0], abs=1e-12)


# --------------------------------------------------------------------------------------------
# properties
# --------------------------------------------------------------------------------------------

CATEGORICAL_NAMES = (
    "percent_agreement",
    "krippendorff_alpha",
    "fleiss_kappa",
    "cohen_kappa",
    "light_kappa",
    "scott_pi",
    "brennan_prediger",
    "gwet_ac1",
    "gwet_ac2",
    "weighted_kappa_linear",
    "weighted_kappa_quadratic",
    "pabak",
)


@FAST
@given(many_coders(max_coders=4, missing=False), st.sampled_from(["nominal", "ordinal"]))
def test_perfect_agreement_gives_one(data, level):
    k, x = data
    x = np.repeat(x[:, :1], x.shape[1], axis=1)  # every coder gives the first coder's value
    assume(len(np.unique(x)) >= 2)
    plan = build_plan(x, Scale("categorical", level, k))
    for name in CATEGORICAL_NAMES:
        if name in plan.formulas:
            assert plan.point(name) == pytest.approx(1.0, abs=TOL), name
    numbers = np.linspace(1.0, 9.0, k)
    for lvl in ("interval", "ratio"):
        got = build_plan(x, Scale("numeric", lvl, k, values=numbers)).point("krippendorff_alpha")
        assert got == pytest.approx(1.0, abs=TOL)


def _points(plan) -> dict[str, float]:
    return {name: plan.point(name) for name in plan.formulas}


def _same(a: dict[str, float], b: dict[str, float]) -> None:
    assert a.keys() == b.keys()
    for name in a:
        if np.isfinite(a[name]):
            assert b[name] == pytest.approx(a[name], abs=TOL), name
        else:
            assert not np.isfinite(b[name]), name


@FAST
@given(many_coders(), st.sampled_from(["nominal", "ordinal"]), st.integers(0, 2**32 - 1))
def test_permuting_units_and_coders_changes_nothing(data, level, seed):
    k, x = data
    rng = np.random.default_rng(seed)
    scale = Scale("categorical", level, k)
    base = _points(build_plan(x, scale))
    _same(base, _points(build_plan(x[rng.permutation(x.shape[0])], scale)))
    shuffled = _points(build_plan(x[:, rng.permutation(x.shape[1])], scale))
    # Cohen's kappa of coders (A, B) is symmetric, and every other coefficient pools coders.
    _same(base, shuffled)


@FAST
@given(many_coders(), st.integers(0, 2**32 - 1))
def test_relabelling_nominal_categories_changes_nothing(data, seed):
    k, x = data
    relabel = np.random.default_rng(seed).permutation(k)
    y = np.where(x >= 0, relabel[np.maximum(x, 0)], -1)
    scale = Scale("categorical", "nominal", k)
    _same(_points(build_plan(x, scale)), _points(build_plan(y, scale)))


# --------------------------------------------------------------------------------------------
# undefined cases through the public engine: no number, a reason, never a crash
# --------------------------------------------------------------------------------------------


def _codings(x: np.ndarray, k: int, level: str) -> Codings:
    var = Variable("v", level, categories=tuple(Category(i + 1, f"c{i + 1}") for i in range(k)))
    cb = Codebook(title="undefined cases", variables=(var,))
    records = [
        {"unit": f"u{u}", "coder": f"c{c}", "variable": "v", "value": int(x[u, c]) + 1}
        for u in range(x.shape[0])
        for c in range(x.shape[1])
        if x[u, c] >= 0
    ]
    return Codings.from_records(cb, records)


@SLOW
@given(
    st.integers(1, 4),
    st.integers(2, 4),
    st.integers(1, 15),
    st.sampled_from(["nominal", "ordinal"]),
    st.sampled_from(["no-variation", "one-value-per-unit"]),
)
def test_undefined_cases_give_none_with_a_reason(k, coders, units, level, case):
    if case == "no-variation":
        x = np.zeros((units, coders), dtype=int)  # every value is the first category
    else:
        x = np.full((units, coders), -1)
        x[np.arange(units), np.arange(units) % coders] = np.arange(units) % k
    v = agreement(_codings(x, k, level), replicates=50, seed=1).variable("v")
    alpha = v.coefficients["krippendorff_alpha"]
    assert alpha is not None
    assert alpha.estimate is None
    assert alpha.reason  # a machine-readable reason, not an empty string
    assert alpha.ci is None
    for name, est in v.coefficients.items():
        if est is not None and est.estimate is None:
            assert est.reason, name
            assert est.ci is None, name
        elif est is not None:
            assert np.isfinite(est.estimate), name
    assert v.verdict == "undefined"


# --------------------------------------------------------------------------------------------
# more than two coders, with missing values
# --------------------------------------------------------------------------------------------


@FAST
@given(many_coders(min_coders=3))
def test_light_kappa_is_mean_of_pairwise_sklearn_kappas(data):
    # Light (1971): the mean of Cohen's kappa over all coder pairs, each pair on its common units.
    k, x = data
    got = build_plan(x, Scale("categorical", "nominal", k)).point("light_kappa")
    kappas = []
    for i in range(x.shape[1]):
        for j in range(i + 1, x.shape[1]):
            both = (x[:, i] >= 0) & (x[:, j] >= 0)
            a, b = x[both, i], x[both, j]
            if both.any() and len(set(a) | set(b)) > 1:
                kappas.append(cohen_kappa_score(a, b, labels=list(range(k))))
    if not kappas:
        assert not _finite(got)
        return
    assert got == pytest.approx(float(np.mean(kappas)), abs=TOL)


@FAST
@given(many_coders(min_coders=3), st.sampled_from(["nominal", "ordinal"]))
def test_multi_coder_family_matches_gwet_formulas_unit_by_unit(data, level):
    # Gwet (2014), Handbook of Inter-Rater Reliability, 4th ed., ch. 2-3 (memory), with r_ik the
    # coders giving category k to unit i and r_i their sum:
    # p_a = mean over units with r_i >= 2 of sum_k r_ik (r*_ik - 1) / (r_i (r_i - 1)),
    #   r*_ik = sum_l w_kl r_il (identity weights: r*_ik = r_ik);
    # pi_k = mean over units with r_i >= 1 of r_ik / r_i. Written here as plain loops.
    k, x = data
    plan = build_plan(x, Scale("categorical", level, k))
    w_ord = agreement_weights(k, "gwet-ordinal")

    def p_a(weights: np.ndarray) -> float:
        terms = []
        for row in x:
            r = np.array([(row == c).sum() for c in range(k)], dtype=float)
            if r.sum() >= 2:
                star = weights @ r
                terms.append(float((r * (star - 1)).sum() / (r.sum() * (r.sum() - 1))))
        return float(np.mean(terms)) if terms else float("nan")

    shares = [
        np.array([(row == c).sum() for c in range(k)]) / (row >= 0).sum()
        for row in x
        if (row >= 0).any()
    ]
    pi = np.mean(shares, axis=0)

    def cc(p_obs: float, p_e: float) -> float:
        ok = np.isfinite(p_obs) and abs(1 - p_e) > 1e-12
        return (p_obs - p_e) / (1 - p_e) if ok else float("nan")

    pa = p_a(np.eye(k))
    spread = float((pi * (1 - pi)).sum())
    expect = {
        "scott_pi": cc(pa, float((pi**2).sum())),
        "brennan_prediger": cc(pa, 1.0 / k),
        "gwet_ac1": cc(pa, spread / (k - 1)),
    }
    if level == "ordinal":
        expect["gwet_ac2"] = cc(p_a(w_ord), w_ord.sum() / (k * (k - 1)) * spread)
    for name, value in expect.items():
        got = plan.point(name)
        if np.isfinite(value):
            assert got == pytest.approx(value, abs=TOL), name
        else:
            assert not np.isfinite(got), name


@FAST
@given(many_coders(min_coders=3))
def test_percent_agreement_pools_agreeing_pairs(data):
    # Pairwise percent agreement: agreeing ordered pairs of values within units over all ordered
    # pairs (units with m values give m (m - 1) pairs), counted here by brute force.
    k, x = data
    agree = pairs = 0
    for row in x:
        vals = row[row >= 0]
        for i in range(len(vals)):
            for j in range(len(vals)):
                if i != j:
                    pairs += 1
                    agree += vals[i] == vals[j]
    got = build_plan(x, Scale("categorical", "nominal", k)).point("percent_agreement")
    if pairs == 0:
        assert not _finite(got)
    else:
        assert got == pytest.approx(agree / pairs, abs=TOL)


# --------------------------------------------------------------------------------------------
# multi-select variables through the engine: Jaccard-distance alpha and binary alpha per category
# --------------------------------------------------------------------------------------------


@st.composite
def code_sets(draw):
    """Coders x units of code sets over codes 1..4 (None = no value), some sets empty."""
    n = draw(st.integers(3, 15))
    c = draw(st.integers(2, 4))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    truth = rng.random((n, 4)) < 0.4
    flips = rng.random((c, n, 4)) < draw(st.sampled_from([0.0, 0.1, 0.3]))
    chosen = truth[None] ^ flips
    gone = rng.random((c, n)) < 0.15
    return [
        [None if gone[i, u] else tuple(int(k + 1) for k in np.flatnonzero(chosen[i, u]))
         for u in range(n)]
        for i in range(c)
    ]  # fmt: skip


def _multi_codings(data) -> Codings:
    var = Variable(
        "factors",
        "nominal",
        multiple=True,
        categories=tuple(Category(i, f"f{i}") for i in range(1, 5)),
    )
    cb = Codebook(title="multi-select", variables=(var,))
    records = [
        {"unit": f"u{u}", "coder": f"c{i}", "variable": "factors", "value": row[u]}
        for i, row in enumerate(data)
        for u in range(len(row))
    ]
    return Codings.from_records(cb, records)


def _jaccard(a: frozenset, b: frozenset) -> float:
    union = a | b
    return 1.0 - len(a & b) / len(union) if union else 0.0


@SLOW
@given(code_sets())
def test_multi_select_alpha_matches_krippendorff_with_jaccard_metric(data):
    v = agreement(_multi_codings(data), replicates=0, seed=1).variable("factors")
    got = v.coefficients["krippendorff_alpha"].estimate
    sets = sorted({frozenset(s) for row in data for s in row if s is not None}, key=sorted)
    index = {s: i for i, s in enumerate(sets)}
    rel = np.array(
        [[np.nan if s is None else index[frozenset(s)] for s in row] for row in data], dtype=float
    )
    table = np.array([[_jaccard(a, b) for b in sets] for a in sets])

    def metric(v1, v2, i1, i2, n_v, dtype=np.float64):  # krippendorff's callable-metric protocol
        return table[i1, i2].astype(dtype)

    pairable = (~np.isnan(rel)).sum(axis=0) >= 2
    if len(sets) < 2 or len(set(rel[:, pairable][~np.isnan(rel[:, pairable])])) < 2:
        assert got is None
        return
    ref = krippendorff.alpha(
        reliability_data=rel, level_of_measurement=metric, value_domain=list(range(len(sets)))
    )
    assert got == pytest.approx(ref, abs=TOL)


@SLOW
@given(code_sets())
def test_multi_select_alpha_chosen_or_not_per_category_matches_krippendorff(data):
    v = agreement(_multi_codings(data), replicates=0, seed=1).variable("factors")
    for code in range(1, 5):
        rel = np.array([[np.nan if s is None else float(code in s) for s in row] for row in data])
        got = v.category_agreement[code]["alpha_chosen_or_not"]
        pairable = (~np.isnan(rel)).sum(axis=0) >= 2
        if len(set(rel[:, pairable][~np.isnan(rel[:, pairable])])) < 2:
            assert got is None, code
            continue
        ref = krippendorff.alpha(
            reliability_data=rel, level_of_measurement="nominal", value_domain=[0.0, 1.0]
        )
        assert got == pytest.approx(ref, abs=TOL), code


# --------------------------------------------------------------------------------------------
# skip logic: the variable on the units where it applies, and agreement on applicability itself
# --------------------------------------------------------------------------------------------


@SLOW
@given(st.integers(4, 25), st.integers(2, 4), st.integers(0, 2**32 - 1))
def test_applies_when_rows_match_krippendorff(n, c, seed):
    rng = np.random.default_rng(seed)
    contact = Variable("contact", "nominal", categories=(Category(1, "yes"), Category(2, "no")))
    injury = Variable(
        "injury",
        "ordinal",
        categories=(Category(1, "none"), Category(2, "minor"), Category(3, "serious")),
        applies_when=Condition("contact", (1,)),
    )
    cb = Codebook(title="skip logic", variables=(contact, injury))
    truth = rng.integers(1, 3, n)
    said = np.where(rng.random((c, n)) < 0.8, truth, 3 - truth).astype(float)
    said[rng.random((c, n)) < 0.1] = np.nan  # condition not coded: applicability unknown
    hurt = rng.integers(1, 4, (c, n)).astype(float)
    records = []
    for i in range(c):
        for u in range(n):
            cv = None if np.isnan(said[i, u]) else int(said[i, u])
            iv = int(hurt[i, u]) if cv == 1 else None
            records.append({"unit": f"u{u}", "coder": f"c{i}", "variable": "contact", "value": cv})
            records.append({"unit": f"u{u}", "coder": f"c{i}", "variable": "injury", "value": iv})
    result = agreement(Codings.from_records(cb, records), replicates=0, seed=1)

    def ref(rel: np.ndarray, level: str, domain: list[float]) -> float | None:
        pairable = (~np.isnan(rel)).sum(axis=0) >= 2
        if len(set(rel[:, pairable][~np.isnan(rel[:, pairable])])) < 2:
            return None
        return krippendorff.alpha(rel, level_of_measurement=level, value_domain=domain)

    applies = np.where(np.isnan(said), np.nan, (said == 1).astype(float))
    expect = ref(applies, "nominal", [0.0, 1.0])
    got = result.variable("injury [applies]").coefficients["krippendorff_alpha"].estimate
    assert (got is None) == (expect is None)
    if expect is not None:
        assert got == pytest.approx(expect, abs=TOL)
    # The variable itself: each coder's values only where that coder's own contact is "yes".
    expect = ref(np.where(said == 1, hurt, np.nan), "ordinal", [1.0, 2.0, 3.0])
    got = result.variable("injury").coefficients["krippendorff_alpha"].estimate
    assert (got is None) == (expect is None)
    if expect is not None:
        assert got == pytest.approx(expect, abs=TOL)


@FAST
@given(
    many_coders(missing=True),
    st.sampled_from([1e-12, 1e-8, 1e-3, 1.0, 1e6, 1e12]),
    st.floats(-1e3, 1e3),
)
def test_interval_alpha_does_not_depend_on_the_unit_of_measurement(data, unit, shift):
    # Interval alpha is invariant under linear changes of scale (Krippendorff 2004): values a
    # hundred-millionth apart are not "no variation". Reference: the krippendorff package.
    _k, x = data
    assume(_pairable_distinct(x) >= 2)
    as_number = np.where(x >= 0, (x + shift) * unit, np.nan)
    observed = np.unique(as_number[x >= 0])
    index = np.where(x >= 0, np.searchsorted(observed, np.nan_to_num(as_number)), -1)
    scale = Scale("numeric", "interval", len(observed), values=observed)
    got = build_plan(index, scale).point("krippendorff_alpha")
    ref = krippendorff.alpha(reliability_data=as_number.T, level_of_measurement="interval")
    assert got == pytest.approx(ref, abs=1e-8)


@FAST
@given(many_coders(missing=True), st.sampled_from([0.0, 1e3, 1e6, 1e7, 1e9]))
def test_ratio_alpha_with_large_numbers_is_not_taken_for_no_variation(data, base):
    # Ratio distances between large numbers are tiny but not zero; alpha stays defined and equal
    # to the krippendorff package's value.
    _k, x = data
    assume(_pairable_distinct(x) >= 2)
    as_number = np.where(x >= 0, base + 1.0 + x, np.nan)
    observed = np.unique(as_number[x >= 0])
    index = np.where(x >= 0, np.searchsorted(observed, np.nan_to_num(as_number)), -1)
    scale = Scale("numeric", "ratio", len(observed), values=observed)
    got = build_plan(index, scale).point("krippendorff_alpha")
    ref = krippendorff.alpha(reliability_data=as_number.T, level_of_measurement="ratio")
    assert got == pytest.approx(ref, abs=1e-8)


# --------------------------------------------------------------------------------------------
# the coder-by-coder table (--pairs) against scikit-learn and the krippendorff package
# --------------------------------------------------------------------------------------------


@SLOW
@given(many_coders(min_coders=2, max_coders=4), st.sampled_from(["nominal", "ordinal"]))
def test_pairs_match_references(data, level):
    k, x = data
    v = agreement(_codings(x, k, level), replicates=0, seed=1).variable("v")
    coders = [f"c{c}" for c in range(x.shape[1])]
    seen = set()
    for pair in v.pairs:
        i, j = coders.index(pair.coder_a), coders.index(pair.coder_b)
        seen.add(frozenset((i, j)))
        both = (x[:, i] >= 0) & (x[:, j] >= 0)
        a, b = x[both, i], x[both, j]
        assert pair.units == int(both.sum())
        assert pair.percent_agreement == pytest.approx(float(np.mean(a == b)), abs=TOL)
        ref_table = confusion_matrix(a, b, labels=list(range(k)))
        assert np.array_equal(np.array(pair.confusion), ref_table)
        if len(set(a) | set(b)) > 1:
            ref = cohen_kappa_score(a, b, labels=list(range(k)))
            assert pair.cohen_kappa == pytest.approx(ref, abs=TOL)
            rel = np.where(x[:, [i, j]] >= 0, x[:, [i, j]], np.nan).T
            ref_alpha = krippendorff.alpha(
                rel, level_of_measurement=level, value_domain=list(range(k))
            )
            assert pair.krippendorff_alpha == pytest.approx(ref_alpha, abs=TOL)
        else:
            assert pair.cohen_kappa is None
            assert pair.krippendorff_alpha is None
    # Every pair of coders who share a unit is listed (in the engine's coder order).
    for i in range(x.shape[1]):
        for j in range(i + 1, x.shape[1]):
            shared = bool(((x[:, i] >= 0) & (x[:, j] >= 0)).any())
            assert (frozenset((i, j)) in seen) == shared


# --------------------------------------------------------------------------------------------
# the demo project: every categorical variable's multi-coder coefficients against references
# --------------------------------------------------------------------------------------------


def test_demo_fleiss_and_light_match_statsmodels_and_sklearn():
    root = Path(__file__).resolve().parents[1]
    codings = read_codings(
        load_codebook(root / "sample_codebooks" / "wildlife_encounters.yaml"),
        [root / "demo" / "sheets"],
    )
    result = agreement(codings, replicates=0)
    checked = 0
    for var in codings.codebook.variables:
        if not var.is_categorical or var.multiple:
            continue
        sub = codings.for_variable(var.name)
        sub = sub[[a is not False for a in sub["applies"]]]
        wide = sub.pivot(index="unit", columns="coder", values="value")
        wide = wide.reindex(columns=codings.coders)
        codes = list(var.codes)
        x = np.array(
            [[codes.index(v) if v is not None and v == v else -1 for v in row] for row in
             wide.to_numpy(dtype=object)]
        )  # fmt: skip
        coefs = result.variable(var.name).coefficients
        complete = (x >= 0).all(axis=1)
        ref_fleiss = fleiss_kappa(value_counts(x[complete], len(codes)), method="fleiss")
        assert coefs["fleiss_kappa"].estimate == pytest.approx(ref_fleiss, abs=TOL), var.name
        kappas = []
        for i in range(x.shape[1]):
            for j in range(i + 1, x.shape[1]):
                both = (x[:, i] >= 0) & (x[:, j] >= 0)
                kappas.append(
                    cohen_kappa_score(x[both, i], x[both, j], labels=list(range(len(codes))))
                )
        assert coefs["light_kappa"].estimate == pytest.approx(np.mean(kappas), abs=TOL), var.name
        checked += 1
    assert checked >= 4  # species, behaviour, severity, time_of_day, food_present, spray_worked
