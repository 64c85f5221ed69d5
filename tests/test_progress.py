"""Progress on stderr: phases named in plain words on a terminal, nothing otherwise, none with
``--quiet``; stdout (``--json``) is the same with or without a bar.

The terminal is a real pseudo-terminal (:mod:`pty`) given to the command as its stderr, in a
subprocess; ``CODEREL_PROGRESS_AFTER=0`` shows each bar at once instead of after a second.
The expected behaviour is the one stated in issue 14, item 7 and in DEVELOPERS.md ("Progress").
"""

from __future__ import annotations

import io
import json
import os
import re
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
NAMES = ("coder_ana.xlsx", "coder_ben.xlsx", "coder_cai.xlsx")
_ESCAPES = re.compile(r"\x1b\[[0-?]*[ -/]*[@-~]")

pty = pytest.importorskip("pty", reason="pseudo-terminals need a POSIX system")


def _env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in {"CI", "NO_COLOR"}}
    env.update(CODEREL_PROGRESS_AFTER="0", COLUMNS="200", TERM="xterm")
    return env


def _run(args: list[str], *, terminal: bool) -> tuple[int, str, str]:
    """Run ``coderel ARGS``; stdout is a pipe, stderr a pseudo-terminal or a pipe.

    Returns the exit code, stdout and stderr (escape sequences taken out, carriage returns made
    line breaks, so each redraw of a bar is a line)."""
    command = [sys.executable, "-c", "from coderel.cli import main; main()", *args]
    if not terminal:
        done = subprocess.run(
            command,
            capture_output=True,
            text=True,
            env=_env(),
            stdin=subprocess.DEVNULL,
            timeout=300,
        )
        return done.returncode, done.stdout, done.stderr
    main, child = pty.openpty()
    proc = subprocess.Popen(
        command, stdout=subprocess.PIPE, stderr=child, stdin=subprocess.DEVNULL, env=_env()
    )
    os.close(child)
    chunks: list[bytes] = []

    def drain() -> None:  # read the terminal while the command runs, or it could block
        while True:
            try:
                data = os.read(main, 65536)
            except OSError:  # the child closed its end
                return
            if not data:
                return
            chunks.append(data)

    reader = threading.Thread(target=drain)
    reader.start()
    out, _ = proc.communicate(timeout=300)
    reader.join(timeout=60)
    os.close(main)
    err = _ESCAPES.sub("", b"".join(chunks).decode("utf-8", "replace")).replace("\r", "\n")
    return proc.returncode, out.decode("utf-8"), err


def test_validate_names_each_file_and_the_checks_on_a_terminal():
    args = ["validate", "-c", str(CB), str(SHEETS), "--json"]
    code, out, err = _run(args, terminal=True)
    assert code == 0
    for name in NAMES:
        assert f"reading {name}" in err
    assert "checking values" in err
    assert err.index("reading coder_ana.xlsx") < err.index("checking values")
    # stdout holds only the JSON, the same as without a terminal
    plain_code, plain_out, _plain_err = _run(args, terminal=False)
    assert plain_code == 0
    assert json.loads(out) == json.loads(plain_out)


def test_agree_names_its_phases_and_json_is_unchanged():
    args = ["agree", "-c", str(CB), str(SHEETS), "--replicates", "40", "--json"]
    code, out, err = _run(args, terminal=True)
    assert code == 0
    for phase in ("reading coder_ben.xlsx", "summarising units", "resampling units"):
        assert phase in err
    plain_code, plain_out, plain_err = _run(args, terminal=False)
    assert plain_code == 0
    assert out == plain_out  # byte for byte: the bar never reaches stdout
    assert "resampling units" not in plain_err


def test_nothing_is_drawn_when_stderr_is_not_a_terminal():
    code, _out, err = _run(["validate", "-c", str(CB), str(SHEETS)], terminal=False)
    assert code == 0
    assert "reading coder_ana.xlsx" not in err
    assert "checking values" not in err
    assert "\x1b" not in err  # no control sequences in a log file


def test_quiet_silences_bars_and_notes(tmp_path):
    table = tmp_path / "agreement.csv"
    code, _out, err = _run(
        ["--quiet", "agree", "-c", str(CB), str(SHEETS), "--replicates", "20", "--out", str(table)],
        terminal=True,
    )
    assert code == 0
    assert table.is_file()
    assert "reading coder_ana.xlsx" not in err
    assert "resampling units" not in err
    assert "table written to" not in err
    # without --quiet the same run says where the table went
    code, _out, err = _run(
        ["agree", "-c", str(CB), str(SHEETS), "--replicates", "20", "--out", str(table)],
        terminal=True,
    )
    assert code == 0
    assert "table written to" in err


