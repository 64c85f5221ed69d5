"""The permutation test of no change in alpha between two rounds (coderel/protocol/permutation.py).

Oracle: the `krippendorff` package (Castro 2017; Krippendorff 2011, Computing Krippendorff's
alpha-reliability) on each shuffle's two groups of units, rebuilt by hand from the same shuffles;
the p-value's definition from Phipson & Smyth (2010), (1 + hits) / (1 + shuffles).
"""

import json

import krippendorff
import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.protocol.permutation import (
    change_under_shuffles,
    permutation_p,
    shuffle_seed,
    shuffled_groups,
)
from coderel.protocol.trend import trend
from coderel.stats.plan import Scale

runner = CliRunner()


def _data(rng, units, coders, err, k=4):
    truth = rng.integers(0, k, units)
    x = np.tile(truth[:, None], (1, coders))
    slip = rng.random((units, coders)) < err
    x[slip] = rng.integers(0, k, slip.sum())
    x[rng.random((units, coders)) < 0.05] = -1
    return x


def _alpha(x, level, k):
    data = np.where(x < 0, np.nan, x).T.astype(float)
    return krippendorff.alpha(
        reliability_data=data, level_of_measurement=level, value_domain=list(range(k))
    )


@pytest.mark.parametrize("level", ["nominal", "ordinal"])
def test_each_shuffle_against_krippendorff_on_its_groups(level):
    rng = np.random.default_rng(4)
    a, b = _data(rng, 30, 3, 0.5), _data(rng, 25, 3, 0.15)
    x = np.vstack([a, b])
    earlier = np.r_[np.ones(30, bool), np.zeros(25, bool)]
    observed, changes = change_under_shuffles(x, Scale("categorical", level, 4), earlier, 40, 9)
    assert observed == pytest.approx(_alpha(b, level, 4) - _alpha(a, level, 4), abs=1e-9)
    groups = shuffled_groups(55, 30, 40, 9)
    for g, change in zip(groups[:15], changes[:15], strict=False):
        expected = _alpha(x[~g], level, 4) - _alpha(x[g], level, 4)
        assert change == pytest.approx(expected, abs=1e-9)
    hits = np.sum(np.abs(changes) >= abs(observed) - 1e-12)
    assert permutation_p(observed, changes) == (1 + hits) / 41


def _codings(frame_rows):
    cats = tuple(Category(c, str(c)) for c in range(1, 5))
    cb = Codebook(title="t", variables=(Variable("kind", "nominal", categories=cats),))
    return Codings.from_records(cb, frame_rows)


def _round(rng, units, err, prefix="u"):
    x = _data(rng, units, 3, err) + 1
    return [
        {"unit": f"{prefix}{u}", "coder": f"c{j}", "variable": "kind", "value": int(v)}
        for u in range(units)
        for j, v in enumerate(x[u])
        if v > 0
    ]


def test_trend_gives_a_small_p_for_a_real_change_and_not_for_none():
    rng = np.random.default_rng(1)
    rounds = [
        ("pilot", _codings(_round(rng, 40, 0.7))),
        ("training", _codings(_round(rng, 40, 0.1))),
        ("again", _codings(_round(rng, 40, 0.1))),
    ]
    result = trend(rounds, replicates=500, seed=2)
    rise, same = result.changes
    assert rise.p_value < 0.01
    assert same.p_value > 0.05
    assert rise.to_dict()["p_value"] == rise.p_value
    assert shuffle_seed(2, "pilot", "training") != shuffle_seed(2, "training", "again")


def test_cli_shows_p_and_json_carries_it(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        "title: t\nunit: unit\nvariables:\n  - name: kind\n    level: nominal\n"
        "    categories: [{code: 1, label: a}, {code: 2, label: b}, {code: 3, label: c}, "
        "{code: 4, label: d}]\n",
        encoding="utf-8",
    )
    rng = np.random.default_rng(5)
    rows = [dict(r, round="r1") for r in _round(rng, 40, 0.6)]
    rows += [dict(r, round="r2") for r in _round(rng, 40, 0.1)]
    pd.DataFrame(rows)[["unit", "coder", "variable", "value", "round"]].to_csv(
        tmp_path / "long.csv", index=False
    )
    args = ["trend", "-c", str(cb), str(tmp_path / "long.csv"), "--replicates", "300"]
    js = runner.invoke(app, [*args, "--json"])
    assert js.exit_code == 0, js.output
    (change,) = json.loads(js.stdout)["changes"]
    assert 0 < change["p_value"] < 0.05
    text = runner.invoke(app, args)
    assert " p .0" in text.stdout or " p <.001" in text.stdout
    report = tmp_path / "report.html"
    made = runner.invoke(
        app,
        [
            "report",
            "-c",
            str(cb),
            str(tmp_path / "long.csv"),
            "-o",
            str(report),
            "--replicates",
            "300",
        ],
    )
    assert made.exit_code == 0, made.output
    html = report.read_text(encoding="utf-8")
    assert "p = ." in html or "p &lt; .001" in html
    assert "permutation test of no change" in html
