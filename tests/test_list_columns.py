"""Columns an adjudicator adds to the list are kept, never taken for a coder (issue 12, item 14).

coderel writes the list's header in a fixed order (coderel.adjudicate.model.main_columns: unit,
variable, kind, one column per coder, the text columns, decision, note, adjudicator, check, key,
then reason and list in the csv form). The coders' columns are those between ``kind`` and
``decision``; any other column was added by hand. Before, a csv list (or a workbook whose
``about`` sheet was deleted) took every unknown column for a coder: the column vanished when the
list was written again, and its decisions were flagged ``stale-decision`` because a "coder" had
changed. Now the column is kept with its cells and one ``kept-column`` warning says so; two
columns of one header are a ``duplicate-list-column`` error naming the header cell, and nothing
is written over the list.
"""

from __future__ import annotations

import csv
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from openpyxl import load_workbook
from openpyxl.utils import get_column_letter

from coderel.adjudicate import (
    build_adjudication,
    read_adjudication,
    read_decisions,
    write_adjudication,
)
from coderel.errors import DataProblems
from tests.test_adjudicate_roundtrip import CB, codings

DATA = {
    "ann": [("R1", 1, (1,), None), ("R2", 2, (1,), None)],
    "bob": [("R1", 2, (1,), None), ("R2", 1, (1,), None)],
}


def _csv(path: Path) -> list[list[str]]:
    return list(csv.reader(io.StringIO(path.read_text(encoding="utf-8"))))


def _save_csv(path: Path, rows: list[list[str]]) -> None:
    with open(path, "w", encoding="utf-8", newline="") as fh:
        csv.writer(fh).writerows(rows)


def _decided_csv(tmp_path: Path, *, insert_at: str | None = None) -> Path:
    """A csv list with both species rows decided and a column 'second opinion' added at the end
    (or inserted before the column ``insert_at``)."""
    out = tmp_path / "adj.csv"
    write_adjudication(build_adjudication(codings(DATA)), out)
    rows = _csv(out)
    header = rows[0]
    at = len(header) if insert_at is None else header.index(insert_at)
    iv, idec = header.index("variable"), header.index("decision")
    for n, row in enumerate(rows):
        if n and row[iv] == "species":
            row[idec] = "1"
        row.insert(at, "second opinion" if n == 0 else f"ask Lee about {row[0]}")
    _save_csv(out, rows)
    return out


def _codes(problems) -> list[str]:
    return sorted(p.code for p in problems)


@pytest.mark.parametrize("insert_at", [None, "narrative"])
def test_added_csv_column_is_kept_without_stale_warnings(tmp_path, insert_at):
    out = _decided_csv(tmp_path, insert_at=insert_at)
    adj = build_adjudication(codings(DATA), out)
    assert adj.coders == ("ann", "bob")
    assert adj.extra_columns == ("second opinion",)
    assert _codes(adj.problems) == ["kept-column"]  # once, and no stale-decision
    assert {r.key: r.extra["second opinion"] for r in adj.rows if r.variable == "species"} == {
        "R1|species": "ask Lee about R1",
        "R2|species": "ask Lee about R2",
    }
    write_adjudication(adj, out)
    rows = _csv(out)
    assert rows[0][-1] == "second opinion"  # kept, after coderel's own columns
    assert {r[0]: r[-1] for r in rows[1:] if r[1] == "species"} == {
        "R1": "ask Lee about R1",
        "R2": "ask Lee about R2",
    }
    again = build_adjudication(codings(DATA), out)  # a third run: still kept, still said once
    assert _codes(again.problems) == ["kept-column"]
    assert {r.key: r.decision for r in again.rows if r.decided} == {
        "R1|species": "1",
        "R2|species": "1",
    }
    decisions = read_decisions(out, CB)
    assert decisions.get("R1", "species").values == {"ann": "1 = Bear", "bob": "2 = Elk"}


