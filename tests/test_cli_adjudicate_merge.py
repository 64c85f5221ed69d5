"""``coderel adjudicate`` and ``coderel merge`` end to end: the round trip, refusals, exit codes,
reproducible bytes, the demo path and a merge killed mid-write.

Exit codes follow coderel/errors.py (1 data problems, 2 usage). Formula-injection checks follow
the OWASP guidance on CSV injection; the rest are checked against hand-made sheets whose
disagreements are known by construction.
"""

from __future__ import annotations

import importlib.util
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook
from typer.testing import CliRunner

from coderel.adjudicate import read_adjudication, read_decisions
from coderel.codebook.load import load_codebook
from coderel.errors import ExitCode

ROOT = Path(__file__).resolve().parents[1]
DEMO_CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
DEMO_SHEETS = ROOT / "demo" / "sheets"
#: the demo's decisions, shipped beside the sample codebook (demo/ holds only generated files)
SHIPPED = ROOT / "sample_decisions" / "wildlife_encounters.xlsx"

CODEBOOK = """\
title: CLI merge test (invented)
version: "1.2"
unit: report_id
text_columns: [narrative]
variables:
  - name: species
    level: nominal
    categories:
      - {code: 1, label: Bear}
      - {code: 2, label: Elk}
      - {code: 3, label: Cougar}
    missing: [{code: 99, label: cannot be coded}]
  - name: actions
    level: nominal
    multiple: true
    categories:
      - {code: 1, label: Backed away}
      - {code: 3, label: Used spray}
  - name: spray_worked
    level: nominal
    applies_when: {variable: actions, includes: [3]}
    categories:
      - {code: 1, label: "Yes"}
      - {code: 2, label: "No"}
"""
HEADER = "report_id,narrative,species,actions,spray_worked\n"
ANN = HEADER + "R1,=cmd|' /C calc'!A0,1,1;3,1\nR2,quiet morning,2,1,\nR3,dusk,3,1,\n"
BOB = HEADER + "R1,=cmd|' /C calc'!A0,2,1;3,2\nR2,quiet morning,2,1,\nR3,dusk,3,1,\n"


def invoke(*args: str):
    from coderel.cli import app

    return CliRunner().invoke(app, [str(a) for a in args])


@pytest.fixture
def project(tmp_path):
    (tmp_path / "cb.yaml").write_text(CODEBOOK)
    sheets = tmp_path / "sheets"
    sheets.mkdir()
    (sheets / "ann.csv").write_text(ANN)
    (sheets / "bob.csv").write_text(BOB)
    return tmp_path


def fill(path: Path, decisions: dict[tuple[str, str], str]) -> None:
    """Write decisions into the list with openpyxl, as an adjudicator would."""
    wb = load_workbook(path)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    for row in ws.iter_rows(min_row=2):
        key = (row[header.index("unit")].value, row[header.index("variable")].value)
        if key in decisions:
            row[header.index("decision")].value = decisions[key]
            row[header.index("adjudicator")].value = "lead ranger"
            row[header.index("note")].value = "checked"
    wb.save(path)


def test_decisions_kept_across_regeneration(project):
    cb, sheets, adj = project / "cb.yaml", project / "sheets", project / "adj.xlsx"
    res = invoke("adjudicate", "-c", cb, sheets, "-o", adj, "--json")
    assert res.exit_code == 0, res.output
    first = json.loads(res.stdout)
    assert [(r["unit"], r["variable"]) for r in first["rows"]] == [
        ("R1", "species"),
        ("R1", "spray_worked"),
    ]
    assert first["added"] == 2
    fill(adj, {("R1", "species"): "2 = Elk", ("R1", "spray_worked"): "1"})
    # bob fixes spray_worked; a new unit R4 arrives on which the coders disagree
    (sheets / "bob.csv").write_text(BOB.replace("1;3,2", "1;3,1") + "R4,x,1,1,\n")
    # ann changes her species code of R1: still a disagreement, but not the one decided on
    (sheets / "ann.csv").write_text(ANN.replace("A0,1,1;3", "A0,3,1;3") + "R4,x,3,1,\n")
    res = invoke("adjudicate", "-c", cb, sheets, "-o", adj, "--json")
    assert res.exit_code == 0, res.output
    second = json.loads(res.stdout)
    assert (second["kept"], second["added"], second["moved"]) == (1, 1, 1)
    again = read_adjudication(adj, load_codebook(cb))
    assert [(r.unit, r.variable, r.decision, r.values["ann"]) for r in again.rows] == [
        ("R1", "species", "2 = Elk", "3 = Cougar"),
        ("R4", "species", None, "3 = Cougar"),
    ]
    header = [c.value for c in load_workbook(adj)["to decide"][1]]
    letter = chr(ord("A") + header.index("check"))  # the row is marked in its check cell
    assert [(p["code"], p["file"], p["cell"], p["severity"]) for p in second["problems"]] == [
        ("stale-decision", "adj.xlsx", f"{letter}2", "warning")
    ]
    assert [(r.key, r.decision, r.reason) for r in again.retired] == [
        ("R1|spray_worked", "1", "coders now agree")
    ]
    assert "updated" in res.stderr
    # the narrative is on the list for the adjudicator, neutralised
    ws = load_workbook(adj)["to decide"]
    assert "'=cmd|' /C calc'!A0" in [c.value for c in ws[2]]


