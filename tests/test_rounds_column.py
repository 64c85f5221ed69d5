"""Rounds from a `round` column of long data: the same answer as one folder per round.

Oracle: the same codings read as one folder per round (`--round NAME=PATH`), whose per-round
alpha is checked against the `krippendorff` package in tests/test_protocol_trend.py; here the
column must give byte-identical `trend --json` (same data, same answer), whatever the row order.
"""

import json

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings
from coderel.io.rounds import round_names, split_rounds

runner = CliRunner()


@pytest.fixture
def project(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        "title: t\nunit: unit\nvariables:\n  - name: kind\n    level: nominal\n"
        "    categories: [{code: 1, label: a}, {code: 2, label: b}, {code: 3, label: c}]\n"
        "  - name: grade\n    level: ordinal\n"
        "    categories: [{code: 1, label: low}, {code: 2, label: mid}, {code: 3, label: high}]\n",
        encoding="utf-8",
    )
    rng = np.random.default_rng(3)
    long_rows = []
    for r, err in (("pilot", 0.6), ("training 1", 0.3), ("training 2", 0.1)):
        folder = tmp_path / r
        folder.mkdir()
        n = 40
        truth = {"kind": rng.integers(1, 4, n), "grade": rng.integers(1, 4, n)}
        for coder in ("ana", "ben", "cai"):
            wide = {"unit": [f"u{i}" for i in range(n)]}
            for var, t in truth.items():
                wide[var] = np.where(rng.random(n) < err, rng.integers(1, 4, n), t)
            frame = pd.DataFrame(wide)
            frame.to_csv(folder / f"{coder}.csv", index=False)
            for row in frame.itertuples(index=False):
                for var in truth:
                    long_rows.append((row.unit, coder, var, int(getattr(row, var)), r))
    long = pd.DataFrame(long_rows, columns=["unit", "coder", "variable", "value", "round"])
    # the rows in another order than the folders give them
    long = long.sample(frac=1.0, random_state=5).reset_index(drop=True)
    long.to_csv(tmp_path / "long.csv", index=False)
    return tmp_path, cb


def _trend(cb, *args):
    result = runner.invoke(
        app, ["trend", "-c", str(cb), *args, "--json", "--replicates", "300", "--seed", "4"]
    )
    assert result.exit_code == 0, result.output
    return result.stdout


def test_round_column_gives_the_same_trend_as_folders(project):
    tmp, cb = project
    folders = _trend(
        cb,
        *("--round", f"pilot={tmp / 'pilot'}"),
        *("--round", f"training 1={tmp / 'training 1'}"),
        *("--round", f"training 2={tmp / 'training 2'}"),
    )
    named = _trend(
        cb, str(tmp / "long.csv"), "--round", "pilot", "--round", "training 1", "-r", "training 2"
    )
    everything = _trend(cb, str(tmp / "long.csv"))  # natural order: pilot, training 1, training 2
    assert named == folders
    assert everything == folders
    data = json.loads(folders)
    assert data["rounds"] == ["pilot", "training 1", "training 2"]
    assert all(a["ci"] for a in data["alpha"])


def test_split_rounds_restores_the_unit_ids(project):
    tmp, cb_path = project
    cb = load_codebook(cb_path)
    codings = read_codings(cb, [tmp / "long.csv"])
    assert not codings.problems.errors
    assert round_names(codings) == ["pilot", "training 1", "training 2"]
    for name, part in split_rounds(codings):
        alone = read_codings(cb, [tmp / name])
        cols = ["unit", "coder", "variable", "value"]
        a = part.frame[cols].sort_values(cols[:3]).reset_index(drop=True)
        b = alone.frame[cols].sort_values(cols[:3]).reset_index(drop=True)
        pd.testing.assert_frame_equal(a.astype(str), b.astype(str))
        assert part.units == alone.units


def test_blank_round_and_unknown_round_name(project):
    tmp, cb = project
    long = pd.read_csv(tmp / "long.csv", dtype=str)
    long.loc[3, "round"] = None
    bad = tmp / "bad"
    bad.mkdir()
    long.to_csv(bad / "long.csv", index=False)
    result = runner.invoke(app, ["validate", "-c", str(cb), str(bad), "--json"])
    assert result.exit_code == 1
    problems = [p for p in json.loads(result.stdout)["problems"] if p["code"] == "round-blank"]
    assert len(problems) == 1
    assert problems[0]["cell"] == "E5"  # row 3 of the data is line 5 (header on line 1)
    assert problems[0]["file"] == "long.csv"
    unknown = runner.invoke(app, ["trend", "-c", str(cb), str(tmp / "long.csv"), "-r", "final"])
    assert unknown.exit_code == 2
    assert "no such round" in unknown.output
    assert "pilot, training 1, training 2" in unknown.output
    assert "Traceback" not in unknown.output
    none = runner.invoke(app, ["trend", "-c", str(cb), str(tmp / "pilot")])
    assert none.exit_code == 2
    assert "round" in none.output


def test_report_reads_the_round_column_of_its_data(project):
    tmp, cb = project
    base = ["report", "-c", str(cb), "--json", "--replicates", "100"]
    column = runner.invoke(app, [*base, str(tmp / "long.csv")])
    assert column.exit_code == 0, column.output
    folders = runner.invoke(
        app,
        [
            *base,
            str(tmp / "long.csv"),
            *("--round", f"pilot={tmp / 'pilot'}"),
            *("--round", f"training 1={tmp / 'training 1'}"),
            *("--round", "training 2"),
        ],
    )
    assert folders.exit_code == 0, folders.output
    a, b = json.loads(column.stdout)["rounds"], json.loads(folders.stdout)["rounds"]
    assert a["rounds"] == ["pilot", "training 1", "training 2"]
    assert a == b
