"""``coderel plan``: the minimum reliability sample and the precision plan.

Published values: Krippendorff, K. (2004). *Content Analysis: An Introduction to Its Methodology*
(2nd ed.), Sage, ch. 11.4, Table 11.2 (after Bloch, D. A., & Kraemer, H. C. 1989, "2 x 2 kappa
coefficients", *Biometrics* 45, 269-287, eq. 3.7): two coders, p_c = 1/4, one-tailed p = .05 ->
139 units for a smallest acceptable alpha of .800 and 81 for .667.

The precision curve is checked against a brute-force bootstrap: the same resampled units, with
alpha of every replicate computed by the ``krippendorff`` package (Castro 2017), used here only as
an outside reference.
"""

from __future__ import annotations

import json

import krippendorff
import numpy as np
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codings import Codings
from coderel.errors import UsageError
from coderel.protocol.pilot import pilot_from_codings
from coderel.protocol.precision import precision_plans, resample_weights
from coderel.protocol.sample_size import minimum_units, plan_sample
from tests.conftest import ranger_codebook

CODEBOOK = "sample_codebooks/wildlife_encounters.yaml"
runner = CliRunner()


# Krippendorff (2004), Table 11.2: p_c = .25, p = .05.
@pytest.mark.parametrize(("alpha_min", "expected"), [(0.800, 139), (0.667, 81)])
def test_published_table_values(alpha_min, expected):
    assert minimum_units(alpha_min, 0.25, 0.05) == expected


@pytest.mark.parametrize(("alpha_min", "expected"), [(0.800, 139), (0.667, 81)])
def test_cli_gives_table_value_for_every_categorical_variable(alpha_min, expected):
    # Krippendorff (2004), Table 11.2, as above.
    result = runner.invoke(
        app,
        [
            "plan",
            "--codebook",
            CODEBOOK,
            "--smallest-share",
            "0.25",
            "--alpha-min",
            str(alpha_min),
            "--significance",
            "0.05",
            "--json",
        ],
    )
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    categorical = [v for v in data["variables"] if v["categories"]]
    assert len(categorical) == 7
    assert {v["n_minimum"] for v in categorical} == {expected}
    assert {v["smallest_share_source"] for v in categorical} == {"given (--smallest-share)"}
    assert data["recommendation"] == expected


def test_formula_grows_as_the_rarest_category_gets_rarer_and_alpha_min_higher():
    sizes = [minimum_units(0.8, p) for p in (0.5, 0.25, 0.1, 0.05)]
    assert sizes == sorted(sizes)
    assert len(set(sizes)) == 4
    assert minimum_units(0.9, 0.25) > minimum_units(0.8, 0.25) > minimum_units(0.667, 0.25)
    assert minimum_units(0.8, 0.25, 0.01) > minimum_units(0.8, 0.25, 0.05)


def test_share_comes_from_codebook_when_nothing_else():
    plan = plan_sample(ranger_codebook())
    animal = next(v for v in plan.variables if v.variable == "animal")
    assert animal.smallest_share == pytest.approx(0.25)  # 4 categories: 1/k
    assert animal.share_source == "codebook (1/k)"
    assert animal.n_minimum == 139  # Krippendorff (2004), Table 11.2, p_c = 1/4, alpha .800
    distance = next(v for v in plan.variables if v.variable == "distance_m")
    assert distance.n_minimum is None
    assert "pilot" in distance.notes[0]


@pytest.mark.parametrize(
    "kwargs",
    [
        {"significance": 0.02},
        {"smallest_share": 0.7},
        {"smallest_share": 0.0},
        {"alpha_min": 1.0},
        {"half_width": 0.0},
    ],
)
def test_bad_settings_are_usage_errors(kwargs):
    with pytest.raises(UsageError):
        plan_sample(ranger_codebook(), **kwargs)


def _pilot_codings(n_units: int = 12, seed: int = 3) -> Codings:
    rng = np.random.default_rng(seed)
    records = []
    for u in range(n_units):
        truth = int(rng.integers(1, 5))
        dist = float(rng.integers(0, 200))
        for coder in ("ana", "ben"):
            animal = truth if rng.random() < 0.8 else int(rng.integers(1, 5))
            d = dist + float(rng.integers(-10, 11))
            records.append(
                {"unit": f"U{u:02d}", "coder": coder, "variable": "animal", "value": animal}
            )
            records.append(
                {"unit": f"U{u:02d}", "coder": coder, "variable": "distance_m", "value": d}
            )
    return Codings.from_records(ranger_codebook(), records)


