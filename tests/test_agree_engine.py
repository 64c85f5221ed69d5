"""The engine's per-variable extras: standard errors, applicability rows, coder pairs, per-category
agreement, undefined reasons and the ``--pairs`` output, each checked against an outside source."""

import json
from pathlib import Path

import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import aggregate_raters, cohens_kappa, fleiss_kappa
from typer.testing import CliRunner

from coderel.agree import APPLIES_SUFFIX, agreement
from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codebook.model import Condition
from coderel.codings import Codings
from coderel.stats import undefined as U

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"


def _codings(variables, table, coders=("a", "b")):
    """``table[v][u][c]``: value of variable v, unit u, coder c (None: blank)."""
    cb = Codebook(title="t", version="1", variables=tuple(variables))
    records = [
        {"unit": f"u{u:03d}", "coder": coders[c], "variable": var.name, "value": value}
        for var in variables
        for u, row in enumerate(table[var.name])
        for c, value in enumerate(row)
    ]
    return Codings.from_records(cb, records)


def _ordinal(name="o", k=4):
    return Variable(
        name, "ordinal", categories=tuple(Category(i, f"c{i}") for i in range(1, k + 1))
    )


def _random_pairs(seed, n=60, k=4):
    rng = np.random.default_rng(seed)
    a = rng.integers(1, k + 1, n)
    b = np.where(rng.random(n) < 0.6, a, rng.integers(1, k + 1, n))
    return a, b


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_cohen_se_matches_statsmodels(seed):
    # Fleiss, Cohen & Everitt (1969) large-sample SE; statsmodels' cohens_kappa reports it as
    # std_kappa (plain) and, with wt="linear"/"quadratic", for weighted kappa (Cohen 1968).
    a, b = _random_pairs(seed)
    var = _ordinal()
    result = agreement(
        _codings([var], {"o": list(zip(a.tolist(), b.tolist(), strict=True))}), replicates=0
    )
    row = result.variable("o")
    table = np.zeros((4, 4))
    np.add.at(table, (a - 1, b - 1), 1)
    for key, wt in (
        ("cohen_kappa", None),
        ("weighted_kappa_linear", "linear"),
        ("weighted_kappa_quadratic", "quadratic"),
    ):
        ref = cohens_kappa(table, wt=wt) if wt else cohens_kappa(table)
        est = row.coefficients[key]
        assert est.estimate == pytest.approx(ref.kappa, abs=1e-9)
        assert est.se == pytest.approx(ref.std_kappa, abs=1e-9)
    sk = cohen_kappa_score(a, b, labels=[1, 2, 3, 4], weights="quadratic")
    assert row.coefficients["weighted_kappa_quadratic"].estimate == pytest.approx(sk, abs=1e-9)


def test_fleiss_null_se_and_z_match_statsmodels():
    # statsmodels' fleiss_kappa gives the point (Fleiss 1971); the null SE (Fleiss, Nee & Landis
    # 1979) is checked against its closed form written out independently here.
    rng = np.random.default_rng(5)
    truth = rng.integers(1, 4, 40)
    data = [
        [int(t) if rng.random() < 0.7 else int(rng.integers(1, 4)) for _ in range(4)] for t in truth
    ]
    var = Variable("n", "nominal", categories=tuple(Category(i, str(i)) for i in range(1, 4)))
    row = agreement(_codings([var], {"n": data}, coders="abcd"), replicates=0).variable("n")
    counts, _ = aggregate_raters(np.array(data))
    fk = row.coefficients["fleiss_kappa"]
    assert fk.estimate == pytest.approx(fleiss_kappa(counts, method="fleiss"), abs=1e-9)
    n, m = counts.shape[0], 4
    p = counts.sum(axis=0) / (n * m)
    q = 1 - p
    pq = (p * q).sum()
    var_null = 2 / (n * m * (m - 1)) * (pq**2 - (p * q * (q - p)).sum()) / pq**2
    assert fk.se == pytest.approx(var_null**0.5, abs=1e-12)
    assert fk.z == pytest.approx(fk.estimate / fk.se, abs=1e-9)
    assert 0 <= fk.p_value < 1e-3
    assert row.fleiss_units == 40


def test_applicability_row_and_conditional_units():
    gate = Variable("gate", "nominal", categories=(Category(1, "yes"), Category(2, "no")))
    follow = Variable(
        "follow",
        "nominal",
        categories=(Category(1, "x"), Category(2, "y")),
        applies_when=Condition("gate", (1,)),
    )
    gates = [(1, 1)] * 12 + [(2, 2)] * 6 + [(1, 2)] * 2
    follows = [(1, 1)] * 6 + [(2, 2)] * 4 + [(1, 2)] * 2 + [(None, None)] * 6 + [(1, None)] * 2
    result = agreement(_codings([gate, follow], {"gate": gates, "follow": follows}), replicates=0)
    names = [v.variable for v in result.variables]
    assert names == ["gate", "follow", "follow" + APPLIES_SUFFIX]
    applies = result.variable("follow" + APPLIES_SUFFIX)
    assert applies.kind == "applicability"
    # Applicability mirrors the condition: 18 of 20 units agree.
    assert applies.coefficients["percent_agreement"].estimate == pytest.approx(18 / 20)
    ref = cohen_kappa_score([g[0] for g in gates], [g[1] for g in gates])
    assert applies.coefficients["cohen_kappa"].estimate == pytest.approx(ref, abs=1e-9)
    # The variable itself is computed only where both coders' own values say it applies.
    assert result.variable("follow").units == 12