def _decided_xlsx(tmp_path: Path, *, about: bool, column: int | None = None, text: str) -> Path:
    out = tmp_path / "adj.xlsx"
    write_adjudication(build_adjudication(codings(DATA)), out)
    wb = load_workbook(out)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    if column is not None:
        ws.insert_cols(column)
    at = column or len(header) + 1
    dcol = [c.value for c in ws[1]].index("decision") + 1
    ws.cell(row=1, column=at, value="second opinion")
    for r in range(2, ws.max_row + 1):
        ws.cell(row=r, column=at, value=text)
        if ws.cell(row=r, column=2).value == "species":
            ws.cell(row=r, column=dcol, value="1")
    if not about:
        del wb["about"]
    wb.save(out)
    return out


@pytest.mark.parametrize(
    ("about", "column", "text"),
    [
        (False, None, "ask Lee"),  # the about sheet deleted, a column added at the end
        (False, 6, "ask Lee"),  # ... or among the coders' columns
        (True, 6, "1 = Bear"),  # a column of codes among the coders': the about sheet says
    ],
)
def test_added_xlsx_column_is_kept(tmp_path, about, column, text):
    out = _decided_xlsx(tmp_path, about=about, column=column, text=text)
    adj = build_adjudication(codings(DATA), out)
    assert adj.extra_columns == ("second opinion",)
    assert _codes(adj.problems) == ["kept-column"]
    write_adjudication(adj, out)
    ws = load_workbook(out)["to decide"]
    header = [c.value for c in ws[1]]
    assert header[-1] == "second opinion"
    at = header.index("second opinion")
    assert {row[at].value for row in ws.iter_rows(min_row=2)} == {text}
    assert not ws.cell(row=2, column=at + 1).protection.locked  # the adjudicator's to edit
    kept = read_adjudication(out, CB)
    assert sum(r.decided for r in kept.rows) == 2


def test_a_departed_coder_is_still_a_coder(tmp_path):
    """A csv list written for three coders; carl's sheet is then taken out. carl's column holds
    coders' values, so it is his (the decisions made on his values are marked), not an added
    column."""
    three = {**DATA, "carl": [("R1", 1, (1,), None), ("R2", 1, (1,), None)]}
    out = tmp_path / "adj.csv"
    write_adjudication(build_adjudication(codings(three)), out)
    rows = _csv(out)
    header = rows[0]
    for row in rows[1:]:
        row[header.index("decision")] = "1" if row[1] == "species" else ""
    _save_csv(out, rows)
    adj = build_adjudication(codings(DATA), out)
    assert adj.extra_columns == ()
    assert _codes(adj.problems) == ["stale-decision", "stale-decision"]


def test_a_departed_coder_on_the_retired_sheet_is_still_a_coder(tmp_path):
    """carl leaves and bob changes R1's species: the row moves to 'no longer needed' with carl's
    value, a column the 'about' sheet of the next list no longer names; it stays a coder."""
    three = {**DATA, "carl": [("R1", 1, (1,), None), ("R2", 1, (1,), None)]}
    out = tmp_path / "adj.xlsx"
    write_adjudication(build_adjudication(codings(three)), out)
    two = {"ann": DATA["ann"], "bob": [("R1", 1, (1,), None), DATA["bob"][1]]}
    adj = build_adjudication(codings(two), out)
    assert [(r.key, dict(r.values)) for r in adj.retired] == [
        ("R1|species", {"ann": "1 = Bear", "bob": "2 = Elk", "carl": "1 = Bear"})
    ]
    write_adjudication(adj, out)
    again = build_adjudication(codings(two), out)
    assert (again.extra_columns, _codes(again.problems)) == ((), [])
    assert dict(again.retired[0].values)["carl"] == "1 = Bear"


