"""The demo's rounds (scripts/demo_rounds.py): the trainees improve, coder_gus drifts and falls
below the training threshold, and the pilot's sheets of codebook 1.0 are recoded under 1.1.

Oracles: the `krippendorff` package (Castro 2017, fast-krippendorff; Krippendorff 2011, Computing
Krippendorff's alpha-reliability) for the pilot's alpha with behaviour 5 mapped onto 4 by hand;
counting for the recode; the generator's own settings (who drifts) for the flags.
"""

from pathlib import Path

import krippendorff
import numpy as np
import pytest

from coderel.agree import agreement
from coderel.agree.collapse import parse_collapses, what_if
from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings
from coderel.io.versions import read_versioned, sheet_version
from coderel.protocol.score import key_codebook, score
from coderel.protocol.trend import trend

ROOT = Path(__file__).resolve().parents[1]
V10 = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
V11 = ROOT / "sample_codebooks" / "wildlife_encounters_v1.1.yaml"
ROUNDS = ROOT / "demo" / "rounds"
NAMES = ("pilot", "training-1", "training-2")


@pytest.fixture(scope="module")
def rounds():
    cb = load_codebook(V11)
    return [(name, read_versioned(cb, [ROUNDS / name])) for name in NAMES]


@pytest.fixture(scope="module")
def trended(rounds):
    return trend(rounds, replicates=500, seed=3)


def test_sheets_carry_their_codebook_version_and_the_pilot_is_recoded(rounds):
    assert {sheet_version(p) for p in (ROUNDS / "pilot").iterdir()} == {"1.0"}
    assert {sheet_version(p) for p in (ROUNDS / "training-2").iterdir()} == {"1.1"}
    as_coded = read_codings(load_codebook(V10), [ROUNDS / "pilot"])
    fives = (as_coded.frame["variable"] == "behaviour") & (as_coded.frame["value"] == 5)
    assert fives.sum() >= 10  # the pilot puts 4 and 5 to the test
    pilot = dict(rounds)["pilot"]
    assert not pilot.problems.errors
    behaviour = pilot.for_variable("behaviour")
    assert 5 not in set(behaviour["value"])
    assert len(behaviour) == as_coded.for_variable("behaviour").shape[0]


def test_pilot_alpha_under_1_1_against_krippendorff_and_the_what_if(trended):
    as_coded = read_codings(load_codebook(V10), [ROUNDS / "pilot"])
    wide = as_coded.wide("behaviour")
    codes = [1, 2, 3, 4]
    data = np.array(
        [
            [np.nan if v is None or v == 99 else codes.index(4 if v == 5 else v) for v in wide[c]]
            for c in wide.columns
        ]
    )
    expected = krippendorff.alpha(
        reliability_data=data, level_of_measurement="ordinal", value_domain=list(range(4))
    )
    got = trended.alpha("pilot", "behaviour").alpha.estimate
    assert got == pytest.approx(expected, abs=1e-9)
    # the what-if of `agree --collapse behaviour=4+5` under 1.0 is the alpha 1.1 gives
    collapses = parse_collapses(["behaviour=4+5"], as_coded.codebook)
    original = agreement(as_coded, replicates=0)
    (row,) = what_if(as_coded, collapses, original, replicates=0).rows
    assert row.collapsed.estimate == pytest.approx(got, abs=1e-12)
    assert row.change > 0


def test_trainees_improve_and_only_the_drifting_coder_is_flagged(trended):
    for var in ("species", "behaviour", "time_of_day"):
        alphas = [trended.alpha(r, var).alpha.estimate for r in NAMES]
        assert alphas == sorted(alphas), var
    first = next(c for c in trended.changes if c.variable == "species")
    assert first.ci[0] > 0  # clearly better after the pilot
    assert {(c.coder, c.round) for c in trended.drifting} == {("coder_gus", "training-2")}


def test_score_names_the_trainee_below_the_training_threshold(rounds):
    cb = load_codebook(V11)
    key = read_versioned(key_codebook(cb), [ROOT / "demo" / "keys" / "training-2.xlsx"])
    result = score(key, dict(rounds)["training-2"], replicates=200, seed=1)
    below = {s.trainee: s.below for s in result.summaries}
    assert below["coder_gus"]
    assert not any(below[t] for t in ("coder_eli", "coder_fay", "coder_hal"))
    assert len(result.feedback["coder_gus"]) > 2 * len(result.feedback["coder_eli"])
