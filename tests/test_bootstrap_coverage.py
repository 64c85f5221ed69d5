"""Do 95% bootstrap intervals cover a known population value about 95% of the time?

A seeded simulation (Efron & Tibshirani 1993, *An Introduction to the Bootstrap*, ch. 12-14, on
checking interval coverage by simulation): draw many small reliability samples from a population
whose alpha is known, compute percentile and BCa intervals with the engine's bootstrap (one
seeded matrix of unit weights per sample, ``coderel.stats.bootstrap``), and count how often the
interval holds the population value. With 1,000 samples the Monte Carlo error of a coverage
share is about 0.007; the check asks for [0.88, 0.99] at 95% (common practice, no source: a
band loose enough for small-sample undercoverage of 60-unit samples, tight enough to flag a
broken interval) and, to show the level is honoured, [0.72, 0.88] at 80%.

Also: ``--seed`` reproduces the JSON output to the last digit, and thin data (fewer than 10
pairable units) get no interval.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from coderel.agree import agreement
from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.stats.bootstrap import evaluate_plans, unit_weights
from coderel.stats.intervals import bca_interval, percentile_interval
from coderel.stats.plan import Scale, alpha_point, build_plan

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"

# Population of the categorical simulation: a unit's true category has prevalence PREV; each of
# two coders reports it with probability RECALL, otherwise a category drawn uniformly.
PREV = np.array([0.5, 0.3, 0.2])
RECALL = 0.85
K = len(PREV)
SAMPLES = 1000
UNITS = 60
REPLICATES = 400


def _joint() -> np.ndarray:
    """P(coder A says a, coder B says b) in the population."""
    confusion = RECALL * np.eye(K) + (1 - RECALL) / K  # P(report | true category)
    return np.einsum("t,ta,tb->ab", PREV, confusion, confusion)


def _population_alpha() -> float:
    """Nominal alpha of the population (two exchangeable coders, N -> infinity).

    alpha = 1 - D_o / D_e with D_o = P(a != b) and D_e = 1 - sum_k pi_k^2 (Krippendorff 2004);
    with infinitely many units the (2N - 1) / 2N factor is 1, and Cohen's kappa, Scott's pi and
    alpha coincide because the coders share their marginal distribution.
    """
    joint = _joint()
    pi = joint.sum(axis=1)
    return 1.0 - (1.0 - np.trace(joint)) / (1.0 - float((pi**2).sum()))


def _draw(rng: np.random.Generator, n: int) -> np.ndarray:
    truth = rng.choice(K, size=n, p=PREV)
    keep = rng.random((n, 2)) < RECALL
    return np.where(keep, truth[:, None], rng.integers(0, K, (n, 2)))


def test_population_alpha_matches_a_very_large_sample():
    x = _draw(np.random.default_rng(20261202), 400_000)
    big = alpha_point(x, Scale("categorical", "nominal", K))
    assert big == pytest.approx(_population_alpha(), abs=0.005)


LEVELS = {0.95: (0.88, 0.99), 0.80: (0.72, 0.88)}  # level -> accepted coverage band


def _coverage(
    draw, scale_of, truth: float, names: tuple[str, ...], seed: int
) -> dict[tuple[str, str, float], float]:
    """Share of samples whose interval holds ``truth``, per coefficient, method and level."""
    rng = np.random.default_rng(seed)
    hits = {(n, m, lv): 0 for n in names for m in ("percentile", "bca") for lv in LEVELS}
    for i in range(SAMPLES):
        x, scale = scale_of(draw(rng, UNITS))
        weights = unit_weights(UNITS, REPLICATES, seed=1000 + i)
        evaluated = evaluate_plans([build_plan(x, scale)], weights)[0]
        for name in names:
            ev = evaluated[name]
            for level in LEVELS:
                for method, ci in (
                    ("percentile", percentile_interval(ev.replicates, level)),
                    ("bca", bca_interval(ev.replicates, ev.point, ev.jackknife, level)),
                ):
                    assert ci is not None
                    hits[name, method, level] += ci[0] <= truth <= ci[1]
    return {key: count / SAMPLES for key, count in hits.items()}


def _check(cover: dict[tuple[str, str, float], float]) -> None:
    for (name, method, level), share in cover.items():
        low, high = LEVELS[level]
        assert low <= share <= high, (name, method, level, share)


def test_categorical_intervals_cover_population_alpha():
    truth = _population_alpha()
    assert truth == pytest.approx(0.7077, abs=1e-4)  # between the two usual thresholds

    def scale_of(x):
        return x, Scale("categorical", "nominal", K)

    _check(_coverage(_draw, scale_of, truth, ("krippendorff_alpha", "cohen_kappa"), seed=5))


# Interval population: true score T ~ N(0, 1), each coder adds independent N(0, s^2) error, so
# alpha = Var(T) / (Var(T) + s^2) = 1 / (1 + s^2) (Krippendorff 2004: interval alpha is
# 1 - E(a - b)^2 / (2 Var(a)) for two exchangeable coders).
ERROR_SD = 0.5


def _draw_interval(rng: np.random.Generator, n: int) -> np.ndarray:
    truth = rng.normal(size=n)
    return np.round(truth[:, None] + rng.normal(scale=ERROR_SD, size=(n, 2)), 3)


def _interval_scale(values: np.ndarray):
    distinct = np.unique(values)
    return np.searchsorted(distinct, values), Scale("numeric", "interval", len(distinct), distinct)


def test_interval_intervals_cover_population_alpha():
    truth = 1.0 / (1.0 + ERROR_SD**2)  # 0.8
    _check(_coverage(_draw_interval, _interval_scale, truth, ("krippendorff_alpha",), seed=6))


# --------------------------------------------------------------------------------------------
# reproducibility and thin data through the public API
# --------------------------------------------------------------------------------------------


def _agree_json(seed: int) -> str:
    args = ["agree", "--codebook", str(CB), str(ROOT / "demo/sheets"), "--json"]
    res = CliRunner().invoke(app, [*args, "--replicates", "150", "--seed", str(seed)])
    assert res.exit_code == 0, res.output
    return res.stdout


def test_seed_reproduces_json_to_the_last_digit():
    first, again, other = _agree_json(11), _agree_json(11), _agree_json(12)
    assert first == again  # byte for byte
    ci_first = [v["krippendorff_alpha"]["ci"] for v in json.loads(first)["variables"]]
    ci_other = [v["krippendorff_alpha"]["ci"] for v in json.loads(other)["variables"]]
    assert ci_first != ci_other  # the seed matters
    points = [
        [v["krippendorff_alpha"]["estimate"] for v in json.loads(doc)["variables"]]
        for doc in (first, other)
    ]
    assert points[0] == points[1]  # point estimates do not depend on the seed


def _two_coder_codings(n_units: int) -> Codings:
    var = Variable("call", "nominal", categories=(Category(1, "yes"), Category(2, "no")))
    cb = Codebook(title="thin data", variables=(var,))
    rng = np.random.default_rng(n_units)
    a = np.arange(n_units) % 2 + 1  # both categories used
    b = np.where(rng.random(n_units) < 0.8, a, 3 - a)
    records = [
        {"unit": f"u{u}", "coder": coder, "variable": "call", "value": int(v[u])}
        for coder, v in (("c1", a), ("c2", b))
        for u in range(n_units)
    ]
    return Codings.from_records(cb, records)


def test_thin_data_gets_no_interval():
    thin = agreement(_two_coder_codings(9), replicates=200, seed=3).variable("call")
    assert thin.units == 9
    alpha = thin.coefficients["krippendorff_alpha"]
    assert alpha.estimate is not None  # the estimate is still reported
    for name, est in thin.coefficients.items():
        if est is not None:
            assert est.ci is None, name
    assert any("too few" in note for note in thin.notes)
    enough = agreement(_two_coder_codings(12), replicates=200, seed=3).variable("call")
    assert enough.coefficients["krippendorff_alpha"].ci is not None