def test_pairs_confusion_and_category_agreement():
    a, b = _random_pairs(11, n=80, k=3)
    c = np.where(np.arange(80) % 3 == 0, a, b)
    var = Variable("n", "nominal", categories=tuple(Category(i, str(i)) for i in range(1, 4)))
    data = list(zip(a.tolist(), b.tolist(), c.tolist(), strict=True))
    row = agreement(_codings([var], {"n": data}, coders="abc"), replicates=0).variable("n")
    assert [(p.coder_a, p.coder_b) for p in row.pairs] == [("a", "b"), ("a", "c"), ("b", "c")]
    for p, (x, y) in zip(row.pairs, ((a, b), (a, c), (b, c)), strict=True):
        assert p.cohen_kappa == pytest.approx(cohen_kappa_score(x, y), abs=1e-9)
        assert p.percent_agreement == pytest.approx(np.mean(x == y))
        assert np.array_equal(row.confusion[(p.coder_a, p.coder_b)], np.array(p.confusion))
    light = row.coefficients["light_kappa"].estimate
    assert light == pytest.approx(np.mean([p.cohen_kappa for p in row.pairs]), abs=1e-12)
    # Fleiss' (1971, eq. 11) per-category kappas average back, weighted by p_j q_j, to kappa.
    cats = row.category_agreement
    counts, _ = aggregate_raters(np.array(data))
    p = counts.sum(axis=0) / counts.sum()
    kj = np.array([cats[k]["fleiss_kappa"] for k in (1, 2, 3)])
    pooled = (p * (1 - p) * kj).sum() / (p * (1 - p)).sum()
    assert pooled == pytest.approx(row.coefficients["fleiss_kappa"].estimate, abs=1e-9)


def test_undefined_cases_have_reasons():
    var = Variable("n", "nominal", categories=(Category(1, "a"), Category(2, "b")))
    same = agreement(_codings([var], {"n": [(1, 1)] * 12}), replicates=50).variable("n")
    alpha = same.coefficients["krippendorff_alpha"]
    assert alpha.estimate is None
    assert alpha.reason == U.NO_VARIATION
    assert same.verdict == "undefined"
    assert same.coefficients["percent_agreement"].estimate == 1.0
    # A single value used: no confident-looking [1, 1] interval, and a note in words.
    assert same.coefficients["percent_agreement"].ci is None
    assert same.coefficients["percent_agreement"].reason == "one-value-used"
    assert any("every pairable value is the same" in n for n in same.notes)
    lonely = agreement(_codings([var], {"n": [(1, None), (None, 2)]}), replicates=50)
    est = lonely.variable("n").coefficients["krippendorff_alpha"]
    assert est.estimate is None
    assert est.reason == U.TOO_FEW_PAIRABLE


def test_cli_pairs_json_and_files(tmp_path):
    runner = CliRunner()
    res = runner.invoke(
        app,
        [
            "agree",
            "-c",
            str(CB),
            str(ROOT / "demo/sheets"),
            "--replicates",
            "100",
            "--pairs",
            "--json",
            "--out",
            str(tmp_path / "agree.csv"),
        ],
    )
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert doc["coders"] == ["coder_ana", "coder_ben", "coder_cai"]
    behaviour = next(v for v in doc["variables"] if v["variable"] == "behaviour")
    assert len(behaviour["pairs"]) == 3
    assert behaviour["cohen_kappa"] is None  # three coders: Light's mean pairwise kappa instead
    assert behaviour["light_kappa"]["estimate"] is not None
    assert behaviour["fleiss_kappa"]["se"] is not None
    kinds = {v["variable"]: v["kind"] for v in doc["variables"]}
    assert kinds["spray_worked [applies]"] == "applicability"
    assert (tmp_path / "agree.csv").exists()
    assert (tmp_path / "agree-pairs.csv").exists()


@pytest.mark.parametrize("command", ["agree", "adjudicate", "merge", "report"])
def test_a_refused_sheet_stops_every_computing_command(tmp_path, command):
    # An encrypted workbook beside good sheets: going on without that coder would quietly change
    # every number, so the command stops with exit 3 (input refused) and writes nothing.
    bad = ROOT / "tests" / "data" / "bad_inputs"
    folder = tmp_path / "sheets"
    folder.mkdir()
    for name in ("wrong_code.xlsx", "encrypted.xlsx"):
        (folder / name).write_bytes((bad / name).read_bytes())
    out = tmp_path / ("out.html" if command == "report" else "out.xlsx")
    res = CliRunner().invoke(
        app, [command, "-c", str(bad / "codebook.yaml"), str(folder), "-o", str(out)]
    )
    assert res.exit_code == 3, res.output
    assert "refused" in res.output
    assert not out.exists()


def test_unknown_interval_method_is_a_usage_error():
    res = CliRunner().invoke(
        app, ["agree", "-c", str(CB), str(ROOT / "demo/sheets"), "--interval", "normal"]
    )
    assert res.exit_code == 2
