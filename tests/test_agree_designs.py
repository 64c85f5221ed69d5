"""Same data, same answer across designs: rotating coders, coders of other variables, units coded
by one coder only. Each check is against statsmodels or a formula written out here from its
published source."""

import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import fleiss_kappa

from coderel.agree import agreement
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings


def _var(name, k=2, level="nominal"):
    return Variable(name, level, categories=tuple(Category(i, f"c{i}") for i in range(1, k + 1)))


def _codings(variables, tables):
    """``tables[var][unit] = {coder: value}``; a coder absent from a unit has no row for it."""
    cb = Codebook(title="t", version="1", variables=tuple(variables))
    records = [
        {"unit": f"u{u:03d}", "coder": coder, "variable": name, "value": value}
        for name, table in tables.items()
        for u, row in enumerate(table)
        for coder, value in row.items()
    ]
    return Codings.from_records(cb, records)


def _counts(rows, k):
    """statsmodels' subjects x categories table from rows of values (None: not coded)."""
    table = np.zeros((len(rows), k))
    for i, row in enumerate(rows):
        for v in row:
            if v is not None:
                table[i, v - 1] += 1
    return table


# Rotating coders: each unit coded by 2 of 3 (the rows of issue 9, item 1, given twice).
ROTATING = [(1, 1, None), (None, 2, 2), (1, None, 2), (2, 2, None), (None, 1, 1), (2, None, 1)] * 2


def _rows_to_tables(rows, coders=("a", "b", "c")):
    return [{c: v for c, v in zip(coders, row, strict=True) if v is not None} for row in rows]


def test_fleiss_kappa_with_rotating_coders_matches_statsmodels():
    # Fleiss (1971), Psychological Bulletin 76(5), 378-382, needs the same number of ratings m
    # per subject, not the same raters; statsmodels' fleiss_kappa on the counts gives 1/3.
    codings = _codings([_var("v")], {"v": _rows_to_tables(ROTATING)})
    row = agreement(codings, replicates=0).variable("v")
    ref = fleiss_kappa(_counts(ROTATING, 2))
    assert ref == pytest.approx(1 / 3)
    assert row.coefficients["fleiss_kappa"].estimate == pytest.approx(ref, abs=1e-12)
    assert (row.fleiss_units, row.fleiss_values_per_unit) == (12, 2)
    assert not any("Fleiss" in n for n in row.notes)  # nothing left out


def test_fleiss_kappa_uses_the_most_common_number_of_values_and_says_how_many_are_left_out():
    extra = [(1, 1, 1), (2, 2, 1), (1, 2, 2)]
    codings = _codings([_var("v")], {"v": _rows_to_tables(ROTATING + extra)})
    row = agreement(codings, replicates=0).variable("v")
    ref = fleiss_kappa(_counts(ROTATING, 2))
    assert row.coefficients["fleiss_kappa"].estimate == pytest.approx(ref, abs=1e-12)
    assert (row.fleiss_units, row.fleiss_values_per_unit) == (12, 2)
    note = next(n for n in row.notes if n.startswith("Fleiss"))
    assert "the 12 of 15 units with 2 values each" in note
    assert "3 unit(s) with another number left out" in note


def _two_coder_tables(rng, n=40):
    a = rng.integers(1, 4, n)
    b = np.where(rng.random(n) < 0.6, a, rng.integers(1, 4, n))
    return a, b


def test_formulas_follow_the_coders_of_the_variable_not_of_the_project():
    # Issue 9, item 2: a third coder who coded only another variable is not a coder of "v".
    rng = np.random.default_rng(11)
    a, b = _two_coder_tables(rng)
    v = [{"a": int(x), "b": int(y)} for x, y in zip(a, b, strict=True)]
    w = [{"a": int(x), "c": int(y)} for x, y in zip(b, a, strict=True)]
    alone = agreement(_codings([_var("v", 3)], {"v": v}), replicates=200, seed=3)
    mixed = agreement(
        _codings([_var("v", 3), _var("w", 3)], {"v": v, "w": w}), replicates=200, seed=3
    )
    row = mixed.variable("v")
    assert row.coders == 2
    # Cohen (1960) kappa, checked against scikit-learn.
    assert row.coefficients["cohen_kappa"].estimate == pytest.approx(
        cohen_kappa_score(a, b), abs=1e-12
    )
    assert row.to_dict(pairs=True) == alone.variable("v").to_dict(pairs=True)
    assert [(p.coder_a, p.coder_b) for p in row.pairs] == [("a", "b")]


