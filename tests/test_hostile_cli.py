"""Hostile inputs at the command line: markup and control sequences in data, odd file names,
an unwritable stdout, a full disk, and concurrent merges onto one output (issue 12, items 7, 11,
12, 16, 17). Every command runs in a subprocess, as a user runs it; each must end with a clear
message and an exit code (never exit 4), leave earlier outputs intact and lose no audit line.
"""

from __future__ import annotations

import json
import os
import resource
import signal
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

from coderel.audit import out_of_step, read_audit
from coderel.io.atomic import remove_stale_temps

CB = Path(__file__).resolve().parent / "data" / "hostile" / "codebook.yaml"
HEADER = "report_id,narrative,animal,distance_m\n"
ESC_ID = "\x1b]0;owned\x07R-3\x1b[2J"


def run(*args: object, env: dict[str, str] | None = None, preexec=None, stdout=None):
    full = {**os.environ, "NO_COLOR": "1", **(env or {})}
    full.pop("CODEREL_DEBUG", None)
    return subprocess.run(
        [sys.executable, "-c", "from coderel.cli import main; main()", *map(str, args)],
        stdout=stdout if stdout is not None else subprocess.PIPE,
        stderr=subprocess.PIPE,
        env=full,
        preexec_fn=preexec,
        timeout=300,
        check=False,
    )


@pytest.fixture
def sheets(tmp_path: Path) -> Path:
    folder = tmp_path / "sheets"
    folder.mkdir()
    (folder / "ana.csv").write_text(
        HEADER + f"[/],x,1,5\n[bold]R-2,y,3,6\n{ESC_ID},z,1,7\n", encoding="utf-8"
    )
    (folder / "b[red]en.csv").write_text(
        HEADER + f"[/],x,2,5\n[bold]R-2,y,1,6\n{ESC_ID},z,1,7\n", encoding="utf-8"
    )
    return folder


def _no_crash(proc) -> str:
    err = proc.stderr.decode("utf-8", "replace")
    assert proc.returncode != 4, err
    assert "Traceback" not in err
    return err


def test_markup_and_control_sequences_in_data_are_printed_as_text(sheets, tmp_path):
    proc = run("validate", "-c", CB, sheets)
    _no_crash(proc)
    assert proc.returncode == 1  # the 3 is not a code of animal
    out = proc.stdout.decode("utf-8")
    assert "[bold]R-2" in out  # printed as it is, not read as markup
    assert "\x1b" not in out  # no raw control sequence reaches stdout
    assert "\x07" not in out
    out_path = tmp_path / "out[/]" / "m[x].csv"
    proc = run("merge", "-c", CB, sheets, "-o", out_path)
    err = _no_crash(proc)
    assert proc.returncode == 0, err
    assert "\x1b" not in err
    assert "[/]" in err  # the unresolved unit, shown as it is
    assert out_path.exists()


def test_undecodable_file_name_is_refused_by_name(sheets):
    odd = os.fsencode(sheets) + b"/c\xffx.csv"
    with open(odd, "w", encoding="utf-8") as fh:
        fh.write(HEADER + "R-1,x,1,5\n")
    proc = run("validate", "-c", CB, sheets, "--json")
    _no_crash(proc)
    assert proc.returncode == 3
    doc = json.loads(proc.stdout)
    refused = [p for p in doc["problems"] if p["code"] == "input-refused"]
    assert [p["file"] for p in refused] == ["c\\xffx.csv"]


def test_ascii_stdout_with_non_latin_names(tmp_path):
    folder = tmp_path / "sheets"
    folder.mkdir()
    for coder, value in (("Анна", 1), ("Ξένη", 2)):
        (folder / f"{coder}.csv").write_text(HEADER + f"R-1,x,{value},5\n", encoding="utf-8")
    for extra in ([], ["--json"]):
        proc = run("agree", "-c", CB, folder, "--replicates",
                   0, *extra, env={"PYTHONIOENCODING": "ascii"})  # fmt: skip
        _no_crash(proc)
        assert proc.returncode == 0
    assert json.loads(proc.stdout)  # --json: escaped, still JSON


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full")
def test_json_to_a_full_stdout_is_a_clear_error(sheets):
    with open("/dev/full", "w") as full:
        proc = run("validate", "-c", CB, sheets, "--json", stdout=full)
    err = _no_crash(proc)
    assert proc.returncode == 2
    assert "cannot write to standard output" in err


