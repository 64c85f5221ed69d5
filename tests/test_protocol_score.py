"""Training against an answer key: `coderel.protocol.score` and `coderel score`.

Oracles: scikit-learn's `cohen_kappa_score` (Cohen 1960; weighted, Cohen 1968) and
`confusion_matrix`; statsmodels' `cohens_kappa` for the large-sample standard error (Fleiss, Cohen
& Everitt 1969).
"""

import json
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score, confusion_matrix
from statsmodels.stats.inter_rater import cohens_kappa
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codebook.model import Thresholds
from coderel.codings import Codings
from coderel.errors import DataProblems, UsageError
from coderel.protocol.score import BELOW, PASS, score

runner = CliRunner()
CODES = (1, 2, 3, 4)


def _codebook(training: float | None = None) -> Codebook:
    cats = tuple(Category(c, f"label {c}") for c in CODES)
    return Codebook(
        title="Key test (invented)",
        unit="report_id",
        text_columns=("narrative",),
        thresholds=Thresholds(training=training),
        variables=(
            Variable("kind", "nominal", categories=cats),
            Variable("level", "ordinal", categories=cats),
            Variable("size", "ratio", range=(0.0, 100.0)),
        ),
    )


def _data(seed: int = 3, units: int = 60):
    rng = np.random.default_rng(seed)
    key = {n: rng.integers(1, 5, size=units) for n in ("kind", "level")}
    key["size"] = rng.integers(1, 50, size=units).astype(float)
    trainees = {}
    for name, err in (("good", 0.1), ("weak", 0.55)):
        vals = {}
        for n in ("kind", "level"):
            noise = rng.integers(1, 5, size=units)
            vals[n] = np.where(rng.random(units) < err, noise, key[n])
        vals["size"] = np.where(rng.random(units) < err, key["size"] + 3, key["size"])
        trainees[name] = vals
    return key, trainees


def _codings(cb, table: dict[str, dict[str, np.ndarray]]) -> Codings:
    rows = []
    for coder, vals in table.items():
        for name, arr in vals.items():
            for u, v in enumerate(arr):
                value = float(v) if name == "size" else int(v)
                rows.append({"unit": f"R{u:03d}", "coder": coder, "variable": name, "value": value})
    return Codings.from_records(cb, rows)


def test_kappa_against_scikit_learn_and_statsmodels():
    cb = _codebook()
    key, trainees = _data()
    result = score(_codings(cb, {"lead": key}), _codings(cb, trainees), replicates=200, seed=5)
    for name, vals in trainees.items():
        for var, weights, coef in (
            ("kind", None, "cohen_kappa"),
            ("level", None, "cohen_kappa"),
            ("level", "linear", "weighted_kappa_linear"),
            ("level", "quadratic", "weighted_kappa_quadratic"),
        ):
            s = result.score(name, var)
            expected = cohen_kappa_score(vals[var], key[var], labels=list(CODES), weights=weights)
            assert s.coefficients[coef].estimate == pytest.approx(expected, abs=1e-12)
            table = confusion_matrix(vals[var], key[var], labels=list(CODES))
            assert np.array_equal(np.array(s.confusion), table)
            ref = cohens_kappa(
                table,
                wt={None: None, "linear": "linear", "quadratic": "quadratic"}[weights],
                return_results=True,
            )
            assert s.coefficients[coef].se == pytest.approx(ref.std_kappa, abs=1e-9)
            agree = float(np.mean(vals[var] == key[var]))
            assert s.coefficients["percent_agreement"].estimate == pytest.approx(agree)
            lo, hi = s.coefficients[coef].ci
            assert lo <= s.coefficients[coef].estimate <= hi


def test_pass_and_fail_against_the_training_threshold():
    key, trainees = _data()
    strict = score(
        _codings(_codebook(), {"lead": key}), _codings(_codebook(), trainees), replicates=50
    )
    assert strict.score("good", "kind").verdict == PASS
    assert strict.score("weak", "kind").verdict == BELOW
    assert strict.score("good", "level").judged_by == "weighted_kappa_quadratic"
    assert strict.score("good", "size").judged_by == "krippendorff_alpha"
    assert strict.summary("weak").below
    assert strict.score("weak", "kind").threshold == 0.8  # default: the reliable threshold
    lenient_cb = _codebook(training=0.05)
    lenient = score(
        _codings(lenient_cb, {"lead": key}), _codings(lenient_cb, trainees), replicates=50
    )
    assert lenient.score("weak", "kind").threshold == 0.05
    assert lenient.score("weak", "kind").verdict == PASS