def test_invalid_decision_reported_with_cell_and_exit_1(project):
    cb, sheets, adj = project / "cb.yaml", project / "sheets", project / "adj.xlsx"
    assert invoke("adjudicate", "-c", cb, sheets, "-o", adj).exit_code == 0
    fill(adj, {("R1", "species"): "7", ("R1", "spray_worked"): "Yes"})
    header = [c.value for c in load_workbook(adj)["to decide"][1]]
    letter = chr(ord("A") + header.index("decision"))
    res = invoke("adjudicate", "-c", cb, sheets, "-o", adj, "--json")
    assert res.exit_code == ExitCode.DATA_PROBLEMS
    problems = json.loads(res.stdout)["problems"]
    assert [(p["code"], p["file"], p["sheet"], p["cell"], p["unit"]) for p in problems] == [
        ("bad-decision", "adj.xlsx", "to decide", f"{letter}2", "R1")
    ]
    assert read_decisions(adj, load_codebook(cb)).get("R1", "spray_worked").value == 1
    # merge refuses to write with an invalid decision
    out = project / "merged.csv"
    res = invoke("merge", "-c", cb, sheets, "--decisions", adj, "-o", out, "--json")
    assert res.exit_code == ExitCode.DATA_PROBLEMS
    doc = json.loads(res.stdout)
    assert doc["written"] is False
    assert [(p["code"], p["cell"]) for p in doc["problems"]] == [("bad-decision", f"{letter}2")]
    assert not out.exists()


def test_output_equal_to_an_input_is_refused(project):
    cb, sheets = project / "cb.yaml", project / "sheets"
    before = (sheets / "ann.csv").read_bytes()
    for args in (
        ("merge", "-c", cb, sheets, "-o", sheets / "ann.csv"),
        ("adjudicate", "-c", cb, sheets, "-o", sheets / "ann.csv"),
        ("merge", "-c", cb, sheets / "bob.csv", sheets / "ann.csv", "-o", sheets / "ann.csv"),
    ):
        res = invoke(*args)
        assert res.exit_code == ExitCode.USAGE, res.output
        assert "also an input" in res.stderr
    adj = project / "adj.csv"
    assert invoke("adjudicate", "-c", cb, sheets, "-o", adj).exit_code == 0
    res = invoke("merge", "-c", cb, sheets, "--decisions", adj, "-o", adj)
    assert res.exit_code == ExitCode.USAGE
    assert (sheets / "ann.csv").read_bytes() == before
    assert invoke("merge", "-c", cb, sheets, "-o", project / "x.txt").exit_code == ExitCode.USAGE
    assert invoke("merge", "-c", cb, sheets, "-o", adj.with_suffix(".csv2")).exit_code == 2
    assert invoke("merge", "-c", cb, sheets, "--rule", "loudest", "-o", adj).exit_code == 2