def _file_size_limit(limit: int):
    def apply() -> None:  # pragma: no cover - runs in the child
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    return apply


@pytest.mark.parametrize("suffix", [".csv", ".xlsx", ".parquet"])
def test_full_disk_leaves_old_output_and_log_intact(sheets, tmp_path, suffix):
    out = tmp_path / "o" / f"merged{suffix}"
    assert run("merge", "-c", CB, sheets, "-o", out).returncode == 0
    (sheets / "ana.csv").write_text(HEADER + "[/],x,2,5\n", encoding="utf-8")  # new content
    old, old_log = out.read_bytes(), Path(f"{out}.audit.jsonl").read_bytes()
    proc = run("merge", "-c", CB, sheets, "-o", out, preexec=_file_size_limit(1500))
    err = _no_crash(proc)
    assert proc.returncode == 2, err
    assert "cannot write" in err
    assert out.read_bytes() == old
    assert Path(f"{out}.audit.jsonl").read_bytes() == old_log
    assert not [p for p in out.parent.iterdir() if p.name.endswith(".tmp")]
    assert not out_of_step(out)


def test_stale_temporary_files_of_a_dead_process_are_removed(tmp_path):
    target = tmp_path / "merged.csv"
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)  # fmt: skip
    stale = tmp_path / f".merged.csv.{dead.stdout.strip()}-abcd1234.tmp"
    alive = tmp_path / f".merged.csv.{os.getppid()}-abcd1234.tmp"
    other = tmp_path / ".other.csv.1-abcd1234.tmp"
    for p in (stale, alive, other):
        p.write_text("x")
    assert remove_stale_temps(target) == [stale]
    assert alive.exists()
    assert other.exists()


def test_eight_concurrent_merges_give_eight_audit_lines(sheets, tmp_path):
    out = tmp_path / "merged.csv"
    with ThreadPoolExecutor(max_workers=8) as pool:
        procs = list(pool.map(lambda _: run("merge", "-c", CB, sheets, "-o", out), range(8)))
    assert [p.returncode for p in procs] == [0] * 8
    records = read_audit(out)
    assert len(records) == 8
    assert not out_of_step(out)


def test_a_dataset_out_of_step_with_its_log_is_reported(sheets, tmp_path):
    out = tmp_path / "merged.csv"
    assert run("merge", "-c", CB, sheets, "-o", out).returncode == 0
    out.write_text(out.read_text(encoding="utf-8") + "edited\n", encoding="utf-8")
    assert out_of_step(out)
    proc = run("merge", "-c", CB, sheets, "-o", out, "--json")
    assert proc.returncode == 0
    assert json.loads(proc.stdout)["was_out_of_step"] is True
    assert not out_of_step(out)
    assert len(read_audit(out)) == 2


def test_no_console_reads_markup():
    """Consoles print text literally (coderel/cli/common.py); rich's escape() would then show
    its backslashes, so it is not used anywhere."""
    root = Path(__file__).resolve().parents[1] / "coderel"
    users = [p.name for p in root.rglob("*.py") if "rich.markup" in p.read_text("utf-8")]
    assert users == []


def test_unreadable_coding_files_inside_a_folder_are_refused(sheets):
    legacy = Path(__file__).resolve().parent / "data" / "bad_inputs" / "legacy.xls"
    (sheets / "carl.xls").write_bytes(legacy.read_bytes())
    (sheets / "dana.xlsm").write_bytes(b"PK\x03\x04 not read")
    (sheets / "erin.csv").symlink_to(sheets / "gone.csv")  # a dangling link
    (sheets / "notes.txt").write_text("not a sheet", encoding="utf-8")
    proc = run("validate", "-c", CB, sheets, "--json")
    _no_crash(proc)
    assert proc.returncode == 3
    refused = {
        p["file"] for p in json.loads(proc.stdout)["problems"] if p["code"] == "input-refused"
    }
    assert refused == {"carl.xls", "dana.xlsm", "erin.csv"}
    assert run("agree", "-c", CB, sheets).returncode == 3  # never computed with fewer coders


