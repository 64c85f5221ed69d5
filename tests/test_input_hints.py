"""Hints that point at the cause (issue 9, item 19): several codes typed with another separator.

The separator of multi-select codes is ``;`` (docs/codebook.md); a comma, slash or spaces between
valid codes is the usual slip, so the hint says how to write the cell rather than listing codes.
"""

from __future__ import annotations

from coderel.adjudicate import parse_decision
from coderel.codebook import Category, MissingCode, Variable
from coderel.normalise import normalise_cell, separator_hint

ACTIONS = Variable(
    "actions",
    "nominal",
    multiple=True,
    categories=(Category(1, "Backed away"), Category(2, "Shouted"), Category(3, "Used bear spray")),
    missing=(MissingCode(99, "cannot be coded"),),
)
SPECIES = Variable("species", "nominal", categories=(Category(1, "Bear"), Category(2, "Elk")))


def test_comma_between_codes_hints_at_the_separator():
    result = normalise_cell(ACTIONS, "1,3", typed=False)
    (finding,) = result.findings
    assert result.value is None
    assert finding.code == "not-in-codebook"
    assert finding.hint == "several codes are separated by ';', not ',': write 1;3"


def test_other_separators_and_labels():
    assert separator_hint(ACTIONS, "1 / 3").endswith("write 1;3")
    assert (
        separator_hint(ACTIONS, "1 3")
        == "several codes are separated by ';', not spaces: write 1;3"
    )
    assert separator_hint(ACTIONS, "Backed away, Shouted").endswith("write 1;2")


def test_no_separator_hint_where_it_would_mislead():
    assert separator_hint(ACTIONS, "1,7") is None  # 7 is not a code: the code list helps more
    assert separator_hint(ACTIONS, "1,99") is None  # a missing code cannot join codes
    assert separator_hint(SPECIES, "1,2") is None  # single choice: not a separator problem
    assert normalise_cell(ACTIONS, "1;3", typed=False).value == (1, 3)


def test_a_decision_with_a_comma_says_the_same():
    token, reason = parse_decision(ACTIONS, "1,3")
    assert token is None
    assert reason.endswith("(several codes are separated by ';', not ',': write 1;3)")
