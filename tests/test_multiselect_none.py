"""An explicit "none of these" code for multi-select variables (issue 9, item 9).

Before, "none of these" could only be a missing code, which dropped those units from alpha. Now
``none: {code: 0, label: None of these}`` is the coded empty set. The Jaccard distance
1 - |A & B| / |A | B| (Jaccard, 1912, The distribution of the flora in the alpine zone, New
Phytologist 11(2)) between the empty set and any non-empty set is 1, and between two empty sets
0 (identical values are at distance 0 in every difference function of Krippendorff, 2004, Content
Analysis, 2nd ed.; the empty-union case by that rule, from memory) - exactly the distances of a
separate category that is never combined with others. So
alpha with the empty set must equal alpha with "none" recoded as such a category; that is the
check here, together with the unit counts that follow from the data's construction.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from coderel.adjudicate import display_token, parse_decision
from coderel.agree import agreement
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.codebook.load import codebook_problems, load_codebook
from coderel.codings import Codings
from coderel.errors import CodebookError
from coderel.merge import merge, spread_multiselect
from coderel.normalise import normalise_cell
from coderel.template import _how

YAML = """\
title: none of these (invented)
unit: report_id
variables:
  - name: actions
    level: nominal
    multiple: true
    categories:
      - {code: 1, label: Backed away}
      - {code: 2, label: Shouted}
      - {code: 3, label: Used spray}
    none: {code: 0, label: None of these}
    missing: [{code: 99, label: cannot be coded}]
"""

CATS = (Category(1, "Backed away"), Category(2, "Shouted"), Category(3, "Used spray"))
ACTIONS = Variable(
    "actions",
    "nominal",
    multiple=True,
    categories=CATS,
    none=Category(0, "None of these"),
    missing=(MissingCode(99, "cannot be coded"),),
)
#: unit -> (ana, ben); () is "none of these"
DATA = [
    ((1,), (1,)),
    ((1, 2), (1,)),
    ((), ()),
    ((), (2,)),
    ((3,), (3,)),
    ((2, 3), (2, 3)),
    ((), ()),
    ((1,), (1, 3)),
    ((2,), (2,)),
    ((), ()),
    ((1, 2, 3), (1, 2)),
    ((3,), ()),
]


def _codings(variable: Variable, data) -> Codings:
    cb = Codebook(title="t", unit="report_id", variables=(variable,))
    records = [
        {"unit": f"U{i}", "coder": coder, "variable": "actions", "value": value}
        for i, pair in enumerate(data)
        for coder, value in zip(("ana", "ben"), pair, strict=True)
    ]
    return Codings.from_records(cb, records)


def test_codebook_loads_none_and_checks_it(tmp_path: Path):
    path = tmp_path / "cb.yaml"
    path.write_text(YAML, encoding="utf-8")
    var = load_codebook(path).variable("actions")
    assert var.none == Category(0, "None of these")
    assert var.label_of(0) == "None of these"
    single = YAML.replace("    multiple: true\n", "")
    path.write_text(single, encoding="utf-8")
    assert "codebook-field" in [p.code for p in codebook_problems(path)]
    clash = YAML.replace("{code: 0, label: None of these}", "{code: 3, label: None of these}")
    path.write_text(clash, encoding="utf-8")
    assert [p.code for p in codebook_problems(path)] == ["duplicate-code"]


def test_cells_read_as_the_empty_set():
    assert normalise_cell(ACTIONS, "0", typed=False).value == ()
    assert normalise_cell(ACTIONS, 0, typed=True).value == ()
    assert normalise_cell(ACTIONS, "None of these", typed=False).value == ()
    assert normalise_cell(ACTIONS, "0 = None of these", typed=False).value == ()
    bad = normalise_cell(ACTIONS, "0;1", typed=False)
    assert bad.value is None
    assert [f.code for f in bad.findings] == ["not-in-codebook"]
    assert normalise_cell(ACTIONS, "99", typed=False).missing == 99


def test_alpha_counts_none_as_the_empty_set():
    with_none = agreement(_codings(ACTIONS, DATA), replicates=0).variable("actions")
    assert with_none.units == 12  # "none" units stay in
    # "none" as a category of its own, never combined with others: the same Jaccard distances
    dummy = Variable("actions", "nominal", multiple=True, categories=(*CATS, Category(9, "N")))
    recoded = [tuple(v if v else (9,) for v in pair) for pair in DATA]
    reference = agreement(_codings(dummy, recoded), replicates=0).variable("actions")
    a = with_none.coefficients["krippendorff_alpha"].estimate
    b = reference.coefficients["krippendorff_alpha"].estimate
    assert a == pytest.approx(b, abs=1e-12)
    # the old way: "none" as a missing code leaves those five units' values out
    as_missing = [tuple(v if v else None for v in pair) for pair in DATA]
    records_missing = agreement(_codings(ACTIONS, as_missing), replicates=0).variable("actions")
    assert records_missing.pairable_values < with_none.pairable_values


def test_merge_adjudication_and_template_show_it():
    codings = _codings(ACTIONS, DATA)
    frame = merge(codings).frame.set_index("report_id")
    assert frame.loc["U2", "actions"] == "0"
    assert frame.loc["U2", "actions_status"] == "agreed"
    spread = spread_multiselect(merge(codings).frame, codings.codebook).set_index("report_id")
    assert spread.loc["U2", ["actions__1", "actions__2", "actions__3"]].tolist() == [0, 0, 0]
    labels = merge(codings).labels_frame().set_index("report_id")
    assert labels.loc["U2", "actions"] == "None of these"
    assert display_token(ACTIONS, ("value", ())) == "0 = None of these"
    assert parse_decision(ACTIONS, "0") == (("value", ()), None)
    assert parse_decision(ACTIONS, "0;1")[0] is None
    assert "If none applies, type 0 = None of these." in _how(ACTIONS)


def test_table_schema_and_yaml_carry_the_none_code(tmp_path: Path):
    """The Frictionless Table Schema (v2.0, 2024) has no notion of a coded empty set, so the
    ``none`` code travels as the extension ``coderel:none``; codebook -> schema -> codebook and
    codebook -> YAML -> codebook give back the same variable."""
    from coderel.codebook.frictionless import dump_codebook, from_table_schema, to_table_schema

    path = tmp_path / "cb.yaml"
    path.write_text(YAML, encoding="utf-8")
    cb = load_codebook(path)
    schema = to_table_schema(cb)
    field = next(f for f in schema["fields"] if f["name"] == "actions")
    assert field["coderel:none"] == {"value": 0, "label": "None of these"}
    # neither a category nor a missing value of the standard's own keys
    assert 0 not in [c["value"] for c in field["categories"]]
    assert "0" not in [m["value"] for m in field["missingValues"]]
    back = from_table_schema(schema).variable("actions")
    assert back.none == Category(0, "None of these")
    assert back == cb.variable("actions")
    again = tmp_path / "again.yaml"
    again.write_text(dump_codebook(cb), encoding="utf-8")
    assert load_codebook(again).variable("actions") == cb.variable("actions")
    # a broken extension is a codebook problem, not a traceback
    field["coderel:none"] = "zero"
    with pytest.raises(CodebookError):
        from_table_schema(schema)
