"""Reliability across rounds: `coderel.protocol.trend` and `coderel trend`.

Oracle: the `krippendorff` package (Castro 2017; Krippendorff 2011, Computing Krippendorff's
alpha-reliability) per round; the change interval is checked against its definition (the
percentile interval of the difference of two independent replicate arrays, Efron & Tibshirani
1993, ch. 8).
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
from coderel.errors import UsageError
from coderel.protocol.trend import round_seed, trend
from coderel.stats.bootstrap import PoissonUnitWeights, evaluate_plans
from coderel.stats.intervals import percentile_interval
from coderel.stats.plan import Scale, build_plan

runner = CliRunner()
CB = Codebook(
    title="Rounds test (invented)",
    variables=(
        Variable("kind", "nominal", categories=tuple(Category(c, str(c)) for c in range(1, 5))),
        Variable("grade", "ordinal", categories=tuple(Category(c, str(c)) for c in range(1, 6))),
    ),
)


def _round(seed: int, units: int, errors: dict[str, float]) -> tuple[Codings, dict]:
    rng = np.random.default_rng(seed)
    truth = {"kind": rng.integers(1, 5, units), "grade": rng.integers(1, 6, units)}
    rows, arrays = [], {v: [] for v in truth}
    for coder, err in errors.items():
        for var, t in truth.items():
            k = 4 if var == "kind" else 5
            vals = np.where(rng.random(units) < err, rng.integers(1, k + 1, units), t)
            skip = rng.random(units) < 0.05
            arrays[var].append(np.where(skip, np.nan, vals))
            rows += [
                {"unit": f"u{u}", "coder": coder, "variable": var, "value": int(v)}
                for u, (v, s) in enumerate(zip(vals, skip, strict=True))
                if not s
            ]
    return Codings.from_records(CB, rows), {v: np.array(a) for v, a in arrays.items()}


def _rounds():
    pilot = _round(1, 60, {"ana": 0.4, "ben": 0.4, "cai": 0.4})
    one = _round(2, 80, {"ana": 0.2, "ben": 0.2, "cai": 0.2})
    two = _round(3, 80, {"ana": 0.1, "ben": 0.1, "cai": 0.6})
    return [("pilot", pilot), ("training 1", one), ("training 2", two)]


def test_alpha_per_round_against_krippendorff_package():
    rounds = _rounds()
    result = trend([(n, c) for n, (c, _) in rounds], replicates=300, seed=9)
    for name, (_, arrays) in rounds:
        for var, level, k in (("kind", "nominal", 4), ("grade", "ordinal", 5)):
            expected = krippendorff.alpha(
                reliability_data=arrays[var],
                level_of_measurement=level,
                value_domain=list(range(1, k + 1)),
            )
            assert result.alpha(name, var).alpha.estimate == pytest.approx(expected, abs=1e-9)
    assert result.alpha("pilot", "kind").alpha.ci is not None


def test_change_interval_is_the_percentile_interval_of_independent_differences():
    rounds = _rounds()
    codings = [(n, c) for n, (c, _) in rounds]
    result = trend(codings, replicates=400, seed=11, interval_method="percentile")
    reps = []
    for name, c in codings[:2]:
        w = PoissonUnitWeights.for_units(c.units, 400, round_seed(11, name))
        x = np.full((len(c.units), 3), -1)
        wide = c.wide("kind")
        for j, coder in enumerate(wide.columns):
            x[:, j] = [(-1 if v is None else int(v) - 1) for v in wide[coder]]
        ev = evaluate_plans([build_plan(x, Scale("categorical", "nominal", 4))], w)[0]
        reps.append(ev["krippendorff_alpha"].replicates)
    change = next(c for c in result.changes if c.variable == "kind" and c.to_round == "training 1")
    assert change.ci == pytest.approx(percentile_interval(reps[1] - reps[0], 0.95))
    assert change.change > 0
    assert change.ci[0] > 0  # agreement clearly rose from the pilot to training 1
    assert round_seed(11, "pilot") != round_seed(11, "training 1")


def test_drifting_coder_is_flagged_and_the_others_are_not():
    result = trend([(n, c) for n, (c, _) in _rounds()], replicates=400, seed=5)
    flagged = {(c.coder, c.round) for c in result.drifting}
    assert flagged == {("cai", "training 2")}
    cai = result.coder_round("cai", "training 2")
    assert cai.change < cai.others_change < 0.05  # the others lose only their pairs with cai
    assert "not proof" in " ".join(result.notes)


def test_round_name_twice_is_refused():
    c = _rounds()[0][1][0]
    with pytest.raises(UsageError, match="given twice"):
        trend([("r1", c), ("r1", c)], replicates=0)


def test_cli_trend_json_and_usage_errors(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        "title: t\nunit: unit\nvariables:\n  - name: kind\n    level: nominal\n"
        "    categories: [{code: 1, label: a}, {code: 2, label: b}, {code: 3, label: c}]\n",
        encoding="utf-8",
    )
    rng = np.random.default_rng(0)
    for r, err in (("r1", 0.5), ("r2", 0.1)):
        folder = tmp_path / r
        folder.mkdir()
        truth = rng.integers(1, 4, 40)
        for coder in ("ana", "ben"):
            vals = np.where(rng.random(40) < err, rng.integers(1, 4, 40), truth)
            pd.DataFrame({"unit": [f"u{i}" for i in range(40)], "kind": vals}).to_csv(
                folder / f"{coder}.csv", index=False
            )
    args = [
        "trend",
        "-c",
        str(cb),
        "--round",
        f"r1={tmp_path / 'r1'}",
        "--round",
        f"r2={tmp_path / 'r2'}",
    ]
    result = runner.invoke(app, [*args, "--json", "--replicates", "200"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["rounds"] == ["r1", "r2"]
    assert [a["round"] for a in data["alpha"]] == ["r1", "r2"]
    assert data["changes"][0]["change"] > 0
    twice = runner.invoke(
        app,
        [
            "trend",
            "-c",
            str(cb),
            "--round",
            f"r1={tmp_path / 'r1'}",
            "--round",
            f"r1={tmp_path / 'r2'}",
        ],
    )
    assert twice.exit_code == 2
    assert "given twice" in twice.output
    bad = runner.invoke(app, ["trend", "-c", str(cb), "--round", str(tmp_path / "r1")])
    assert bad.exit_code == 2
    assert "NAME=PATH" in bad.output
