"""Regression tests from using coderel as a careful, slightly adversarial user.

Each test names the command (or call) that showed the defect. Fixtures are built in ``tmp_path``;
no input file may change, and bad input gives a message with a place and a way out, never a
traceback.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from typer.testing import CliRunner

from coderel.cli import app

runner = CliRunner()

SMALL_CODEBOOK = """\
title: Small test (invented)
version: "0.1"
unit: id
text_columns: [text]
variables:
  - name: mood
    level: nominal
    categories:
      - {code: pos, label: Positive}
      - {code: neg, label: Negative}
      - {code: neu, label: Neutral}
  - name: flag
    level: nominal
    categories:
      - {code: 0, label: "No"}
      - {code: 1, label: "Yes"}
"""


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _write_codebook(folder: Path) -> Path:
    cb = folder / "cb.yaml"
    cb.write_text(SMALL_CODEBOOK, encoding="utf-8")
    return cb


# ---- coderel codebook schema -o cb.yaml overwrote the codebook with the JSON Schema ------------
def test_schema_refuses_a_non_json_output_and_leaves_the_file(tmp_path):
    cb = _write_codebook(tmp_path)
    before = _sha(cb)
    result = runner.invoke(app, ["codebook", "schema", "-o", str(cb)])
    assert result.exit_code == 2
    assert "cb.yaml" in result.output
    assert ".json" in result.output
    assert _sha(cb) == before
    ok = runner.invoke(app, ["codebook", "schema", "-o", str(tmp_path / "s.json")])
    assert ok.exit_code == 0
    assert (tmp_path / "s.json").read_text("utf-8").lstrip().startswith("{")