def test_strict_exits_1_and_writes_nothing(project):
    cb, sheets, out = project / "cb.yaml", project / "sheets", project / "merged.xlsx"
    res = invoke("merge", "-c", cb, sheets, "--strict", "-o", out, "--json")
    assert res.exit_code == ExitCode.DATA_PROBLEMS
    doc = json.loads(res.stdout)
    assert doc["unresolved"] == [
        {"unit": "R1", "variable": "species", "coders": {"ann": "1 = Bear", "bob": "2 = Elk"}},
        {"unit": "R1", "variable": "spray_worked", "coders": {"ann": "1 = Yes", "bob": "2 = No"}},
    ]
    assert not out.exists()
    assert not Path(f"{out}.audit.jsonl").exists()
    res = invoke("merge", "-c", cb, sheets, "-o", out)
    assert res.exit_code == 0, res.output
    assert "2 unresolved cell(s)" in res.stderr
    assert out.exists()
    assert len(Path(f"{out}.audit.jsonl").read_text().splitlines()) == 1


@pytest.mark.parametrize("suffix", ["csv", "xlsx", "parquet"])
def test_merge_twice_gives_identical_bytes(project, suffix):
    cb, sheets, out = project / "cb.yaml", project / "sheets", project / f"merged.{suffix}"
    adj = project / "adj.xlsx"
    assert invoke("adjudicate", "-c", cb, sheets, "-o", adj).exit_code == 0
    fill(adj, {("R1", "species"): "2", ("R1", "spray_worked"): "not applicable"})
    args = ("merge", "-c", cb, sheets, "--decisions", adj, "--spread", "-o", out)
    assert invoke(*args).exit_code == 0
    first = out.read_bytes()
    # a second run in a fresh process, so no state of this one can make the bytes equal
    code = "import sys; from coderel.cli import main; sys.argv[0] = 'coderel'; main()"
    done = subprocess.run(
        [sys.executable, "-c", code, *map(str, args)], capture_output=True, check=False
    )
    assert done.returncode == 0
    assert out.read_bytes() == first
    log = [json.loads(line) for line in Path(f"{out}.audit.jsonl").read_text().splitlines()]
    assert len(log) == 2
    assert log[0]["output"]["sha256"] == log[1]["output"]["sha256"]
    assert [a["decision"] for a in log[0]["adjudicated"]] == ["2", "not applicable"]
    if suffix == "parquet":
        frame = pd.read_parquet(out)
        assert frame.loc[0, "report_id"] == "R1"
        assert frame["actions__3"].tolist() == [1, 0, 0]
        assert frame["species_status"].tolist() == ["adjudicated", "agreed", "agreed"]


def _demo_script():
    spec = importlib.util.spec_from_file_location(
        "make_demo_decisions", ROOT / "scripts" / "make_demo_decisions.py"
    )
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_demo_path_adjudicate_fill_merge_leaves_nothing_unresolved(tmp_path):
    adj, out = tmp_path / "adjudication.xlsx", tmp_path / "merged.xlsx"
    res = invoke("adjudicate", "-c", DEMO_CB, DEMO_SHEETS, "-o", adj, "--json")
    assert res.exit_code == 0, res.output
    listed = json.loads(res.stdout)
    # fill EVERY decision with openpyxl: the first coder's value unless it is blank
    wb = load_workbook(adj)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    coders = listed["coders"]
    for row in ws.iter_rows(min_row=2):
        values = [row[header.index(c)].value for c in coders]
        row[header.index("decision")].value = next(v for v in values if v and v != "(blank)")
    wb.save(adj)
    res = invoke("merge", "-c", DEMO_CB, DEMO_SHEETS, "--decisions", adj, "--strict", "-o", out)
    assert res.exit_code == 0, res.output
    res = invoke("merge", "-c", DEMO_CB, DEMO_SHEETS, "--decisions", adj, "-o", out, "--json")
    doc = json.loads(res.stdout)
    assert doc["unresolved"] == []
    assert doc["cells"] == doc["units"] * doc["variables"] == 200 * 10
    assert sum(doc["totals"].values()) == doc["cells"]
    assert doc["totals"]["adjudicated"] == listed["disagreements"]
    assert [p["code"] for p in doc["problems"]] == []
    # the shipped decisions file settles the demo the same way
    shipped = invoke(
        "merge", "-c", DEMO_CB, DEMO_SHEETS, "--decisions", SHIPPED,
        "--strict", "-o", tmp_path / "shipped.csv", "--json",
    )  # fmt: skip
    assert shipped.exit_code == 0, shipped.output
    assert json.loads(shipped.stdout)["unresolved"] == []


def test_demo_decisions_file_is_reproduced_by_its_script(tmp_path):
    out = tmp_path / "decisions.xlsx"
    counts = _demo_script().make(out)
    assert counts["decisions"] == 510
    assert out.read_bytes() == SHIPPED.read_bytes()