def _gwet_raw(rows, k, weights=None):
    """Scott's pi / AC1 / AC2 in the raw-data form for any number of raters with missing ratings,
    written out from Gwet, K. L. (2014). *Handbook of Inter-Rater Reliability* (4th ed.), ch. 2
    (p_a over subjects with two or more ratings, pi_k averaged over subjects with at least one
    rating) and ch. 3 (weights); from memory."""
    counts = _counts(rows, k)
    r = counts.sum(axis=1)
    w = np.eye(k) if weights is None else weights
    star = counts @ w.T
    two = r >= 2
    p_a = np.mean((counts[two] * (star[two] - 1)).sum(axis=1) / (r[two] * (r[two] - 1)))
    one = r >= 1
    pi = (counts[one] / r[one][:, None]).mean(axis=0)
    scott_pe = (pi**2).sum()
    ac_pe = w.sum() / (k * (k - 1)) * (pi * (1 - pi)).sum()
    return (p_a - scott_pe) / (1 - scott_pe), (p_a - ac_pe) / (1 - ac_pe)


@pytest.mark.parametrize("n_coders", [2, 3])
def test_one_missing_data_rule_for_scott_pi_and_ac1_for_any_number_of_coders(n_coders):
    # Issue 9, item 3: 15 units, 5 of them coded by one coder only.
    rng = np.random.default_rng(7 + n_coders)
    rows = []
    for u in range(15):
        truth = int(rng.integers(1, 4))
        row = [truth if rng.random() < 0.7 else int(rng.integers(1, 4)) for _ in range(n_coders)]
        if u < 5:
            row = [row[0]] + [None] * (n_coders - 1)
        rows.append(tuple(row))
    coders = ("a", "b", "c")[:n_coders]
    codings = _codings([_var("v", 3)], {"v": _rows_to_tables(rows, coders)})
    row = agreement(codings, replicates=0).variable("v")
    pi, ac1 = _gwet_raw(rows, 3)
    assert row.coefficients["scott_pi"].estimate == pytest.approx(pi, abs=1e-12)
    assert row.coefficients["gwet_ac1"].estimate == pytest.approx(ac1, abs=1e-12)


def test_ac2_uses_the_same_rule_with_two_coders():
    k = 4
    idx = np.arange(k)
    d = np.abs(idx[:, None] - idx[None, :])
    # Gwet (2014, ch. 3) ordinal weights 1 - C(|i-j|+1, 2) / C(k, 2); from memory.
    w = 1 - (d + 1) * d / 2 / (k * (k - 1) / 2)
    rng = np.random.default_rng(21)
    rows = []
    for u in range(30):
        a = int(rng.integers(1, k + 1))
        b = int(np.clip(a + rng.integers(-1, 2), 1, k))
        rows.append((a, None) if u % 6 == 0 else (None, b) if u % 7 == 0 else (a, b))
    codings = _codings([_var("o", k, "ordinal")], {"o": _rows_to_tables(rows, ("a", "b"))})
    row = agreement(codings, replicates=0).variable("o")
    _, ac2 = _gwet_raw(rows, k, w)
    assert row.coefficients["gwet_ac2"].estimate == pytest.approx(ac2, abs=1e-12)


def test_an_unrelated_coder_does_not_change_scott_pi():
    # The audit's case: pi moved from 0.60 to 0.55 when a coder of another variable was added.
    rng = np.random.default_rng(4)
    rows = [(int(x), int(y)) for x, y in zip(*_two_coder_tables(rng, 15), strict=True)]
    rows = [(a, None) if u < 5 else (a, b) for u, (a, b) in enumerate(rows)]
    v = _rows_to_tables(rows, ("a", "b"))
    other = [{"c": 1, "a": 2} for _ in rows]
    alone = agreement(_codings([_var("v", 3)], {"v": v}), replicates=0).variable("v")
    mixed = agreement(
        _codings([_var("v", 3), _var("w", 3)], {"v": v, "w": other}), replicates=0
    ).variable("v")
    for key in ("scott_pi", "gwet_ac1", "brennan_prediger", "fleiss_kappa"):
        assert mixed.coefficients[key] == alone.coefficients[key], key
