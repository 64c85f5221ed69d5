"""`agreement` end to end on published examples and against the `krippendorff` package."""

import json
from pathlib import Path

import krippendorff
import numpy as np
import pytest
from typer.testing import CliRunner

from coderel.agree import agreement
from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codebook.load import load_codebook
from coderel.codings import Codings
from coderel.io.read import read_codings

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"

# Krippendorff, K. (2011). Computing Krippendorff's Alpha-Reliability. Annenberg School for
# Communication, Departmental Papers 43: four observers, twelve units, missing values.
N = None
DATA = [
    [1, 2, 3, 3, 2, 1, 4, 1, 2, N, N, N],
    [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, N, 3],
    [N, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, N],
    [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, N],
]
# Published: nominal .743, ordinal .815, interval .849 (memory; 951/1120), ratio .797.
PUBLISHED = {"nominal": 0.743, "ordinal": 0.815, "interval": 0.849, "ratio": 0.797}


def _four_observer_codings() -> Codings:
    scale = tuple(Category(i, str(i)) for i in range(1, 6))
    variables = tuple(
        Variable(
            name=level, level=level, categories=scale if level in ("nominal", "ordinal") else ()
        )
        for level in PUBLISHED
    )
    cb = Codebook(title="Krippendorff 2011", variables=variables)
    records = [
        {
            "unit": f"u{u:02d}",
            "coder": f"c{c}",
            "variable": v.name,
            "value": DATA[c][u] if v.is_categorical or DATA[c][u] is None else float(DATA[c][u]),
        }
        for v in variables
        for c in range(4)
        for u in range(12)
    ]
    return Codings.from_records(cb, records)


def test_four_observer_example_at_all_levels():
    result = agreement(_four_observer_codings(), replicates=200, seed=1)
    for level, published in PUBLISHED.items():
        est = result.variable(level).coefficients["krippendorff_alpha"].estimate
        assert round(est, 3) == published
    assert result.variable("nominal").pairable_values == 40


def test_same_seed_same_intervals():
    a = agreement(_four_observer_codings(), replicates=300, seed=7).to_dict()
    b = agreement(_four_observer_codings(), replicates=300, seed=7).to_dict()
    assert a == b


def test_demo_alphas_match_krippendorff_package():
    codings = read_codings(load_codebook(CB), [ROOT / "demo/sheets"])
    result = agreement(codings, replicates=50)
    for var in codings.codebook.variables:
        if var.multiple:
            continue  # the reference package has no set distance
        wide = codings.wide(var.name)
        applies = codings.for_variable(var.name).pivot(
            index="unit", columns="coder", values="applies"
        )
        applies = applies.reindex(index=wide.index, columns=wide.columns)
        if var.is_categorical:
            domain = list(var.codes)
            data = np.array(
                [
                    [
                        np.nan if (v is None or a is False) else domain.index(v)
                        for v, a in zip(row_v, row_a, strict=True)
                    ]
                    for row_v, row_a in zip(wide.T.values, applies.T.values, strict=True)
                ],
                dtype=float,
            )
            ref = krippendorff.alpha(
                data, level_of_measurement=var.level, value_domain=list(range(len(domain)))
            )
        else:
            data = np.array(
                [[np.nan if v is None else float(v) for v in row] for row in wide.T.values]
            )
            ref = krippendorff.alpha(data, level_of_measurement=var.level)
        got = result.variable(var.name).coefficients["krippendorff_alpha"].estimate
        assert got == pytest.approx(ref, abs=1e-9), var.name


def test_cli_json_has_every_coefficient_key():
    runner = CliRunner()
    res = runner.invoke(
        app,
        [
            "agree",
            "--codebook",
            str(CB),
            str(ROOT / "demo/sheets"),
            "--json",
            "--replicates",
            "100",
        ],
    )
    assert res.exit_code == 0
    data = json.loads(res.stdout)
    assert data["bootstrap"]["replicates"] == 100
    first = data["variables"][0]
    for key in (
        "percent_agreement",
        "cohen_kappa",
        "fleiss_kappa",
        "krippendorff_alpha",
        "verdict",
        "notes",
    ):
        assert key in first
    assert first["krippendorff_alpha"]["ci"] is not None


def test_cli_reproduces_the_four_observer_alphas_from_files():
    # The same published example as files a user would have: a long csv and a YAML codebook
    # (tests/data/published/); `coderel agree --json` prints .743 / .815 / .849 / .797.
    data = ROOT / "tests" / "data" / "published"
    res = CliRunner().invoke(
        app,
        [
            "agree",
            "-c",
            str(data / "krippendorff2011_codebook.yaml"),
            str(data / "krippendorff2011.csv"),
            "--json",
            "--replicates",
            "200",
        ],
    )
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    alphas = {v["variable"]: v["krippendorff_alpha"]["estimate"] for v in doc["variables"]}
    assert {k: round(a, 3) for k, a in alphas.items()} == PUBLISHED
    assert all(v["pairable_values"] == 40 for v in doc["variables"])