KILLED = r"""
import os, pathlib, sys, time
marker, mode = pathlib.Path(sys.argv[1]), sys.argv[2]
if mode == "before-rename":
    def stalled_replace(src, dst):
        marker.write_text("stalled")
        time.sleep(120)
    os.replace = stalled_replace
else:
    def stalled_write(self, data):
        with open(self, "wb") as fh:
            fh.write(data[: len(data) // 2])
            fh.flush()
            os.fsync(fh.fileno())
        marker.write_text("stalled")
        time.sleep(120)
    pathlib.Path.write_bytes = stalled_write
from coderel.cli import main
sys.argv = ["coderel", *sys.argv[3:]]
main()
"""


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
@pytest.mark.parametrize("mode", ["mid-write", "before-rename"])
def test_merge_killed_mid_write_leaves_old_output_intact(tmp_path, mode):
    cb = tmp_path / "cb.yaml"
    cb.write_text(CODEBOOK)
    sheets = tmp_path / "sheets"
    sheets.mkdir()
    rows = "".join(f"R{i},report {i},{1 + i % 3},1;3,{1 + i % 2}\n" for i in range(4000))
    (sheets / "ann.csv").write_text(HEADER + rows)
    (sheets / "bob.csv").write_text(HEADER + rows)
    out = tmp_path / "merged.csv"
    assert invoke("merge", "-c", cb, sheets, "-o", out).exit_code == 0
    old = out.read_bytes()
    log = Path(f"{out}.audit.jsonl")
    old_log = log.read_bytes()
    (sheets / "bob.csv").write_text(HEADER + rows.replace(",1;3,", ",1,"))  # output would change
    marker = tmp_path / "marker"
    args = ("merge", "-c", cb, sheets, "-o", out)
    command = [sys.executable, "-c", KILLED, str(marker), mode, *map(str, args)]
    proc = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 120
        while not marker.exists():
            assert proc.poll() is None, "the merge ended before it reached the write"
            assert time.monotonic() < deadline
            time.sleep(0.05)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == -signal.SIGKILL
    assert out.read_bytes() == old
    assert log.read_bytes() == old_log
    leftovers = [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
    assert all(name.startswith(f".merged.csv.{proc.pid}-") for name in leftovers)
    # the unfinished temporary file, never renamed into place (and the link that kept the
    # previous dataset until the audit line was written)
    assert len([n for n in leftovers if not n.endswith("-previous.tmp")]) == 1
    # the next write removes the temporary files of the killed process
    assert invoke("merge", "-c", cb, sheets, "-o", out).exit_code == 0
    assert not [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_csv_list_decisions_and_stale_ones_reported(project):
    cb, sheets, adj = project / "cb.yaml", project / "sheets", project / "adj.csv"
    assert invoke("adjudicate", "-c", cb, sheets, "-o", adj).exit_code == 0
    table = pd.read_csv(adj, dtype=str, keep_default_na=False)
    table.loc[table["variable"] == "species", "decision"] = "3 = Cougar"
    table.loc[table["variable"] == "spray_worked", "decision"] = "2"
    table.to_csv(adj, index=False)
    out = project / "merged.csv"
    res = invoke("merge", "-c", cb, sheets, "--decisions", adj, "--strict", "-o", out, "--json")
    assert res.exit_code == 0, res.output
    assert json.loads(res.stdout)["totals"]["adjudicated"] == 2
    merged = pd.read_csv(out, dtype=str, keep_default_na=False)
    assert merged.loc[0, ["species", "species_status"]].tolist() == ["3", "adjudicated"]
    # bob changes his species code after the decision: the decision no longer matches
    (sheets / "bob.csv").write_text(
        BOB.replace("R1,=cmd|' /C calc'!A0,2,", "R1,=cmd|' /C calc'!A0,3,")
    )
    res = invoke("merge", "-c", cb, sheets, "--decisions", adj, "-o", out, "--json")
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert [(p["code"], p["unit"], p["variable"], p["cell"]) for p in doc["problems"]] == [
        ("stale-decision", "R1", "species", "G2")
    ]
    assert [(u["unit"], u["variable"]) for u in doc["unresolved"]] == [("R1", "species")]
    assert "coders' values changed" in doc["problems"][0]["message"]
