"""`agree --coders` on the demo: drop-one alpha against the `krippendorff` package on each subset
of coders (Krippendorff 2011, Computing Krippendorff's alpha-reliability), the pair tests against
statsmodels' SquareTable (Stuart 1955; Bhapkar 1966; Bowker 1948) and the shares by counting."""

import json
from pathlib import Path

import krippendorff
import numpy as np
import pytest
from statsmodels.stats.contingency_tables import SquareTable
from typer.testing import CliRunner

from coderel.agree.coders import coder_diagnostics
from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
runner = CliRunner()


@pytest.fixture(scope="module")
def demo():
    codings = read_codings(load_codebook(CB), [ROOT / "demo/sheets"])
    return codings, coder_diagnostics(codings)


def _wide(codings, name, codes):
    wide = codings.wide(name)
    applies = codings.for_variable(name).pivot(index="unit", columns="coder", values="applies")
    applies = applies.reindex(index=wide.index, columns=wide.columns)
    out = np.full(wide.shape, np.nan)
    for j, c in enumerate(wide.columns):
        for i, (v, a) in enumerate(zip(wide[c], applies[c], strict=True)):
            if v is not None and a is not False:
                out[i, j] = codes.index(v) if codes else float(v)
    return out.T, list(wide.columns)


@pytest.mark.parametrize(
    ("name", "level"),
    [
        ("species", "nominal"),
        ("behaviour", "ordinal"),
        ("severity", "ordinal"),
        ("visitor_distance_m", "ratio"),
    ],
)
def test_drop_one_alpha_against_krippendorff_package(demo, name, level):
    codings, diag = demo
    var = codings.codebook.variable(name)
    codes = list(var.codes) if var.is_categorical else None
    data, coders = _wide(codings, name, codes)
    v = diag.variable(name)
    for d in v.drop_one:
        keep = [i for i, c in enumerate(coders) if c != d.coder]
        kw = {"value_domain": list(range(len(codes)))} if codes else {}
        expected = krippendorff.alpha(reliability_data=data[keep], level_of_measurement=level, **kw)
        assert d.alpha_without == pytest.approx(expected, abs=1e-9)


def test_pair_tests_against_statsmodels_and_shares_by_counting(demo):
    codings, diag = demo
    var = codings.codebook.variable("behaviour")
    data, coders = _wide(codings, "behaviour", list(var.codes))
    v = diag.variable("behaviour")
    for h in v.homogeneity:
        a, b = data[coders.index(h.coder_a)], data[coders.index(h.coder_b)]
        both = ~np.isnan(a) & ~np.isnan(b)
        table = np.zeros((5, 5))
        np.add.at(table, (a[both].astype(int), b[both].astype(int)), 1)
        ref = SquareTable(table, shift_zeros=False)
        assert h.tests["stuart_maxwell"].statistic == pytest.approx(
            ref.homogeneity().statistic, abs=1e-9
        )
        assert h.tests["bhapkar"].statistic == pytest.approx(
            ref.homogeneity("bhapkar").statistic, abs=1e-9
        )
        assert h.tests["bowker"].statistic == pytest.approx(ref.symmetry().statistic, abs=1e-9)
        assert h.units == int(both.sum())
    for s in v.shares:
        idx = list(var.codes).index(s.code)
        for c, share in s.by_coder.items():
            row = data[coders.index(c)]
            assert share == pytest.approx(np.mean(row[~np.isnan(row)] == idx))
        assert s.pooled == pytest.approx(np.mean(data[~np.isnan(data)] == idx))
    assert "mcnemar" in diag.variable("food_present").homogeneity[0].tests


def test_agree_coders_json_and_table(tmp_path):
    args = ["agree", "-c", str(CB), str(ROOT / "demo/sheets"), "--replicates", "0", "--coders"]
    result = runner.invoke(app, [*args, "--json"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    diag = {v["variable"]: v for v in data["coder_diagnostics"]["variables"]}
    assert {d["coder"] for d in diag["severity"]["drop_one"]} == {
        "coder_ana",
        "coder_ben",
        "coder_cai",
    }
    assert diag["severity"]["homogeneity"][0]["stuart_maxwell"]["df"] == 3
    assert diag["severity"]["shares"][0]["by_coder"].keys() == {
        "coder_ana",
        "coder_ben",
        "coder_cai",
    }
    out = tmp_path / "agreement.xlsx"
    text = runner.invoke(app, [*args, "-o", str(out)])
    assert text.exit_code == 0
    assert "Alpha without each coder" in text.stdout
    assert "Marginal homogeneity" in text.stdout
    import openpyxl

    assert {"drop_one", "homogeneity", "shares"} <= set(openpyxl.load_workbook(out).sheetnames)
