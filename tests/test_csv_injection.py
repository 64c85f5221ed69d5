"""CSV exports in a semicolon locale: no piece a spreadsheet splits off runs as a formula (issue 12,
item 18).

A spreadsheet program set to a locale whose list separator is a semicolon splits a CSV line at
every ``;`` (and users pick ``,`` or tab on import), quotes or not, so the text ``a;=1+1`` becomes
two cells, the second a formula (OWASP, "CSV Injection": cells starting with ``=``, ``+``, ``-``,
``@``, tab or carriage return are run as formulas). The oracle here is that reading: each written
line is split at every separator, as such a program would, and no piece may start with a trigger.
Python's own :mod:`csv` module reads the file back to the text that was written (marks undone by
:func:`coderel.io.safe_text.restore`, which coderel's readers apply).
"""

from __future__ import annotations

import csv
import io

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from coderel.adjudicate import build_adjudication, read_adjudication, write_adjudication
from coderel.io.safe_text import DANGEROUS_PREFIXES, neutralise_csv, restore
from coderel.io.tables import csv_text
from tests.test_adjudicate_roundtrip import CB, codings

HOSTILE = ["a;=1+1", "a,=1+1", "a\t=1+1", "x;+SUM(A1)", "y;-2+3", "z;@cmd", "=lead;=tail", "a;;=1"]


def _pieces(text: str, separator: str) -> list[str]:
    """Every cell a spreadsheet program splitting at ``separator`` (ignoring quotes) would see."""
    return [piece.lstrip('"') for line in text.splitlines() for piece in line.split(separator)]


@pytest.mark.parametrize("value", HOSTILE)
def test_each_piece_after_a_separator_is_neutralised(value):
    out = neutralise_csv(value)
    for separator in (";", ",", "\t"):
        assert not any(p.startswith(DANGEROUS_PREFIXES) for p in out.split(separator)), out
    assert restore(out) == value


def test_plain_text_and_coder_values_are_left_alone():
    for value in ("1 = Food; 3 = Trail", "Bear, Elk", "R-1", "3;4", "a - b", "-"):
        assert restore(neutralise_csv(value)) == value
    assert neutralise_csv("1 = Food; 3 = Trail") == "1 = Food; 3 = Trail"
    assert neutralise_csv(-3) == -3  # numbers stay numbers


@given(st.text(alphabet=st.sampled_from(list("ab;,\t=+-@ 1")), max_size=20))
def test_restore_undoes_the_marks(value):
    assert restore(neutralise_csv(value)) == value
    out = neutralise_csv(value)
    for separator in (";", ",", "\t"):
        assert not any(p.startswith(DANGEROUS_PREFIXES) for p in out.split(separator))


def test_csv_export_cells_and_headers_in_a_semicolon_locale():
    frame = pd.DataFrame({"unit": ["R-1", "R-2"], "n;=HYPERLINK(1)": ["a;=1+1", "b,@x"]})
    text = csv_text(frame)
    for separator in (";", ",", "\t"):
        pieces = _pieces(text, separator)
        assert not any(p.startswith(DANGEROUS_PREFIXES) for p in pieces), (separator, pieces)
    back = list(csv.reader(io.StringIO(text)))
    assert [restore(c) for c in back[0]] == ["unit", "n;=HYPERLINK(1)"]
    assert [restore(r[1]) for r in back[1:]] == ["a;=1+1", "b,@x"]


def test_adjudication_csv_keeps_notes_and_decisions_through_the_marks(tmp_path):
    c = codings({"ann": [("R1", 1, (1,), None)], "bob": [("R1", 2, (1,), None)]})
    out = tmp_path / "adj.csv"
    write_adjudication(build_adjudication(c), out)
    rows = list(csv.reader(io.StringIO(out.read_text(encoding="utf-8"))))
    header = rows[0]
    for row in rows[1:]:
        if row[header.index("variable")] == "species":
            row[header.index("decision")] = "1"
            row[header.index("note")] = "see R2;=1+1, and R3;-2"
    with open(out, "w", encoding="utf-8", newline="") as fh:
        csv.writer(fh).writerows(rows)
    write_adjudication(build_adjudication(c, out), out)  # the list written again
    text = out.read_text(encoding="utf-8")
    assert not any(p.startswith(DANGEROUS_PREFIXES) for p in _pieces(text, ";"))
    kept = {r.key: r for r in read_adjudication(out, CB).rows}["R1|species"]
    assert (kept.decision, kept.note) == ("1", "see R2;=1+1, and R3;-2")