def test_pilot_shares_and_unused_categories_noted():
    records = [
        {"unit": f"U{u}", "coder": c, "variable": "animal", "value": 1 if u < 9 else 2}
        for u in range(12)
        for c in ("ana", "ben")
    ]
    pilot = pilot_from_codings(Codings.from_records(ranger_codebook(), records))
    plan = plan_sample(ranger_codebook(), pilot=pilot, replicates=200)
    animal = next(v for v in plan.variables if v.variable == "animal")
    assert animal.smallest_share == pytest.approx(6 / 24)
    assert animal.share_source == "pilot"
    assert any("never used in the pilot: 3 = Cougar, 4 = Other" in n for n in animal.notes)
    assert any("too few" in n for n in plan.notes)  # 12 pairable units < 30


@pytest.mark.parametrize(("variable", "level"), [("animal", "nominal"), ("distance_m", "ratio")])
def test_precision_curve_matches_brute_force_krippendorff(variable, level):
    pilot = pilot_from_codings(_pilot_codings())
    pv = pilot.variables[variable]
    sizes, reps, seed = (10, 25), 300, 11
    (result,) = precision_plans([pv], target=0.01, replicates=reps, seed=seed, sizes=sizes)
    x = pv.x  # units x coders of value indices
    if pv.scale.kind == "numeric":
        values = np.where(x >= 0, pv.scale.values[np.maximum(x, 0)], np.nan)
        domain = None
    else:
        values = np.where(x >= 0, x.astype(float), np.nan)
        domain = list(range(pv.scale.size))
    for (size, ours), _ in zip(result.curve, sizes, strict=True):
        w = resample_weights(x.shape[0], size, reps, seed).astype(int)
        brute = []
        for row in w:
            units = np.repeat(np.arange(x.shape[0]), row)
            data = values[units].T  # coders x units, as the package expects
            try:
                brute.append(
                    krippendorff.alpha(
                        reliability_data=data, level_of_measurement=level, value_domain=domain
                    )
                )
            except ValueError:  # one value only in the draw: alpha undefined
                brute.append(np.nan)
        brute = np.array(brute)
        finite = brute[np.isfinite(brute)]
        lo, hi = np.quantile(finite, [0.025, 0.975])
        assert ours == pytest.approx((hi - lo) / 2, abs=1e-9)


def test_precision_plan_is_reproducible_and_shrinks_with_n():
    pilot = pilot_from_codings(_pilot_codings(40))
    a = plan_sample(ranger_codebook(), pilot=pilot, replicates=300, seed=5)
    b = plan_sample(ranger_codebook(), pilot=pilot, replicates=300, seed=5)
    assert a.to_dict() == b.to_dict()
    dist = next(v for v in a.variables if v.variable == "distance_m")
    widths = [w for _, w in dist.curve if w is not None]
    assert widths[0] > widths[-1]
    assert dist.n_precision is not None
    # The chosen n meets the target; the grid point below it (if any) does not.
    assert all(w > 0.05 for n, w in dist.curve if n < dist.n_precision and w is not None)


def test_cli_plan_with_pilot_writes_xlsx(tmp_path):
    out = tmp_path / "plan.xlsx"
    result = runner.invoke(
        app,
        ["plan", "-c", CODEBOOK, "--pilot", "demo/sheets", "--replicates", "200", "-o", str(out)],
    )
    assert result.exit_code == 0, result.output
    assert "recommendation:" in result.stdout
    import openpyxl

    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames == ["plan", "precision curve"]


@pytest.mark.parametrize(
    "args",
    [
        ["--significance", "0.02"],
        ["--smallest-share", "0.8"],
        ["--alpha-min", "abc"],
        ["--pilot", "no-such-folder"],
    ],
)
def test_cli_bad_input_is_located_message_and_usage_exit(args):
    result = runner.invoke(app, ["plan", "-c", CODEBOOK, *args])
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output


def test_no_precision_plan_from_perfect_agreement_or_tiny_pilot():
    perfect = [
        {"unit": f"U{u}", "coder": c, "variable": "animal", "value": 1 + u % 3}
        for u in range(30)
        for c in ("ana", "ben")
    ]
    plan = plan_sample(
        ranger_codebook(),
        pilot=pilot_from_codings(Codings.from_records(ranger_codebook(), perfect)),
        replicates=200,
    )
    animal = next(v for v in plan.variables if v.variable == "animal")
    assert animal.pilot_alpha == pytest.approx(1.0)
    assert animal.n_precision is None
    assert animal.curve == ()
    assert any("agreed on every unit" in n for n in animal.notes)
    tiny = pilot_from_codings(_pilot_codings(n_units=6))
    plan = plan_sample(ranger_codebook(), pilot=tiny, replicates=200)
    distance = next(v for v in plan.variables if v.variable == "distance_m")
    assert distance.n_precision is None
    assert any("fewer than 10 pilot units" in n for n in distance.notes)
