"""Same data, same answer for `score` and `trend`: bootstrap weights keyed by unit ID.

Oracle: the definition of the keyed bootstrap (coderel/stats/bootstrap.py; Hanley & MacGibbon
2006 Poisson weights, a pure function of seed, unit ID and replicate). Any permutation of rows
and files must give byte-identical `--json`; a round's interval depends on its own units and
name only, not on the rounds beside it (independent resamples per round, Efron & Tibshirani
1993, ch. 8).
"""

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.protocol.trend import trend

runner = CliRunner()
CB_YAML = (
    "title: t\nunit: unit\nvariables:\n  - name: kind\n    level: nominal\n"
    "    categories: [{code: 1, label: a}, {code: 2, label: b}, {code: 3, label: c}]\n"
    "  - name: grade\n    level: ordinal\n"
    "    categories: [{code: 1, label: low}, {code: 2, label: mid}, {code: 3, label: high}]\n"
)


def _long(rng, coders, units, err, prefix="u"):
    truth = {"kind": rng.integers(1, 4, units), "grade": rng.integers(1, 4, units)}
    rows = []
    for coder, e in zip(coders, err, strict=True):
        for var, t in truth.items():
            vals = np.where(rng.random(units) < e, rng.integers(1, 4, units), t)
            rows += [(f"{prefix}{i}", coder, var, int(v)) for i, v in enumerate(vals)]
    return pd.DataFrame(rows, columns=["unit", "coder", "variable", "value"])


def _write_split(frame, folder, seed):
    """One file per coder (a coder's rows belong to one file), rows shuffled by ``seed``,
    files named so that their order differs from seed to seed."""
    folder.mkdir()
    shuffled = frame.sample(frac=1.0, random_state=seed).reset_index(drop=True)
    coders = sorted(set(shuffled["coder"]))
    rng = np.random.default_rng(seed)
    order = rng.permutation(len(coders))
    for rank, coder in zip(order, coders, strict=True):
        shuffled[shuffled["coder"] == coder].to_csv(folder / f"{rank}.csv", index=False)


@pytest.fixture
def project(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(CB_YAML, encoding="utf-8")
    rng = np.random.default_rng(8)
    trainees = _long(rng, ["ann", "bob", "cy"], 40, [0.1, 0.5, 0.2])
    key = trainees[trainees["coder"] == "ann"].assign(coder="key")
    rounds = {
        "pilot": _long(rng, ["ann", "bob"], 30, [0.5, 0.5]),
        "training": _long(rng, ["ann", "bob", "cy"], 35, [0.2, 0.2, 0.4]),
    }
    return tmp_path, cb, trainees, key, rounds


def _json(args):
    result = runner.invoke(app, [*args, "--json", "--replicates", "300", "--seed", "6"])
    assert result.exit_code == 0, result.output
    return result.stdout


def test_score_json_is_byte_identical_under_any_permutation(project):
    tmp, cb, trainees, key, _ = project
    key.sample(frac=1.0, random_state=1).to_csv(tmp / "key1.csv", index=False)
    key.sample(frac=1.0, random_state=2).to_csv(tmp / "key2.csv", index=False)
    _write_split(trainees, tmp / "t1", 3)
    _write_split(trainees, tmp / "t2", 4)
    first = _json(["score", "-c", str(cb), "--key", str(tmp / "key1.csv"), str(tmp / "t1")])
    files = sorted((tmp / "t2").iterdir(), reverse=True)
    second = _json(["score", "-c", str(cb), "--key", str(tmp / "key2.csv"), *map(str, files)])
    assert first == second


def test_trend_json_is_byte_identical_under_any_permutation(project):
    tmp, cb, *_, rounds = project
    runs = []
    for seed in (11, 12):
        args = ["trend", "-c", str(cb)]
        for name, frame in rounds.items():
            _write_split(frame, tmp / f"{name}-{seed}", seed)
            args += ["--round", f"{name}={tmp / f'{name}-{seed}'}"]
        runs.append(_json(args))
    assert runs[0] == runs[1]
    # the same rounds as one long table with a round column, rows shuffled
    both = pd.concat([f.assign(round=n) for n, f in rounds.items()])
    both.sample(frac=1.0, random_state=9).to_csv(tmp / "long.csv", index=False)
    assert _json(["trend", "-c", str(cb), str(tmp / "long.csv")]) == runs[0]


def _codings(frame):
    cats = tuple(Category(c, str(c)) for c in (1, 2, 3))
    cb = Codebook(
        title="t",
        variables=(
            Variable("kind", "nominal", categories=cats),
            Variable("grade", "ordinal", categories=cats),
        ),
    )
    return Codings.from_records(cb, frame.to_dict("records"))


def test_a_rounds_interval_depends_on_its_own_units_and_name_only(project):
    *_, rounds = project
    pilot, training = (_codings(f) for f in rounds.values())
    together = trend([("pilot", pilot), ("training", training)], replicates=300, seed=2)
    alone = trend([("training", training)], replicates=300, seed=2)
    for var in ("kind", "grade"):
        assert together.alpha("training", var).alpha == alone.alpha("training", var).alpha
    # the same units under another round name are resampled independently
    renamed = trend([("training again", training)], replicates=300, seed=2)
    assert (
        renamed.alpha("training again", "kind").alpha.ci != alone.alpha("training", "kind").alpha.ci
    )
