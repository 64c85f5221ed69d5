"""`agree --collapse VAR=a+b`: the what-if alpha with categories merged, checked against the
`krippendorff` package (Castro 2017, fast-krippendorff; formulas of Krippendorff 2011, Computing
Krippendorff's alpha-reliability) on the demo's sheets recoded by hand."""

import json
import re
from pathlib import Path

import krippendorff
import numpy as np
import pytest
from typer.testing import CliRunner

from coderel.agree import agreement
from coderel.agree.collapse import WHAT_IF_WORDS, parse_collapses, what_if
from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.errors import UsageError
from coderel.io.read import read_codings

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
runner = CliRunner()


@pytest.fixture(scope="module")
def codings():
    return read_codings(load_codebook(CB), [SHEETS])


def _recoded_matrix(codings, name, mapping, domain):
    """coders x units, the value's position in ``domain`` after ``mapping`` (NaN: no value)."""
    wide = codings.wide(name)
    applies = codings.for_variable(name).pivot(index="unit", columns="coder", values="applies")
    applies = applies.reindex(index=wide.index, columns=wide.columns)
    out = np.full(wide.shape, np.nan)
    for j, c in enumerate(wide.columns):
        for i, (v, a) in enumerate(zip(wide[c], applies[c], strict=True)):
            if v is not None and a is not False:
                out[i, j] = domain.index(mapping.get(v, v))
    return out.T


@pytest.mark.parametrize(
    ("specs", "name", "level", "mapping"),
    [
        (["behaviour=4+5"], "behaviour", "ordinal", {5: 4}),
        (["behaviour=1+2", "behaviour=4+5"], "behaviour", "ordinal", {2: 1, 5: 4}),
        (["species=1+2+3"], "species", "nominal", {2: 1, 3: 1}),
    ],
)
def test_what_if_alpha_against_krippendorff_on_recoded_data(codings, specs, name, level, mapping):
    cb = codings.codebook
    collapses = parse_collapses(specs, cb)
    original = agreement(codings, replicates=200, seed=7)
    result = what_if(codings, collapses, original, replicates=200, seed=7)
    (row,) = result.rows
    var = cb.variable(name)
    domain = [c for c in var.codes if c not in mapping]
    data = _recoded_matrix(codings, name, mapping, domain)
    expected = krippendorff.alpha(
        reliability_data=data,
        level_of_measurement=level,
        value_domain=list(range(len(domain))),
    )
    assert row.collapsed.estimate == pytest.approx(expected, abs=1e-9)
    as_coded = original.variable(name).coefficients["krippendorff_alpha"]
    assert row.original.estimate == as_coded.estimate
    assert row.change == pytest.approx(expected - as_coded.estimate, abs=1e-9)
    assert row.collapsed.ci is not None
    assert row.collapsed.ci[0] <= row.collapsed.estimate <= row.collapsed.ci[1]


def test_the_input_codings_are_not_changed(codings):
    before = codings.frame.copy()
    collapses = parse_collapses(["behaviour=4+5"], codings.codebook)
    what_if(codings, collapses, agreement(codings, replicates=0), replicates=0)
    assert codings.frame.equals(before)
    assert 5 in codings.codebook.variable("behaviour").codes


@pytest.mark.parametrize(
    ("spec", "words"),
    [
        ("behaviour", "give VARIABLE=CODE+CODE"),
        ("colour=1+2", "no variable 'colour'"),
        ("visitor_distance_m=1+2", "only nominal and ordinal"),
        ("behaviour=4+7", "'7' is not a code of behaviour"),
        ("behaviour=4+99", "'99' is a missing-value code of behaviour"),
        ("behaviour=4+4", "two or more different codes"),
    ],
)
def test_bad_collapse_is_a_usage_error_naming_it(codings, spec, words):
    with pytest.raises(UsageError, match=re.escape(words)):
        parse_collapses([spec], codings.codebook)


def test_one_code_in_two_groups_is_refused(codings):
    with pytest.raises(UsageError, match="behaviour=3\\+4\\+5"):
        parse_collapses(["behaviour=3+4", "behaviour=4+5"], codings.codebook)


def test_cli_shows_the_what_if_beside_the_original(tmp_path):
    args = ["agree", "--codebook", str(CB), str(SHEETS), "--replicates", "200"]
    result = runner.invoke(app, [*args, "--collapse", "behaviour=4+5", "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    block = payload["collapse"]
    assert block["what_if"] is True
    assert block["note"] == WHAT_IF_WORDS
    (row,) = block["variables"]
    assert row["variable"] == "behaviour"
    assert row["merged"] == [[4, 5]]
    plain = next(v for v in payload["variables"] if v["variable"] == "behaviour")
    assert row["original"] == plain["krippendorff_alpha"]
    text = runner.invoke(app, [*args, "--collapse", "behaviour=4+5"])
    assert text.exit_code == 0, text.output
    assert "What-if: alpha with categories merged" in text.stdout
    assert "not a reliability result to report" in " ".join(text.stdout.split())
    out = tmp_path / "agreement.xlsx"
    written = runner.invoke(app, [*args, "--collapse", "behaviour=4+5", "--out", str(out)])
    assert written.exit_code == 0, written.output
    import pandas as pd

    sheet = pd.read_excel(out, sheet_name="collapse", engine="openpyxl")
    assert list(sheet["variable"]) == ["behaviour"]
    bad = runner.invoke(app, [*args, "--collapse", "behaviour=4+8"])
    assert bad.exit_code == 2
    assert "Traceback" not in bad.output
