"""Numeric variables and stability end to end: ``coderel agree --json`` on Shrout & Fleiss's table,
the demo's numeric variables, ``coderel stability`` on the demo's recoding, the report's sections,
and bad input (clear message and exit code, never a traceback)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from typer.testing import CliRunner

from coderel.agree import agreement
from coderel.cli import app
from coderel.codebook import Codebook, Variable
from coderel.codebook.load import load_codebook
from coderel.codings import Codings
from coderel.io.read import read_codings
from coderel.stability import stability

ROOT = Path(__file__).resolve().parents[1]
PUBLISHED = ROOT / "tests" / "data" / "published"
SF_CB = PUBLISHED / "shrout_fleiss1979_codebook.yaml"
SF_DATA = PUBLISHED / "shrout_fleiss1979.csv"
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
RETEST = ROOT / "demo" / "retest" / "coder_ana.csv"
# Shrout, P. E., & Fleiss, J. L. (1979). Intraclass correlations: uses in assessing rater
# reliability. Psychological Bulletin, 86(2), 420-428, Table 4 (on their Table 2 data).
TABLE4 = {
    "icc_1_1": 0.17,
    "icc_2_1": 0.29,
    "icc_3_1": 0.71,
    "icc_1_k": 0.44,
    "icc_2_k": 0.62,
    "icc_3_k": 0.91,
}


def _json(args: list[str]) -> dict:
    res = CliRunner().invoke(app, [*args, "--json"])
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)


@pytest.fixture(scope="module")
def shrout_fleiss() -> dict:
    out = _json(["agree", "-c", str(SF_CB), str(SF_DATA), "--replicates", "200"])
    return out["variables"][0]


@pytest.mark.parametrize(("key", "published"), TABLE4.items())
def test_agree_json_reproduces_shrout_fleiss_table4(shrout_fleiss, key, published):
    assert round(shrout_fleiss[key]["estimate"], 2) == published


def test_agree_json_mean_squares_match_statsmodels(shrout_fleiss):
    frame = pd.read_csv(SF_DATA)
    two = sm.stats.anova_lm(smf.ols("value ~ C(unit) + C(coder)", data=frame).fit(), typ=1)
    one = sm.stats.anova_lm(smf.ols("value ~ C(unit)", data=frame).fit(), typ=1)
    ms = shrout_fleiss["icc"]["mean_squares"]
    assert ms["between_units"] == pytest.approx(two.loc["C(unit)", "mean_sq"], abs=1e-9)
    assert ms["between_coders"] == pytest.approx(two.loc["C(coder)", "mean_sq"], abs=1e-9)
    assert ms["residual"] == pytest.approx(two.loc["Residual", "mean_sq"], abs=1e-9)
    assert ms["within_units"] == pytest.approx(one.loc["Residual", "mean_sq"], abs=1e-9)


def test_agree_json_icc_table(shrout_fleiss):
    icc = shrout_fleiss["icc"]
    assert (icc["units_used"], icc["units_left_out"], icc["coders"]) == (6, 0, 4)
    names = [(f["shrout_fleiss"], f["mcgraw_wong"]) for f in icc["forms"]]
    assert names == [
        ("ICC(1,1)", "ICC(1)"),
        ("ICC(2,1)", "ICC(A,1)"),
        ("ICC(3,1)", "ICC(C,1)"),
        ("ICC(1,k)", "ICC(k)"),
        ("ICC(2,k)", "ICC(A,k)"),
        ("ICC(3,k)", "ICC(C,k)"),
    ]
    assert all(f["ci_f"][0] < f["estimate"] < f["ci_f"][1] for f in icc["forms"])
    # Six units: no bootstrap interval (too few), said in the reason and in a note.
    assert shrout_fleiss["icc_2_1"]["ci"] is None
    assert shrout_fleiss["icc_2_1"]["reason"] == "too-few-units"
    assert any(n.startswith("ICC:") for n in shrout_fleiss["notes"])
    assert len(shrout_fleiss["ccc_pairs"]) == len(shrout_fleiss["limits_of_agreement"]) == 6


@pytest.fixture(scope="module")
def demo_numeric() -> dict:
    out = _json(["agree", "-c", str(CB), str(SHEETS), "--replicates", "300"])
    return {v["variable"]: v for v in out["variables"]}


def test_demo_numeric_variables_get_icc_ccc_and_limits(demo_numeric):
    codings = read_codings(load_codebook(CB), [SHEETS])
    for name in ("visitor_distance_m", "visitor_group_size", "temperature_c"):
        v = demo_numeric[name]
        wide = codings.wide(name)
        complete = int(wide.notna().all(axis=1).sum())
        some = int(wide.notna().any(axis=1).sum())
        assert v["icc"]["units_used"] == complete
        assert v["icc"]["units_left_out"] == some - complete
        for key in (*TABLE4, "ccc"):
            assert v[key]["estimate"] is not None
            lo, hi = v[key]["ci"]
            assert lo <= v[key]["estimate"] <= hi
        assert {(p["coder_a"], p["coder_b"]) for p in v["limits_of_agreement"]} == {
            ("coder_ana", "coder_ben"),
            ("coder_ana", "coder_cai"),
            ("coder_ben", "coder_cai"),
        }
        for p in v["limits_of_agreement"]:
            assert p["lower_limit"] < p["mean_difference"] < p["upper_limit"]
    for name in ("species", "behaviour", "actions"):
        assert demo_numeric[name]["icc_2_1"] is None
        assert "icc" not in demo_numeric[name]


def test_ccc_mean_over_pairs(demo_numeric):
    v = demo_numeric["temperature_c"]
    pairs = [p["estimate"] for p in v["ccc_pairs"]]
    assert v["ccc"]["estimate"] == pytest.approx(float(np.mean(pairs)))


def _tiny(records: list[tuple[str, str, str, float]], extra: tuple[Variable, ...] = ()) -> Codings:
    cb = Codebook(title="t", variables=(Variable(name="x", level="interval"), *extra))
    return Codings.from_records(
        cb, [{"unit": u, "coder": c, "variable": v, "value": val} for u, c, v, val in records]
    )


def test_same_answer_whatever_the_order_and_other_coders():
    rng = np.random.default_rng(3)
    values = rng.normal(size=(15, 3)) + rng.normal(size=(15, 1))
    records = [(f"u{i}", f"c{j}", "x", float(values[i, j])) for i in range(15) for j in range(3)]
    base = agreement(_tiny(records), replicates=0).variable("x")
    shuffled = [records[i] for i in rng.permutation(len(records))]
    other = Variable(name="y", level="interval")
    # A fourth coder who coded only another variable changes nothing for x.
    with_other = [*records, *[(f"u{i}", "c9", "y", float(i)) for i in range(15)]]
    for recs, extra in ((shuffled, ()), (with_other, (other,))):
        again = agreement(_tiny(recs, extra), replicates=0).variable("x")
        for key in (*TABLE4, "ccc"):
            assert again.coefficients[key].estimate == pytest.approx(
                base.coefficients[key].estimate, rel=1e-12
            )


def test_icc_ordinal_on_request():
    plain = agreement(read_codings(load_codebook(CB), [SHEETS]), replicates=0)
    assert plain.variable("behaviour").coefficients["icc_2_1"] is None
    ordinal = agreement(read_codings(load_codebook(CB), [SHEETS]), replicates=0, icc_ordinal=True)
    b = ordinal.variable("behaviour")
    assert b.coefficients["icc_2_1"].estimate is not None
    assert b.numeric.icc.values == "positions"
    assert ordinal.variable("species").coefficients["icc_2_1"] is None  # nominal: never


# ---- stability -------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_stability() -> dict:
    return _json(["stability", "-c", str(CB), str(RETEST), "--replicates", "300"])


def test_demo_stability_gives_test_retest_alpha(demo_stability):
    (ana,) = demo_stability["stability"]
    assert ana["coder"] == "coder_ana"
    assert (ana["units_recoded"], ana["common_units"], ana["days_between"]) == (40, 40, 14)
    assert (ana["first_occasion"], ana["second_occasion"]) == ("2026-03-03", "2026-03-17")
    by = {v["variable"]: v for v in ana["variables"]}
    alpha = by["behaviour"]["krippendorff_alpha"]
    assert 0 < alpha["estimate"] < 1
    assert alpha["ci"][0] < alpha["estimate"] < alpha["ci"][1]
    assert by["behaviour"]["cohen_kappa"]["estimate"] is not None
    assert by["visitor_distance_m"]["icc_2_1"]["estimate"] is not None


def test_stability_equals_direct_alpha_between_occasions(demo_stability):
    """Stability alpha is alpha of the two occasions taken as two coders (Krippendorff 2004,
    11.1), checked against the krippendorff package on the recoded units."""
    import krippendorff

    frame = pd.read_csv(RETEST, dtype=str)
    sub = frame[frame["variable"] == "severity"]
    table = sub.pivot(index="occasion", columns="unit", values="value").astype(float)
    expected = krippendorff.alpha(
        reliability_data=table.to_numpy(), level_of_measurement="ordinal", value_domain=[0, 1, 2, 3]
    )
    by = {v["variable"]: v for v in demo_stability["stability"][0]["variables"]}
    assert by["severity"]["krippendorff_alpha"]["estimate"] == pytest.approx(expected)


def test_occasion_option_gives_the_same_stability(demo_stability):
    """The same recoding attached to the coder sheets with --occasion: same numbers."""
    other = _json(
        [
            "stability",
            "-c",
            str(CB),
            str(SHEETS),
            "--occasion",
            f"coder_ana={RETEST}",
            "--replicates",
            "300",
        ]
    )
    a = {v["variable"]: v for v in demo_stability["stability"][0]["variables"]}
    b = {v["variable"]: v for v in other["stability"][0]["variables"]}
    assert other["stability"][0]["days_between"] == 14
    for name in a:
        assert a[name]["krippendorff_alpha"] == b[name]["krippendorff_alpha"], name


def test_occasion_column_more_than_two_occasions(tmp_path):
    path = tmp_path / "three.csv"
    path.write_text(
        "unit,coder,variable,value,occasion\n"
        "u1,a,x,1,2026-01-01\nu1,a,x,2,2026-01-08\nu1,a,x,3,2026-01-15\n",
        encoding="utf-8",
    )
    cbf = tmp_path / "cb.yaml"
    cbf.write_text("title: t\nunit: unit\nvariables:\n  - name: x\n    level: interval\n")
    codings = read_codings(load_codebook(cbf), [path])
    codes = [p.code for p in codings.problems]
    assert "too-many-occasions" in codes
    assert codings.frame["value"].tolist() == [1.0]
    assert codings.occasions["value"].tolist() == [2.0]


def _write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def tiny_project(tmp_path):
    cbf = _write(
        tmp_path, "cb.yaml", "title: t\nunit: unit\nvariables:\n  - name: x\n    level: ratio\n"
    )
    one = _write(tmp_path, "one.csv", "unit,coder,variable,value\nu1,a,x,3\nu1,b,x,4\n")
    other = _write(tmp_path, "other.csv", "unit,coder,variable,value\nu9,a,x,3\n")
    return cbf, one, other


def test_bad_input_numeric_variable_with_one_unit(tiny_project):
    cbf, one, _ = tiny_project
    res = CliRunner().invoke(app, ["agree", "-c", str(cbf), str(one), "--json"])
    assert res.exit_code == 0
    v = json.loads(res.stdout)["variables"][0]
    assert v["icc_2_1"] == {**v["icc_2_1"], "estimate": None, "reason": "too-few-complete-units"}
    assert any("ICC: only 1 unit" in n for n in v["notes"])
    assert "Traceback" not in res.output


@pytest.mark.parametrize(
    ("args", "code", "words"),
    [
        (["--occasion", "zed=OTHER"], 2, "who is not in the data"),
        (["--occasion", "a=OTHER"], 1, "no unit was coded on both occasions"),
        ([], 1, "no second occasion"),
        (["--occasion", "a"], 2, "CODER=PATH"),
    ],
)
def test_bad_input_stability(tiny_project, args, code, words):
    cbf, one, other = tiny_project
    args = [a.replace("OTHER", str(other)) for a in args]
    res = CliRunner().invoke(app, ["stability", "-c", str(cbf), str(one), *args])
    assert res.exit_code == code
    assert words in res.output
    assert "Traceback" not in res.output
    res = CliRunner().invoke(app, ["stability", "-c", str(cbf), str(one), *args, "--json"])
    assert json.loads(res.stdout)["exit_code"] == code


def test_stability_library_refuses_without_occasions():
    from coderel.stability import StabilityError

    with pytest.raises(StabilityError):
        stability(_tiny([("u1", "a", "x", 1.0)]))


# ---- report ----------------------------------------------------------------------------------


def test_report_has_numeric_and_stability_sections(tmp_path):
    out = tmp_path / "report.html"
    res = CliRunner().invoke(
        app,
        [
            "report",
            "-c",
            str(CB),
            str(SHEETS),
            "--occasion",
            f"coder_ana={RETEST}",
            "-o",
            str(out),
            "--format",
            "html,md,xlsx",
            "--replicates",
            "100",
            "--date",
            "2026-12-02",
        ],
    )
    assert res.exit_code == 0, res.output
    html = out.read_text(encoding="utf-8")
    assert 'id="numeric"' in html
    assert 'id="stability"' in html
    assert "ICC(A,1)" in html
    assert 'id="ba-visitor_distance_m-coder_ana-coder_ben"' in html
    assert "14 days" in html
    assert "Shrout, P. E., &amp; Fleiss" in html
    md = (tmp_path / "report.md").read_text(encoding="utf-8")
    assert "## Stability" in md
    assert "## Numeric variables" in md
    sheets = openpyxl.load_workbook(tmp_path / "report.xlsx").sheetnames
    assert {"icc", "limits", "stability"} <= set(sheets)
    keys = [x.split('"')[0] for x in html.split('id="')[1:]]
    assert len(keys) == len(set(keys)), "ids repeat in the HTML"


# ---- many coders (crowd data) ----------------------------------------------------------------


def _crowd(n_units: int, n_coders: int, per_unit: int | None, seed: int = 1) -> Codings:
    rng = np.random.default_rng(seed)
    truth = rng.normal(50, 10, n_units)
    records = []
    for u in range(n_units):
        coders = (
            rng.choice(n_coders, size=per_unit, replace=False) if per_unit else np.arange(n_coders)
        )
        for c in coders:
            records.append((f"u{u:04d}", f"c{c:02d}", "x", float(truth[u] + rng.normal(0, 3))))
    return _tiny(records)


def test_crowd_data_keep_the_plan_small():
    """Twenty coders, three per unit: no complete unit, so no ICC columns, and no pairwise
    columns above ten coders (each pair would add six columns per unit)."""
    from coderel.agree.matrices import build_targets
    from coderel.stats.plan import build_plan

    codings = _crowd(400, 20, 3)
    (target,) = build_targets(codings, codings.coders, codings.units)
    plan = build_plan(target.own().x, target.scale)
    assert plan.contributions.shape[1] < 10
    v = agreement(codings, replicates=50).variable("x")
    assert v.coefficients["icc_2_1"].reason == "too-few-complete-units"
    assert v.coefficients["ccc"].reason == "too-many-coders"
    assert v.numeric.pairs == ()
    assert any("up to 10 coders" in n for n in v.notes)
    assert v.coefficients["krippendorff_alpha"].ci is not None


def test_six_coders_ccc_mean_without_bootstrap():
    codings = _crowd(60, 6, None)
    v = agreement(codings, replicates=50).variable("x")
    ccc = v.coefficients["ccc"]
    pairs = [p.ccc.estimate for p in v.numeric.pairs]
    assert len(pairs) == 15
    assert ccc.estimate == pytest.approx(float(np.mean(pairs)))
    assert ccc.ci is None
    assert ccc.reason == "many-pairs"
    assert v.coefficients["icc_2_1"].ci is not None  # the ICCs keep their interval


def test_left_out_units_are_named():
    records = [(f"u{i}", c, "x", float(i + (c == "b"))) for i in range(12) for c in ("a", "b")]
    records = [r for r in records if not (r[0] in ("u3", "u7") and r[1] == "b")]
    v = agreement(_tiny(records), replicates=0).variable("x")
    assert v.numeric.icc.units_left_out == 2
    assert v.to_dict()["icc"]["left_out_units"] == ["u3", "u7"]


def test_occasion_dates_from_a_workbook(tmp_path):
    """Dates typed as spreadsheet dates in the occasion column give the days between."""
    import datetime as dt

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["unit", "coder", "variable", "value", "occasion"])
    for u in range(12):
        ws.append([f"u{u}", "a", "x", u, dt.datetime(2026, 3, 3)])
        ws.append([f"u{u}", "a", "x", u + (u % 3 == 0), dt.datetime(2026, 3, 24)])
        ws.append([f"u{u}", "b", "x", u + 1, None])
    path = tmp_path / "long.xlsx"
    wb.save(path)
    cbf = _write(
        tmp_path, "cb.yaml", "title: t\nunit: unit\nvariables:\n  - name: x\n    level: ratio\n"
    )
    codings = read_codings(load_codebook(cbf), [path])
    assert sorted(codings.coders) == ["a", "b"]
    result = stability(codings, replicates=0)
    (a,) = result.coders
    assert (a.first_occasion, a.second_occasion, a.days) == ("2026-03-03", "2026-03-24", 21)
    assert a.common_units == 12


def test_occasion_file_with_other_coders_only(tiny_project, tmp_path):
    cbf, one, _ = tiny_project
    two = _write(tmp_path, "two.csv", "unit,coder,variable,value\nu1,x,x,3\nu1,y,x,4\n")
    res = CliRunner().invoke(app, ["stability", "-c", str(cbf), str(one), "--occasion", f"a={two}"])
    assert res.exit_code == 2
    assert "none of them 'a'" in res.output


def test_methods_paragraph_says_what_was_recoded():
    codings = read_codings(load_codebook(CB), [RETEST])
    from coderel.report import build_report

    result = agreement(codings, replicates=0)
    content = build_report(codings, result, stability=stability(codings, replicates=0))
    assert "coder_ana recoded 40 units after 14 days" in content.methods.paragraph
    assert "Stability (intra-coder, test-retest reliability" in content.methods.paragraph


def test_one_coder_prints_no_empty_numeric_tables(tmp_path):
    res = CliRunner().invoke(app, ["agree", "-c", str(CB), str(RETEST), "--replicates", "0"])
    assert res.exit_code == 0, res.output
    assert "Intraclass correlations" not in res.stdout
    assert "Per pair" not in res.stdout


def test_terminal_shows_the_icc_table():
    res = CliRunner().invoke(app, ["agree", "-c", str(SF_CB), str(SF_DATA), "--replicates", "0"])
    assert res.exit_code == 0, res.output
    assert "Intraclass correlations" in res.stdout
    assert "0.290 [0.019, 0.761]" in res.stdout  # ICC(2,1) with its F-test interval
    assert "judge1 - judge2" in res.stdout
