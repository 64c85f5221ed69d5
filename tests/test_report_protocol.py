"""The protocol's parts of the report: coder diagnostics in the Coders section, 'Training against
the key' with --key, 'Reliability across rounds' with --round, in HTML, Markdown, xlsx and JSON."""

import json
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
from typer.testing import CliRunner

from coderel.cli import app

runner = CliRunner()
CODEBOOK = """\
title: Report protocol test (invented)
unit: report_id
text_columns: [narrative]
variables:
  - name: kind
    level: nominal
    categories: [{code: 1, label: One}, {code: 2, label: Two}, {code: 3, label: Three}]
  - name: grade
    level: ordinal
    categories: [{code: 1, label: Low}, {code: 2, label: Mid}, {code: 3, label: High}]
"""
SECRET = "the narrative mentions Hollis Farm"


def _sheets(folder: Path, coders: dict[str, float], seed: int, units: int = 40) -> None:
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True)
    truth = {v: rng.integers(1, 4, units) for v in ("kind", "grade")}
    for coder, err in coders.items():
        frame = pd.DataFrame({"report_id": [f"R{u:02d}" for u in range(units)]})
        frame["narrative"] = SECRET
        for v, t in truth.items():
            frame[v] = np.where(rng.random(units) < err, rng.integers(1, 4, units), t)
        frame.to_csv(folder / f"{coder}.csv", index=False)


def test_report_with_key_and_rounds(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(CODEBOOK, encoding="utf-8")
    _sheets(tmp_path / "r1", {"ana": 0.5, "ben": 0.5, "cai": 0.5}, seed=1)
    _sheets(tmp_path / "r2", {"ana": 0.1, "ben": 0.1, "cai": 0.2}, seed=2)
    key = tmp_path / "key"
    _sheets(key, {"lead": 0.0}, seed=2)
    out = tmp_path / "out" / "report.html"
    args = [
        "report",
        "-c",
        str(cb),
        str(tmp_path / "r2"),
        "--key",
        str(key / "lead.csv"),
        "--round",
        f"first={tmp_path / 'r1'}",
        "--round",
        f"second={tmp_path / 'r2'}",
    ]
    result = runner.invoke(
        app, [*args, "-o", str(out), "--format", "html,md,xlsx", "--replicates", "100"]
    )
    assert result.exit_code == 0, result.output
    html = out.read_text(encoding="utf-8")
    for anchor in (
        "coders-drop-one",
        "coders-homogeneity",
        "coders-shares",
        "training",
        "training-scores",
        "rounds",
        "rounds-alpha",
        "rounds-coders",
        "chart-trend",
    ):
        assert f'id="{anchor}"' in html, anchor
    assert "Training against the key" in html
    assert "Reliability across rounds" in html
    assert "Hollis" not in html
    md = out.with_suffix(".md").read_text(encoding="utf-8")
    assert "## Training against the key" in md
    assert "chart-trend.svg" in md
    assert (out.parent / "report-charts" / "chart-trend.svg").is_file()
    sheets = openpyxl.load_workbook(out.with_suffix(".xlsx")).sheetnames
    assert {"coders_drop_one", "coders_homogeneity", "training", "rounds", "rounds_coders"} <= set(
        sheets
    )
    js = runner.invoke(app, [*args, "--replicates", "50", "--json"])
    assert js.exit_code == 0, js.output
    data = json.loads(js.stdout)
    assert data["training"]["key"]["coder"] == "lead"
    assert data["rounds"]["rounds"] == ["first", "second"]
    assert {v["variable"] for v in data["coder_diagnostics"]["variables"]} == {"kind", "grade"}


def test_report_without_protocol_options_has_no_training_or_rounds(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(CODEBOOK, encoding="utf-8")
    _sheets(tmp_path / "r1", {"ana": 0.2, "ben": 0.2}, seed=3)
    out = tmp_path / "report.html"
    result = runner.invoke(
        app, ["report", "-c", str(cb), str(tmp_path / "r1"), "-o", str(out), "--replicates", "50"]
    )
    assert result.exit_code == 0, result.output
    html = out.read_text(encoding="utf-8")
    assert 'id="training"' not in html
    assert 'id="rounds"' not in html
    assert 'id="coders-homogeneity"' in html
    assert 'id="coders-drop-one"' not in html  # two coders: nothing to drop
