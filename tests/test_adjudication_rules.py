"""``adjudicate --rule majority`` and ``--tolerance VAR=N`` (issue 9, item 13).

Expected values follow from the rules' definitions (coderel/adjudicate/rules.py, docs/adjudication.md):
a majority is more than half of the coders who coded the unit; numbers within the tolerance
(largest minus smallest <= tolerance) agree, with the median as the final value (for whole-number
variables rounded, halves to even). The median of 10, 12, 14 is 12 and of 10, 11 is 10.5 by the
definition of the median. The invariant checked on random data: the adjudication list holds
exactly the cells that the merge, under the same rule and tolerances, leaves unresolved.
"""

from __future__ import annotations

import json
import random
from pathlib import Path

import pytest
from typer.testing import CliRunner

from coderel.adjudicate import build_adjudication, write_adjudication
from coderel.adjudicate.rules import Settling, parse_tolerances, settle
from coderel.agree import agreement
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.codings import Codings
from coderel.errors import UsageError
from coderel.merge import merge

CB = Codebook(
    title="rules (invented)",
    unit="report_id",
    variables=(
        Variable(
            "species",
            "nominal",
            categories=(Category(1, "Bear"), Category(2, "Elk"), Category(3, "Cougar")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable("distance_m", "ratio", range=(0.0, 500.0), missing=(MissingCode(999),)),
        Variable("visitors", "ratio", range=(0.0, 100.0), integer=True),
    ),
)

#: unit -> variable -> (ana, ben, cai)
DATA = {
    "U1": {"species": (1, 1, 2), "distance_m": (10.0, 12.0, 14.0), "visitors": (3.0, 4.0, 3.0)},
    "U2": {"species": (1, 2, 3), "distance_m": (10.0, 11.0, 40.0), "visitors": (3.0, 4.0, 9.0)},
    "U3": {"species": (2, 2, 2), "distance_m": (10.0, 999, 10.0), "visitors": (3.0, 3.0, 3.0)},
}
CODERS = ("ana", "ben", "cai")


def codings_of(data, coders=CODERS) -> Codings:
    records = []
    for unit, variables in data.items():
        for name, values in variables.items():
            for coder, value in zip(coders, values, strict=True):
                if value is None:
                    continue
                missing = value if value in (99, 999) else None
                records.append(
                    {
                        "unit": unit,
                        "coder": coder,
                        "variable": name,
                        "value": None if missing is not None else value,
                        "missing": missing,
                    }
                )
    return Codings.from_records(CB, records)


def listed(adj) -> set[tuple[str, str]]:
    return {(r.unit, r.variable) for r in adj.rows}


def test_majority_rule_lists_only_what_it_leaves_open():
    codings = codings_of(DATA)
    everything = listed(build_adjudication(codings))
    assert everything == {
        ("U1", "species"),
        ("U1", "distance_m"),
        ("U1", "visitors"),
        ("U2", "species"),
        ("U2", "distance_m"),
        ("U2", "visitors"),
        ("U3", "distance_m"),
    }
    majority = build_adjudication(codings, settling=Settling("majority"))
    # U1 species 1,1,2 -> 1; U1 visitors 3,4,3 -> 3; U3 distance 10,999,10 -> 10
    assert listed(majority) == {
        ("U1", "distance_m"),
        ("U2", "species"),
        ("U2", "distance_m"),
        ("U2", "visitors"),
    }
    assert majority.to_dict()["rule"] == "majority"


def test_tolerance_settles_numbers_with_their_median():
    codings = codings_of(DATA)
    settling = Settling("unanimous", {"distance_m": 5.0, "visitors": 1.0})
    adj = build_adjudication(codings, settling=settling)
    assert listed(adj) == {
        ("U1", "species"),
        ("U2", "species"),
        ("U2", "distance_m"),  # 10, 11, 40: 40 is outside
        ("U2", "visitors"),  # 3, 4, 9
        ("U3", "distance_m"),  # a missing code is never within a tolerance
    }
    result = merge(codings, tolerance=settling.tolerance)
    frame = result.frame.set_index("report_id")
    assert frame.loc["U1", "distance_m_status"] == "within_tolerance"
    assert frame.loc["U1", "distance_m"] == 12.0  # median of 10, 12, 14
    assert frame.loc["U1", "visitors_status"] == "within_tolerance"
    assert frame.loc["U1", "visitors"] == 3  # median of 3, 4, 3
    assert frame.loc["U2", "distance_m_status"] == "unresolved"
    assert result.to_dict()["tolerance"] == {"distance_m": 5.0, "visitors": 1.0}
    assert result.to_dict()["tolerance_value"] == "median"


def test_majority_with_tolerance_uses_the_median_of_the_close_numbers():
    codings = codings_of(DATA)
    result = merge(codings, rule="majority", tolerance={"distance_m": 5.0})
    frame = result.frame.set_index("report_id")
    assert frame.loc["U2", "distance_m_status"] == "majority"
    assert frame.loc["U2", "distance_m"] == 10.5  # median of 10 and 11; 40 is outvoted


def test_whole_numbers_round_half_to_even():
    var = CB.variable("visitors")
    tokens = {"ana": ("value", 3.0), "ben": ("value", 4.0)}
    assert settle(var, tokens, Settling(tolerance={"visitors": 1.0})) == (
        "within_tolerance",
        ("value", 4.0),  # median 3.5, rounded half to even
    )
    tokens = {"ana": ("value", 2.0), "ben": ("value", 3.0)}
    assert settle(var, tokens, Settling(tolerance={"visitors": 1.0}))[1] == ("value", 2.0)


def test_agreement_does_not_depend_on_the_rule():
    codings = codings_of(DATA)
    before = agreement(codings, replicates=0).to_dict()
    build_adjudication(codings, settling=Settling("majority", {"distance_m": 5.0}))
    merge(codings, rule="majority", tolerance={"distance_m": 5.0})
    assert agreement(codings, replicates=0).to_dict() == before


@pytest.mark.parametrize("seed", range(6))
def test_list_holds_exactly_the_cells_merge_leaves_unresolved(seed):
    # as the reader gives them: a coder who coded a unit has a row for every variable (a blank
    # cell is a row without value); a coder who did not has none
    rng = random.Random(seed)
    choices = {
        "species": [1, 2, 3, 99, None],
        "distance_m": [10.0, 12.0, 13.0, 30.0, 999, None],
        "visitors": [1.0, 2.0, 3.0, None],
    }
    records = []
    for i in range(40):
        coders = rng.sample(["ana", "ben", "cai", "dee"], rng.randint(1, 4))
        for coder in coders:
            for name, options in choices.items():
                value = rng.choice(options)
                missing = value if value in (99, 999) else None
                records.append(
                    {
                        "unit": f"U{i}",
                        "coder": coder,
                        "variable": name,
                        "value": None if missing is not None else value,
                        "missing": missing,
                    }
                )
    codings = Codings.from_records(CB, records)
    for rule in ("unanimous", "majority"):
        for tolerance in ({}, {"distance_m": 3.0, "visitors": 1.0}):
            adj = build_adjudication(codings, settling=Settling(rule, tolerance))
            result = merge(codings, rule=rule, tolerance=tolerance)
            assert listed(adj) == set(result.unresolved), (rule, tolerance)
            assert result.unresolved, "the random data leave some cells open"


def test_parse_tolerances_refuses_what_it_cannot_use():
    assert parse_tolerances(["distance_m=5", "visitors = 1,5"], CB) == {
        "distance_m": 5.0,
        "visitors": 1.5,
    }
    for bad in (["species=1"], ["nope=1"], ["distance_m"], ["distance_m=-1"], ["distance_m=x"]):
        with pytest.raises(UsageError):
            parse_tolerances(bad, CB)
    with pytest.raises(UsageError):
        parse_tolerances(["distance_m=1", "distance_m=2"], CB)


CODEBOOK_YAML = """\
title: rules CLI (invented)
unit: report_id
variables:
  - name: species
    level: nominal
    categories: [{code: 1, label: Bear}, {code: 2, label: Elk}, {code: 3, label: Cougar}]
  - name: distance_m
    level: ratio
    range: [0, 500]
"""


def test_cli_adjudicate_and_merge_take_rule_and_tolerance(tmp_path: Path):
    from coderel.cli.app import app

    runner = CliRunner()
    cb = tmp_path / "cb.yaml"
    cb.write_text(CODEBOOK_YAML, encoding="utf-8")
    data = tmp_path / "sheets"
    data.mkdir()
    rows = {"ana": [(1, 10), (1, 20), (2, 30)], "ben": [(1, 12), (2, 20), (3, 30)]}
    rows["cai"] = [(2, 14), (1, 50), (1, 30)]
    for coder, values in rows.items():
        lines = ["report_id,species,distance_m"]
        lines += [f"R{i},{s},{d}" for i, (s, d) in enumerate(values, start=1)]
        (data / f"{coder}.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    out = tmp_path / "list.csv"
    args = ["adjudicate", "-c", str(cb), str(data), "-o", str(out), "--json"]
    plain = json.loads(runner.invoke(app, args).stdout)
    assert plain["disagreements"] == 5  # species and distance of R1 and R2, species of R3
    out.unlink()
    res = runner.invoke(app, [*args, "--rule", "majority", "--tolerance", "distance_m=5"])
    assert res.exit_code == 0, res.output
    chosen = json.loads(res.stdout)
    # R1 species 1,1,2 and R2 species 1,2,1 by majority; R1 distance 10,12,14 within 5;
    # R2 distance 20,20,50 by majority; R3 species 2,3,1 stays open
    assert [(r["unit"], r["variable"]) for r in chosen["rows"]] == [("R3", "species")]
    assert (chosen["rule"], chosen["tolerance"]) == ("majority", {"distance_m": 5.0})
    bad = runner.invoke(app, [*args, "--tolerance", "species=1"])
    assert bad.exit_code == 2
    merged = tmp_path / "m.csv"
    merge_args = ["merge", "-c", str(cb), str(data), "-o", str(merged), "--rule", "majority"]
    res = runner.invoke(app, [*merge_args, "--tolerance", "distance_m=5", "--json"])
    assert res.exit_code == 0, res.output
    summary = json.loads(res.stdout)
    assert summary["totals"]["within_tolerance"] == 1
    assert [c["unit"] for c in summary["unresolved"]] == ["R3"]


def test_written_list_names_its_rule(tmp_path: Path):
    from openpyxl import load_workbook

    adj = build_adjudication(codings_of(DATA), settling=Settling("majority", {"distance_m": 5.0}))
    write_adjudication(adj, tmp_path / "l.xlsx")
    about = {
        r[0]: r[1] for r in load_workbook(tmp_path / "l.xlsx")["about"].iter_rows(values_only=True)
    }
    assert about["rule"] == "majority; tolerance distance_m = 5 (median of the numbers)"