def _decided_list(sheets: Path, tmp_path: Path, suffix: str) -> Path:
    adj = tmp_path / f"adj{suffix}"
    assert run("adjudicate", "-c", CB, sheets, "-o", adj).returncode == 0
    return adj


def test_duplicate_rows_of_a_list_lose_no_decision(sheets, tmp_path):
    adj = _decided_list(sheets, tmp_path, ".csv")
    lines = adj.read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    first = next(i for i, line in enumerate(lines) if line.startswith("[/],"))
    row = lines[first].split(",")
    row[header.index("decision")], row[header.index("note")] = "1", "first look"
    copy = list(row)
    copy[header.index("decision")], copy[header.index("note")] = "2", "second look"
    lines[first] = ",".join(row)
    lines.insert(first + 1, ",".join(copy))
    adj.write_text("\n".join(lines) + "\n", encoding="utf-8")
    before = adj.read_bytes()
    out = tmp_path / "merged.csv"
    proc = run("merge", "-c", CB, sheets, "--decisions", adj, "-o", out, "--json")
    _no_crash(proc)
    assert proc.returncode == 1
    dupes = [p for p in json.loads(proc.stdout)["problems"] if p["code"] == "duplicate-list-row"]
    assert [(p["unit"], p["variable"], p["cell"]) for p in dupes] == [
        ("[/]", "animal", f"A{first + 2}")
    ]
    assert not out.exists()
    proc = run("adjudicate", "-c", CB, sheets, "-o", adj)  # update the list: refused
    _no_crash(proc)
    assert proc.returncode == 1
    assert adj.read_bytes() == before  # both decisions and notes still there


def test_decisions_files_pass_the_same_preflight(sheets, tmp_path):
    from tests.test_hostile import hostile

    bomb = tmp_path / "decisions.xlsx"
    hostile.write_workbook(
        bomb, [hostile.Sheet(f"h{i}", hostile._filler(5), state="hidden") for i in range(300)]
    )
    proc = run("merge", "-c", CB, sheets, "--decisions", bomb, "-o", tmp_path / "m.csv")
    assert "worksheets" in _no_crash(proc)
    assert proc.returncode == 3
    adj = _decided_list(sheets, tmp_path, ".csv")
    with open(adj, "a", encoding="utf-8") as fh:
        fh.write('R-9,animal,,,"' + "n" * 1_500_000 + '"\n')
    proc = run("merge", "-c", CB, sheets, "--decisions", adj, "-o", tmp_path / "m.csv")
    assert "characters" in _no_crash(proc)
    assert proc.returncode == 3


def test_formula_like_names_stay_text_in_the_list_header(tmp_path):
    from openpyxl import load_workbook

    folder = tmp_path / "sheets"
    folder.mkdir()
    (folder / "=1+2.csv").write_text(HEADER + "R-1,x,1,5\n", encoding="utf-8")
    (folder / "@ben.csv").write_text(HEADER + "R-1,x,2,5\n", encoding="utf-8")
    adj = tmp_path / "adj.xlsx"
    assert run("adjudicate", "-c", CB, folder, "-o", adj).returncode == 0
    wb = load_workbook(adj)
    header = list(next(wb["to decide"].iter_rows(max_row=1)))
    assert all(c.data_type != "f" for c in header)
    assert {"'=1+2", "'@ben"} <= {c.value for c in header}
    proc = run("adjudicate", "-c", CB, folder, "-o", adj)  # the list reads back
    assert proc.returncode == 0, _no_crash(proc)
    proc = run("merge", "-c", CB, folder, "--decisions", adj, "-o", tmp_path / "m.csv")
    assert proc.returncode == 0, _no_crash(proc)