@pytest.mark.parametrize("suffix", [".csv", ".xlsx"])
def test_duplicate_headers_are_a_located_error(tmp_path, suffix):
    out = tmp_path / f"adj{suffix}"
    write_adjudication(build_adjudication(codings(DATA)), out)
    if suffix == ".csv":
        rows = _csv(out)
        for n, row in enumerate(rows):
            row.append("note" if n == 0 else "a second note")
        _save_csv(out, rows)
        width = len(rows[0])
    else:
        wb = load_workbook(out)
        ws = wb["to decide"]
        width = ws.max_column + 1
        ws.cell(row=1, column=width, value="note")
        wb.save(out)
    before = out.read_bytes()
    cell = f"{get_column_letter(width)}1"
    with pytest.raises(DataProblems) as raised:
        build_adjudication(codings(DATA), out)
    found = [(p.code, p.cell) for p in raised.value.problems]
    assert found == [("duplicate-list-column", cell)]
    assert out.read_bytes() == before
    decisions = read_decisions(out, CB)
    assert [(p.code, p.cell) for p in decisions.problems] == found
    assert len(decisions) == 0


def _run(*args: object) -> subprocess.CompletedProcess:
    env = {**os.environ, "NO_COLOR": "1"}
    env.pop("CODEREL_DEBUG", None)
    return subprocess.run(
        [sys.executable, "-c", "from coderel.cli import main; main()", *map(str, args)],
        capture_output=True,
        env=env,
        timeout=300,
        check=False,
    )


def test_adjudicate_and_merge_at_the_command_line(tmp_path):
    cb = Path(__file__).resolve().parent / "data" / "hostile" / "codebook.yaml"
    sheets = tmp_path / "sheets"
    sheets.mkdir()
    head = "report_id,narrative,animal,distance_m\n"
    (sheets / "ana.csv").write_text(head + "R-1,x,1,5\nR-2,y,3,6\n", encoding="utf-8")
    (sheets / "ben.csv").write_text(head + "R-1,x,2,5\nR-2,y,1,6\n", encoding="utf-8")
    adj = tmp_path / "adj.csv"
    assert _run("adjudicate", "-c", cb, sheets, "-o", adj).returncode == 0
    rows = _csv(adj)
    for n, row in enumerate(rows):
        if n:
            row[rows[0].index("decision")] = "1"
        row.append("second opinion" if n == 0 else "ask Lee")
    _save_csv(adj, rows)
    proc = _run("adjudicate", "-c", cb, sheets, "-o", adj, "--json")
    assert proc.returncode == 0, proc.stderr.decode()
    data = json.loads(proc.stdout)
    assert [(p["code"], p["file"]) for p in data["problems"]] == [("kept-column", "adj.csv")]
    assert data["kept_columns"] == ["second opinion"]
    assert _csv(adj)[0][-1] == "second opinion"
    merged = tmp_path / "merged.csv"
    proc = _run("merge", "-c", cb, sheets, "--decisions", adj, "-o", merged, "--json")
    assert proc.returncode == 0, proc.stderr.decode()
    assert json.loads(proc.stdout)["status_counts"]["animal"]["adjudicated"] == 2


def test_a_long_note_in_a_csv_list_is_read_and_kept(tmp_path):
    """Issue 12, item 9: a note longer than the csv module's default field limit (131,072
    characters) in a decisions csv is read (the limit is the project's text limit)."""
    out = tmp_path / "adj.csv"
    write_adjudication(build_adjudication(codings(DATA)), out)
    rows = _csv(out)
    header = rows[0]
    note = "The ranger's account, read again. " * 6_000  # 204,000 characters
    for row in rows[1:]:
        if row[header.index("variable")] == "species":
            row[header.index("decision")], row[header.index("note")] = "1", note
    _save_csv(out, rows)
    assert read_decisions(out, CB).get("R1", "species").note == note
    adj = build_adjudication(codings(DATA), out)
    assert {r.note for r in adj.rows if r.variable == "species"} == {note}