def test_feedback_rows_are_exactly_the_differences():
    cb = _codebook()
    key, trainees = _data()
    result = score(_codings(cb, {"lead": key}), _codings(cb, trainees), replicates=0)
    fb = result.feedback["weak"]
    for var in ("kind", "level"):
        differ = int(np.sum(trainees["weak"][var] != key[var]))
        assert (fb["variable"] == var).sum() == differ == result.score("weak", var).differences
    row = fb[fb["variable"] == "kind"].iloc[0]
    assert row["trainee_value"].split(" = ")[1].startswith("label")
    assert row["key_value"] != row["trainee_value"]


def test_key_units_no_trainee_coded_and_key_of_two_coders():
    cb = _codebook()
    key, trainees = _data()
    key_c = _codings(cb, {"lead": key})
    few = trainees["good"]
    short = {"good": {n: v[:50] for n, v in few.items()}}
    with pytest.raises(DataProblems) as err:
        score(key_c, _codings(cb, short), replicates=0)
    problems = err.value.problems
    assert [p.code for p in problems] == ["key-unit-not-coded"] * 10
    assert problems[0].unit == "R050"
    with pytest.raises(DataProblems) as err:
        score(_codings(cb, {"lead": key, "other": key}), _codings(cb, trainees), replicates=0)
    assert err.value.problems[0].code == "key-not-one-coder"
    with pytest.raises(UsageError, match="also among the trainees"):
        score(_codings(cb, {"good": key}), _codings(cb, trainees), replicates=0)


CODEBOOK_YAML = """\
title: Key test (invented)
version: "1.0"
unit: report_id
text_columns: [narrative]
variables:
  - name: kind
    level: nominal
    categories: [{code: 1, label: One}, {code: 2, label: Two}, {code: 3, label: Three}]
"""


def _write_sheet(path: Path, rows: list[dict]) -> None:
    pd.DataFrame(rows).to_csv(path, index=False)


def _project(tmp_path: Path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(CODEBOOK_YAML, encoding="utf-8")
    rng = np.random.default_rng(1)
    truth = rng.integers(1, 4, size=30)
    key_rows = [
        {
            "report_id": f"R{u:02d}",
            "narrative": '=HYPERLINK("http://example.invalid")' if u == 0 else f"text {u}",
            "kind": int(v),
            "kind_note": "=1+1 see the definition" if u == 0 else "",
        }
        for u, v in enumerate(truth)
    ]
    sheets = tmp_path / "sheets"
    sheets.mkdir()
    _write_sheet(tmp_path / "key.csv", key_rows)
    weak = np.where(rng.random(30) < 0.5, rng.integers(1, 4, size=30), truth)
    weak[0] = truth[0] % 3 + 1  # differs on the unit with the formula-like note
    _write_sheet(
        sheets / "trainee_ann.csv",
        [{"report_id": f"R{u:02d}", "kind": int(v)} for u, v in enumerate(truth)],
    )
    _write_sheet(
        sheets / "trainee_bob.csv",
        [{"report_id": f"R{u:02d}", "kind": int(v)} for u, v in enumerate(weak)],
    )
    return cb, sheets, tmp_path / "key.csv"


def test_cli_score_json_and_feedback_workbooks(tmp_path):
    cb, sheets, key = _project(tmp_path)
    before = {p: p.read_bytes() for p in [cb, key, *sheets.iterdir()]}
    out = tmp_path / "feedback"
    result = runner.invoke(
        app,
        [
            "score",
            "-c",
            str(cb),
            "--key",
            str(key),
            str(sheets),
            "-o",
            str(out),
            "--json",
            "--replicates",
            "100",
        ],
    )
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    verdicts = {t["trainee"]: t["verdict"] for t in data["trainees"]}
    assert verdicts == {"trainee_ann": "pass", "trainee_bob": "below threshold"}
    assert data["key"] == {"coder": "key", "units": 30}
    wb = openpyxl.load_workbook(out / "feedback_trainee_bob.xlsx")
    ws = wb["differences"]
    header = [c.value for c in ws[1]]
    assert header == ["unit", "variable", "trainee_value", "key_value", "key_note", "narrative"]
    first = [c.value for c in ws[2]]
    assert first[0] == "R00"
    assert first[4] == "'=1+1 see the definition"  # neutralised, not a formula
    assert first[5].startswith("'=HYPERLINK")
    assert all(c.data_type != "f" for row in ws.iter_rows() for c in row)
    assert "scores" in wb.sheetnames
    assert {p: p.read_bytes() for p in before} == before


def test_cli_score_located_message_for_uncoded_key_units(tmp_path):
    cb, sheets, key = _project(tmp_path)
    for f in sheets.iterdir():
        frame = pd.read_csv(f)
        frame[frame["report_id"] != "R07"].to_csv(f, index=False)
    result = runner.invoke(
        app, ["score", "-c", str(cb), "--key", str(key), str(sheets), "--replicates", "0"]
    )
    assert result.exit_code == 1
    assert "key-unit-not-coded" in result.output
    assert "R07" in result.output
    assert "key.csv" in result.output
    assert "Traceback" not in result.output
