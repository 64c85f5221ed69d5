"""A decision made on values the coders have since changed (issue 9, item 12).

Before: the next ``adjudicate`` run warned once and refreshed the coders' values on the list, so
``merge`` found the decision matching and used it silently. Now the row is marked in the list
itself (its ``check`` cell, filled amber), the mark survives regenerations until the adjudicator
clears it, ``merge`` does not use the decision meanwhile (so ``--strict`` refuses), and the merge's
audit line lists it. Expected values follow from the construction of the data.
"""

from __future__ import annotations

import json

from openpyxl import load_workbook
from typer.testing import CliRunner

from coderel.adjudicate import STALE_CHECK, build_adjudication, read_decisions, write_adjudication
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.merge import merge

CB = Codebook(
    title="stale (invented)",
    unit="report_id",
    variables=(
        Variable("species", "nominal", categories=tuple(Category(i, f"c{i}") for i in (1, 2, 3))),
    ),
)


def codings(ann: int, bob: int) -> Codings:
    records = [
        {"unit": "R1", "coder": "ann", "variable": "species", "value": ann},
        {"unit": "R1", "coder": "bob", "variable": "species", "value": bob},
    ]
    return Codings.from_records(CB, records)


def decide(path, text: str) -> None:
    wb = load_workbook(path)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    ws.cell(row=2, column=header.index("decision") + 1, value=text)
    wb.save(path)


def check_cell(path):
    ws = load_workbook(path)["to decide"]
    header = [c.value for c in ws[1]]
    return ws.cell(row=2, column=header.index("check") + 1)


def test_changed_values_mark_the_row_and_merge_waits_for_confirmation(tmp_path):
    path = tmp_path / "list.xlsx"
    write_adjudication(build_adjudication(codings(1, 2)), path)
    decide(path, "2")
    assert merge(codings(1, 2), read_decisions(path, CB)).frame["species"].tolist() == [2]

    # ann changes her code: still a disagreement, but not the one decided on
    again = build_adjudication(codings(3, 2), path)
    assert [p.code for p in again.problems] == ["stale-decision"]
    write_adjudication(again, path)
    cell = check_cell(path)
    assert cell.value == STALE_CHECK
    assert cell.fill.start_color.rgb.endswith("FCE8B2")
    assert again.to_dict()["to_check"] == 1
    assert again.to_dict()["decided"] == 0

    # the values on the list now match, yet the decision is not used while marked
    result = merge(codings(3, 2), read_decisions(path, CB))
    assert result.frame["species_status"].tolist() == ["unresolved"]
    assert [s["unit"] for s in result.stale] == ["R1"]
    assert "check" in result.stale[0]["reason"]

    # a further regeneration keeps the mark (nothing was confirmed)
    write_adjudication(build_adjudication(codings(3, 2), path), path)
    assert check_cell(path).value == STALE_CHECK

    # the adjudicator confirms by clearing the check cell: the decision is used again
    wb = load_workbook(path)
    ws = wb["to decide"]
    ws[check_cell(path).coordinate] = None
    wb.save(path)
    result = merge(codings(3, 2), read_decisions(path, CB))
    assert result.frame["species_status"].tolist() == ["adjudicated"]
    assert result.stale == ()
    write_adjudication(build_adjudication(codings(3, 2), path), path)
    assert check_cell(path).value is None


CODEBOOK_YAML = """\
title: stale CLI (invented)
unit: report_id
variables:
  - name: species
    level: nominal
    categories: [{code: 1, label: Bear}, {code: 2, label: Elk}, {code: 3, label: Cougar}]
"""


def test_strict_merge_refuses_and_the_audit_lists_it(tmp_path):
    from coderel.cli.app import app

    runner = CliRunner()
    cb = tmp_path / "cb.yaml"
    cb.write_text(CODEBOOK_YAML, encoding="utf-8")
    data = tmp_path / "sheets"
    data.mkdir()
    (data / "ann.csv").write_text("report_id,species\nR1,1\nR2,1\n", encoding="utf-8")
    (data / "bob.csv").write_text("report_id,species\nR1,2\nR2,1\n", encoding="utf-8")
    lst = tmp_path / "list.csv"
    assert (
        runner.invoke(app, ["adjudicate", "-c", str(cb), str(data), "-o", str(lst)]).exit_code == 0
    )
    text = lst.read_text(encoding="utf-8").splitlines()
    header = text[0].split(",")
    row = text[1].split(",")
    row[header.index("decision")] = "2"
    lst.write_text("\n".join([text[0], ",".join(row), *text[2:]]) + "\n", encoding="utf-8")
    (data / "ann.csv").write_text("report_id,species\nR1,3\nR2,1\n", encoding="utf-8")
    res = runner.invoke(app, ["adjudicate", "-c", str(cb), str(data), "-o", str(lst), "--json"])
    assert json.loads(res.stdout)["to_check"] == 1
    out = tmp_path / "m.csv"
    args = ["merge", "-c", str(cb), str(data), "--decisions", str(lst), "-o", str(out)]
    strict = runner.invoke(app, [*args, "--strict"])
    assert strict.exit_code == 1
    assert not out.exists()
    loose = runner.invoke(app, args)
    assert loose.exit_code == 0
    audit = json.loads(
        (tmp_path / "m.csv.audit.jsonl").read_text(encoding="utf-8").splitlines()[-1]
    )
    assert [(s["unit"], s["variable"]) for s in audit["stale_decisions"]] == [("R1", "species")]
    assert audit["unresolved"] == 1
