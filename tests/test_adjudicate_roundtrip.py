"""Adjudication list: disagreements found, decisions kept across regeneration, bad decisions."""

from __future__ import annotations

import pandas as pd

from coderel.adjudicate import (
    RETIRED_SHEET,
    build_adjudication,
    read_adjudication,
    read_decisions,
    write_adjudication,
)
from coderel.codebook import Category, Codebook, Condition, MissingCode, Variable
from coderel.codings import Codings

CB = Codebook(
    title="test",
    version="2.0",
    variables=(
        Variable(
            "species",
            "nominal",
            categories=(Category(1, "Bear"), Category(2, "Elk")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable(
            "actions",
            "nominal",
            multiple=True,
            categories=(Category(1, "Backed away"), Category(3, "Used spray")),
        ),
        Variable(
            "spray_worked",
            "nominal",
            categories=(Category(1, "Yes"), Category(2, "No")),
            applies_when=Condition("actions", (3,)),
        ),
    ),
    text_columns=("narrative",),
)


def codings(rows: dict[str, list[tuple[str, object, object, object]]]) -> Codings:
    recs = []
    for coder, units in rows.items():
        for unit, sp, act, spray in units:
            recs.append({"unit": unit, "coder": coder, "variable": "species", "value": sp})
            recs.append({"unit": unit, "coder": coder, "variable": "actions", "value": act})
            recs.append({"unit": unit, "coder": coder, "variable": "spray_worked", "value": spray})
    texts = pd.DataFrame([{"unit": "R1", "coder": "ann", "column": "narrative", "text": "=x"}])
    return Codings.from_records(CB, recs, texts=texts)


def test_kinds_and_roundtrip(tmp_path):
    c1 = codings(
        {
            "ann": [("R1", 1, (1, 3), 1), ("R2", 1, (1,), None)],
            "bob": [("R1", 2, (1,), None), ("R2", 1, (1,), None)],
        }
    )
    adj = build_adjudication(c1)
    got = {(r.unit, r.variable): r.kind for r in adj.rows}
    assert got == {
        ("R1", "species"): "values differ",
        ("R1", "actions"): "values differ",
        ("R1", "spray_worked"): "applies?",
    }
    out = tmp_path / "adj.xlsx"
    write_adjudication(adj, out)
    # an adjudicator fills two decisions, one of them invalid
    from openpyxl import load_workbook

    wb = load_workbook(out)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    dcol = header.index("decision") + 1
    assert header.index("narrative") < dcol
    ws.cell(row=2, column=dcol, value="1 = Bear")
    ws.cell(row=3, column=dcol, value="7")
    wb.save(out)
    dec = read_decisions(out, CB)
    assert dec.get("R1", "species").value == 1
    assert [(p.code, p.cell) for p in dec.problems] == [
        ("bad-decision", f"{ws.cell(row=3, column=dcol).column_letter}3")
    ]
    # coders fix R1 species; a new unit R3 arrives with a disagreement
    c2 = codings(
        {
            "ann": [("R1", 1, (1, 3), 1), ("R2", 1, (1,), None), ("R3", 1, (1,), None)],
            "bob": [("R1", 1, (1,), None), ("R2", 1, (1,), None), ("R3", 2, (1,), None)],
        }
    )
    adj2 = build_adjudication(c2, out)
    keys = [r.key for r in adj2.rows]
    assert keys == ["R1|actions", "R1|spray_worked", "R3|species"]
    assert adj2.rows[0].decision == "7"  # kept, even though invalid
    assert [(r.key, r.decision, r.reason) for r in adj2.retired] == [
        ("R1|species", "1 = Bear", "coders now agree")
    ]
    write_adjudication(adj2, out)
    again = read_adjudication(out, CB)
    assert [r.key for r in again.retired] == ["R1|species"]
    assert again.retired[0].decision == "1 = Bear"
    assert RETIRED_SHEET in load_workbook(out).sheetnames


def test_csv_form_neutralised_and_readable(tmp_path):
    c1 = codings({"ann": [("R1", 1, (1,), None)], "bob": [("R1", 2, (1,), None)]})
    out = tmp_path / "adj.csv"
    write_adjudication(build_adjudication(c1), out)
    text = out.read_text()
    assert "'=x" in text
    assert ",=x" not in text
    assert [r.key for r in read_adjudication(out, CB).rows] == ["R1|species"]
