"""Reading an adjudication list: the fast reader (python-calamine) against openpyxl's (issue 14).

The oracle is openpyxl's streaming reader, the one coderel used before: a list read either way
gives the same rows, decisions, notes, check marks and kept columns (same data, same answer). The
fast reader builds a dense grid per sheet, so a list whose cells span more than the limits allow
(one value in A1, one in XFD1048576) must be refused before it is opened, with exit 3 and no
crash; a list with entity declarations is refused too.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import subprocess
import sys
import zipfile
from pathlib import Path

import pyarrow.parquet as pq
import pytest
from openpyxl import Workbook, load_workbook

import coderel.io.xlsx_values as xlsx_values
from coderel.adjudicate import (
    build_adjudication,
    read_adjudication,
    read_decisions,
    write_adjudication,
)
from coderel.codebook.frictionless import write_codebook_yaml
from coderel.io.read import read_codings
from tests.test_adjudicate_order import CB, _long_table
from tests.token_oracle import tokens_row_by_row


@pytest.fixture(scope="module")
def codings(tmp_path_factory):
    folder = tmp_path_factory.mktemp("codings")
    pq.write_table(_long_table(), folder / "codings.parquet")
    return read_codings(CB, folder / "codings.parquet")


def _decided(codings, path: Path) -> Path:
    """The list with decisions, notes (one formula-like, one a date), a check mark and an added
    column, as an adjudicator leaves it after a spreadsheet program saved it."""
    write_adjudication(build_adjudication(codings), path)
    wb = load_workbook(path)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    col = {h: header.index(h) + 1 for h in header}
    ws.cell(row=1, column=len(header) + 1, value="my comment")
    for r in range(2, 40, 3):
        name = ws.cell(row=r, column=col["variable"]).value
        ws.cell(row=r, column=col["decision"], value="2" if name != "distance_m" else 120)
        ws.cell(row=r, column=col["note"], value=f"=looked again {r}")
        ws.cell(row=r, column=len(header) + 1, value=f"see photo {r}")
    ws.cell(row=5, column=col["note"], value=dt.datetime(2024, 5, 17, 9, 30))
    ws.cell(row=8, column=col["check"], value="please confirm")
    ws.cell(row=11, column=col["decision"], value="banana")
    wb.save(path)
    return path


def _streamed(monkeypatch) -> None:
    monkeypatch.setattr(xlsx_values, "read_sheet_values", lambda *args, **kwargs: None)


def test_fast_and_streaming_readers_read_a_list_the_same(codings, tmp_path, monkeypatch):
    path = _decided(codings, tmp_path / "list.xlsx")
    fast = read_adjudication(path, CB, codings.coders).to_dict()
    decisions = read_decisions(path, CB, codings.coders).to_dict()
    assert xlsx_values.read_sheet_values(path, ["to decide"]) is not None  # the fast reader ran
    _streamed(monkeypatch)
    assert read_adjudication(path, CB, codings.coders).to_dict() == fast
    assert read_decisions(path, CB, codings.coders).to_dict() == decisions
    # what the oracle read is what was written
    assert any(r["note"] == "2024-05-17 09:30:00" for r in fast["rows"])
    assert any(r["extra"] == {"my comment": "see photo 2"} for r in fast["rows"])
    assert [p["code"] for p in decisions["problems"]] == ["bad-decision"]


def test_a_list_made_again_is_the_same_whichever_reader_read_the_old_one(
    codings, tmp_path, monkeypatch
):
    path = _decided(codings, tmp_path / "list.xlsx")
    write_adjudication(build_adjudication(codings, path), tmp_path / "fast.xlsx")
    _streamed(monkeypatch)
    write_adjudication(build_adjudication(codings, path), tmp_path / "streamed.xlsx")
    assert (tmp_path / "fast.xlsx").read_bytes() == (tmp_path / "streamed.xlsx").read_bytes()


def test_error_cells_are_read_as_openpyxl_reads_them(codings, tmp_path):
    # calamine reads '#N/A' as an empty cell; the list then goes to openpyxl's reader, which
    # reads it as its text, a decision that is not valid.
    path = tmp_path / "list.xlsx"
    write_adjudication(build_adjudication(codings), path)
    wb = load_workbook(path)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    cell = ws.cell(row=2, column=header.index("decision") + 1, value="#N/A")
    cell.data_type = "e"
    wb.save(path)
    assert xlsx_values.read_sheet_values(path, ["to decide"]) is None
    decisions = read_decisions(path, CB, codings.coders)
    assert [(p.code, p.cell) for p in decisions.problems] == [("bad-decision", cell.coordinate)]


def _cli(*args: object) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "NO_COLOR": "1"}
    env.pop("CODEREL_DEBUG", None)
    return subprocess.run(
        [sys.executable, "-c", "from coderel.cli import main; main()", *map(str, args)],
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )


def _hostile_lists(tmp_path: Path) -> dict[str, Path]:
    def sheet(far: bool) -> Workbook:
        wb = Workbook()
        ws = wb.active
        ws.title = "to decide"
        ws.append(["unit", "variable", "kind", "ana", "decision"])
        ws.append(["TR-0001", "animal", "values differ", "1 = Bear", "2"])
        if far:
            ws["XFD1048576"] = "far away"
        return wb

    sparse, plain = tmp_path / "sparse.xlsx", tmp_path / "plain.xlsx"
    sheet(far=True).save(sparse)
    sheet(far=False).save(plain)
    laughs = (
        b'<?xml version="1.0"?><!DOCTYPE x [<!ENTITY a "aaaaaaaaaa">'
        b'<!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;"><!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;">]>'
    )
    entity = tmp_path / "entity.xlsx"
    with zipfile.ZipFile(plain) as src, zipfile.ZipFile(entity, "w") as dst:
        for info in src.infolist():
            data = src.read(info.filename)
            if info.filename == "xl/worksheets/sheet1.xml":
                data = laughs + data.split(b"?>", 1)[-1].replace(b">2<", b">&c;<")
            dst.writestr(info.filename, data)
    return {"sparse": sparse, "entity": entity}


@pytest.mark.parametrize("case", ["sparse", "entity"])
def test_hostile_lists_are_refused_before_any_grid_is_built(case, codings, tmp_path):
    folder = tmp_path / "data"
    folder.mkdir()
    pq.write_table(_long_table(), folder / "codings.parquet")
    cb = write_codebook_yaml(CB, tmp_path / "codebook.yaml")
    listing = _hostile_lists(tmp_path)[case]
    before = listing.read_bytes()
    out = tmp_path / "merged.csv"
    proc = _cli("merge", "-c", cb, folder, "--decisions", listing, "-o", out, "--json")
    assert proc.returncode == 3, proc.stderr
    assert "Traceback" not in proc.stderr
    refusal = json.loads(proc.stdout)["error"]
    assert listing.name in refusal
    assert ("over the limit" in refusal) == (case == "sparse")
    proc = _cli("adjudicate", "-c", cb, folder, "-o", listing)
    assert proc.returncode == 3, proc.stderr
    assert listing.read_bytes() == before
    assert not out.exists()


def test_cell_tokens_match_their_definition(codings):
    from coderel.adjudicate import cell_tokens
    from coderel.codebook.load import load_codebook

    root = Path(__file__).resolve().parent.parent
    demo = read_codings(
        load_codebook(root / "sample_codebooks" / "wildlife_encounters.yaml"), root / "demo/sheets"
    )  # multi-select, a conditional variable, missing codes, text
    for data in (codings, demo):
        fast = cell_tokens(data)
        assert fast == tokens_row_by_row(data)
        # equal is not enough: 2 and 2.0 are equal tokens but not the same code
        assert {k: {c: repr(t) for c, t in v.items()} for k, v in fast.items()} == {
            k: {c: repr(t) for c, t in v.items()} for k, v in tokens_row_by_row(data).items()
        }
