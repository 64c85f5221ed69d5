"""What agree reports beside the numbers (issue 9, items 5, 6, 11 and 19): a standard error that
cannot mean anything is null with a reason, replicates in which a coefficient was undefined are
counted, a p-value too small for a double is text, and cells left out for errors make exit 1."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import norm
from statsmodels.stats.inter_rater import cohens_kappa
from typer.testing import CliRunner

from coderel.agree import agreement
from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.stats import undefined as U
from coderel.stats.bootstrap import unit_weights
from coderel.stats.kappa import p_value_text, z_test

runner = CliRunner()


def _codings(variables, rows, coders=("a", "b")):
    cb = Codebook(title="t", version="1", variables=tuple(variables))
    records = [
        {"unit": f"u{u:03d}", "coder": coder, "variable": var.name, "value": value}
        for var in variables
        for u, row in enumerate(rows)
        for coder, value in zip(coders, row, strict=True)
        if value is not None
    ]
    return Codings.from_records(cb, records)


def _ordinal(k=3):
    return Variable("o", "ordinal", categories=tuple(Category(i, f"c{i}") for i in range(1, k + 1)))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # statsmodels divides 0 by 0 here
def test_se_is_null_with_a_reason_when_a_coder_used_one_category():
    # Coder a used category 1 only: kappa is 0 by construction (Cohen 1960: p_o = p_e) and the
    # large-sample variance of Fleiss, Cohen & Everitt (1969) degenerates. statsmodels gives 0
    # or NaN for it, coderel a null with its reason.
    rng = np.random.default_rng(2)
    b = rng.integers(1, 4, 30)
    rows = [(1, int(v)) for v in b]
    row = agreement(_codings([_ordinal()], rows), replicates=0).variable("o")
    table = np.zeros((3, 3))
    for a_, b_ in rows:
        table[a_ - 1, b_ - 1] += 1
    for key, wt in (
        ("cohen_kappa", None),
        ("weighted_kappa_linear", "linear"),
        ("weighted_kappa_quadratic", "quadratic"),
    ):
        ref = cohens_kappa(table, wt=wt) if wt else cohens_kappa(table)
        assert ref.kappa == pytest.approx(0.0, abs=1e-12)
        assert not ref.std_kappa > 1e-6  # 0 or NaN: no usable standard error
        est = row.coefficients[key]
        assert est.estimate == pytest.approx(0.0, abs=1e-12)
        assert est.se is None
        assert est.se_reason == U.ONE_CATEGORY_PER_CODER
        assert est.to_dict()["se_reason"] == "one-category-per-coder"


def test_se_stays_a_number_when_both_coders_use_two_categories():
    rows = [(1, 1), (2, 2), (1, 2), (2, 1), (1, 1), (3, 3)] * 4
    row = agreement(_codings([_ordinal()], rows), replicates=0).variable("o")
    est = row.coefficients["cohen_kappa"]
    table = np.zeros((3, 3))
    for a_, b_ in rows:
        table[a_ - 1, b_ - 1] += 1
    assert est.se == pytest.approx(cohens_kappa(table).std_kappa, abs=1e-12)
    assert est.se_reason is None


def test_replicates_in_which_a_coefficient_is_undefined_are_counted():
    # Ten units agree on category 1; u010 holds (2, 2) and u011 (1, 2). A resample without both
    # of them holds one category only, so alpha is undefined there (0/0).
    rows = [(1, 1)] * 10 + [(2, 2), (1, 2)]
    var = Variable("v", "nominal", categories=(Category(1, "one"), Category(2, "two")))
    reps, seed = 400, 9
    row = agreement(_codings([var], rows), replicates=reps, seed=seed).variable("v")
    w = unit_weights(12, reps, seed)
    expected = int(((w[:, 10] == 0) & (w[:, 11] == 0)).sum())
    assert expected > 0
    alpha = row.coefficients["krippendorff_alpha"]
    assert alpha.ci is not None
    assert alpha.undefined_replicates == expected
    assert alpha.to_dict()["undefined_replicates"] == expected
    assert row.coefficients["percent_agreement"].undefined_replicates == 0
    note = next(n for n in row.notes if n.startswith("undefined in some"))
    assert f"krippendorff_alpha in {expected}" in note
    assert "of the 400 bootstrap replicates" in note


def test_p_value_is_exact_in_the_tail_and_text_below_1e_300():
    # Two-sided normal p-value 2 (1 - Phi(|z|)); scipy's survival function as the reference.
    for z in (1.96, 8.5, 17.65183, 30.0):
        _, p = z_test(z, 1.0)
        assert p == pytest.approx(2 * norm.sf(z), rel=1e-9)
        assert p > 0
        assert p_value_text(p) is None
    _, p = z_test(40.0, 1.0)
    assert p < 1e-300
    assert p_value_text(p) == "< 1e-300"


def test_fleiss_p_value_below_1e_300_is_null_with_text_through_the_engine():
    # 801 units, three coders in agreement on two balanced categories but for one unit: with
    # SE_0 = 1 / sqrt(3 N) here (Fleiss, Nee & Landis 1979), z is about 49, past a double's range.
    rows = [(1, 1, 1), (2, 2, 2)] * 400 + [(1, 2, 1)]
    var = Variable("v", "nominal", categories=(Category(1, "one"), Category(2, "two")))
    est = (
        agreement(_codings([var], rows, ("a", "b", "c")), replicates=0)
        .variable("v")
        .coefficients["fleiss_kappa"]
    )
    assert est.z is not None
    assert est.z > 40
    assert est.p_value is None
    assert est.p_value_reason == "< 1e-300"
    assert math.erfc(est.z / math.sqrt(2)) < 1e-300


SMALL = """\
title: Small (invented)
version: "1"
unit: id
variables:
  - name: mood
    level: nominal
    categories:
      - {code: 1, label: Positive}
      - {code: 2, label: Negative}
"""


def _project(tmp_path: Path, bad: bool) -> tuple[Path, Path]:
    cb = tmp_path / "cb.yaml"
    cb.write_text(SMALL, encoding="utf-8")
    data = tmp_path / "sheets"
    data.mkdir()
    a = [1, 2, 1, 1, 2, 2, 1, 2, 1, 1, 2, 1]
    b = [1, 2, 1, 2, 2, 2, 1, 2, 1, 1, 1, 1]
    if bad:
        b[3] = 7  # not a code of the codebook: an error cell, left out
    for name, values in (("ana", a), ("ben", b)):
        lines = ["id,mood", *(f"u{i},{v}" for i, v in enumerate(values))]
        (data / f"{name}.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return cb, data


@pytest.mark.parametrize("json_out", [False, True])
def test_agree_exits_1_after_leaving_out_cells_with_errors(tmp_path, json_out):
    cb, data = _project(tmp_path, bad=True)
    args = ["agree", "-c", str(cb), str(data), "--replicates", "50"]
    res = runner.invoke(app, args + (["--json"] if json_out else []))
    assert res.exit_code == 1, res.output
    assert "1 cell(s) with errors were left out" in res.stderr
    if json_out:
        doc = json.loads(res.stdout)
        assert doc["variables"][0]["units"] == 11  # the error cell's unit is left out


def test_agree_exits_0_on_clean_data(tmp_path):
    cb, data = _project(tmp_path, bad=False)
    res = runner.invoke(app, ["agree", "-c", str(cb), str(data), "--replicates", "50"])
    assert res.exit_code == 0, res.output


def test_agree_help_lists_every_table_format():
    res = runner.invoke(app, ["agree", "--help"], terminal_width=200)
    assert res.exit_code == 0
    assert ".parquet" in res.stdout