def test_quiet_never_hides_problems():
    messy = ROOT / "demo" / "messy"
    code, _out, err = _run(
        ["--quiet", "agree", "-c", str(CB), str(messy), "--replicates", "0"], terminal=False
    )
    assert code == 1  # data problems
    assert "cell(s) with errors were left out" in err
    assert "run 'coderel validate' to see them" in err


class _FakeTerminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_phase_that_never_reports_still_gets_a_bar_after_the_delay(monkeypatch):
    from coderel.cli import common

    monkeypatch.delenv("CI", raising=False)
    monkeypatch.delenv("CODEREL_PROGRESS_AFTER", raising=False)
    monkeypatch.setenv("COLUMNS", "120")
    screen = _FakeTerminal()
    monkeypatch.setattr(sys, "stderr", screen)
    common.set_quiet(False)
    with common.delayed_progress("writing merged.xlsx", after=0.05):
        time.sleep(0.6)  # one long call: no progress(done, total) at all
    assert "writing merged.xlsx" in screen.getvalue()
    quick = _FakeTerminal()
    monkeypatch.setattr(sys, "stderr", quick)
    with common.delayed_progress("writing merged.xlsx", after=5.0):
        pass  # a phase shorter than the delay draws nothing
    assert quick.getvalue() == ""
    common.set_quiet(True)
    try:
        quiet = _FakeTerminal()
        monkeypatch.setattr(sys, "stderr", quiet)
        with common.delayed_progress("writing merged.xlsx", after=0.0) as step:
            step(1, 2, "writing the audit log")
        assert quiet.getvalue() == ""
    finally:
        common.set_quiet(False)


def test_the_library_names_phases_in_order_through_the_callback():
    calls: list[tuple[int, int, str | None]] = []

    def progress(done: int, total: int, phase: str | None = None) -> None:
        calls.append((done, total, phase))

    read_codings(load_codebook(CB), SHEETS, progress=progress)
    phases = [p for _, _, p in calls if p is not None]
    assert phases == [*(f"reading {n}" for n in NAMES), "checking values"]
    done = [d for d, _, _ in calls]
    assert done == sorted(done)
    assert all(0 <= d <= t for d, t, _ in calls)
    assert calls[-1][0] == calls[-1][1]  # it ends at the total


def _phases_of(command: str, tmp_path: Path) -> tuple[list[str], list[str]]:
    """The arguments of one command on the demo project, and the phases it must name."""
    decisions = ROOT / "sample_decisions" / "wildlife_encounters.xlsx"
    if command == "adjudicate":
        return (
            ["adjudicate", "-c", str(CB), str(SHEETS), "-o", str(tmp_path / "to_decide.xlsx")],
            ["reading coder_cai.xlsx", "finding disagreements", "writing to_decide.xlsx"],
        )
    if command == "merge":
        return (
            [
                "merge",
                "-c",
                str(CB),
                str(SHEETS),
                "--decisions",
                str(decisions),
                "-o",
                str(tmp_path / "merged.xlsx"),
            ],
            ["reading wildlife_encounters.xlsx", "settling cells", "writing merged.xlsx"],
        )
    if command == "report":
        return (
            [
                "report",
                "-c",
                str(CB),
                str(SHEETS),
                "--replicates",
                "20",
                "-o",
                str(tmp_path / "report.html"),
            ],
            ["resampling units", "assembling the report", "drawing charts", "writing report.html"],
        )
    return (
        ["template", "-c", str(CB), "--coders", "ana,ben", "-o", str(tmp_path / "blank")],
        ["making ana.xlsx", "making ben.xlsx"],
    )


@pytest.mark.parametrize("command", ["adjudicate", "merge", "report", "template"])
def test_each_long_command_names_its_phases_on_a_terminal(command, tmp_path):
    args, phases = _phases_of(command, tmp_path)
    code, _out, err = _run(args, terminal=True)
    assert code == 0, err
    for phase in phases:
        assert phase in err
    quiet_code, _out, quiet_err = _run(["--quiet", *args], terminal=True)
    assert quiet_code == 0
    for phase in phases:
        assert phase not in quiet_err
    assert "written" not in quiet_err


def test_help_does_not_load_the_progress_bar():
    """rich.progress is imported only when a bar is drawn (``coderel --help`` stays light)."""
    probe = (
        "import sys\n"
        "from coderel.cli import app\n"
        "try:\n"
        "    app(['--help'], standalone_mode=False)\n"
        "except SystemExit:\n"
        "    pass\n"
        "print('rich.progress' in sys.modules, 'rich.live' in sys.modules)"
    )
    done = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=120
    )
    assert done.stdout.strip().splitlines()[-1] == "False False"
