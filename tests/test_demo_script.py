"""scripts/demo.sh prints the path of report.html once, as its last line (issue 9, item 19).

Before, the report command printed the paths of report.html, .md and .xlsx on stdout and the
script printed report.html again. The script is run with a stand-in for the coderel executable
that prints what the real commands print on stdout (the report's paths), so only the script's own
plumbing is under test; the commands themselves are tested elsewhere.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

STAND_IN = """#!/usr/bin/env bash
# prints on stdout what coderel prints there: the report's paths; the messy sheet exits 1
cmd=$1; shift
out=""
while [ $# -gt 0 ]; do
  if [ "$1" = "-o" ]; then out=$2; fi
  if [ "$1" = "demo/messy" ]; then exit 1; fi
  shift
done
if [ "$cmd" = "report" ]; then
  printf '%s\\n' "$out" "${out%.html}.md" "${out%.html}.xlsx"
fi
exit 0
"""


@pytest.mark.skipif(shutil.which("bash") is None, reason="needs bash")
def test_demo_prints_report_html_once_and_last(tmp_path):
    exe = tmp_path / "coderel"
    exe.write_text(STAND_IN, encoding="utf-8")
    exe.chmod(0o755)
    out = tmp_path / "out"
    result = subprocess.run(
        ["bash", str(ROOT / "scripts" / "demo.sh"), str(exe), str(out)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env={**os.environ, "NO_COLOR": "1"},
        check=False,
    )
    assert result.returncode == 0, result.stderr
    lines = result.stdout.splitlines()
    assert lines == [f"{out}/report.html"]
    assert f"{out}/report.md" in result.stderr  # the other paths are still shown, on stderr
