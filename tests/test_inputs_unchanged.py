"""Input files are never changed: every byte (SHA-256) and the file list stay the same.

Runs every command (validate, agree, template, adjudicate, merge, report, codebook) on the demo
project and validate on the
bad-input corpus, with outputs in a temporary folder, and compares the digest of every input file
(and the list of files in the input folders, so no temporary file is left beside an input) before
and after.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from typer.testing import CliRunner

from coderel.cli import app

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
INPUT_FOLDERS = [
    ROOT / "demo" / "sheets",
    ROOT / "demo" / "messy",
    ROOT / "sample_codebooks",
    ROOT / "sample_decisions",
    ROOT / "tests" / "data" / "bad_inputs",
]
UNITS = ROOT / "demo" / "units.txt"
runner = CliRunner()


def _digests() -> dict[str, str]:
    files = [UNITS, *(p for folder in INPUT_FOLDERS for p in sorted(folder.rglob("*")))]
    return {
        str(p.relative_to(ROOT)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in files
        if p.is_file() and "__pycache__" not in p.parts
    }


CBS = str(CB)
SHEETS = str(ROOT / "demo" / "sheets")
MESSY = str(ROOT / "demo" / "messy")
BAD = ROOT / "tests" / "data" / "bad_inputs"
DECISIONS = str(ROOT / "sample_decisions" / "wildlife_encounters.xlsx")
#: (command with ``{out}`` for the temporary output folder, accepted exit codes)
COMMANDS: list[tuple[list[str], set[int]]] = [
    (["validate", "--codebook", CBS, SHEETS, "--json"], {0}),
    (["validate", "--codebook", CBS, MESSY, "--out", "{out}/problems.xlsx"], {1}),
    (["validate", "--codebook", CBS, SHEETS, MESSY, "--out", "{out}/problems.csv"], {1}),
    (["validate", "--codebook", str(BAD / "codebook.yaml"), str(BAD), "--json"], {3}),
    (["validate", "--codebook", CBS, SHEETS, "--out", f"{SHEETS}/coder_ana.xlsx"], {2}),
    (["agree", "--codebook", CBS, SHEETS, "--replicates", "20", "--json"], {0}),
    (["agree", "--codebook", CBS, SHEETS, "--replicates", "0", "--out", "{out}/a.csv"], {0}),
    (
        [
            "template",
            "--codebook",
            CBS,
            "--coders",
            "ana,ben",
            "-o",
            "{out}",
            "--units",
            str(UNITS),
        ],
        {0},
    ),
    (["adjudicate", "--codebook", CBS, SHEETS, "-o", "{out}/adj.xlsx"], {0}),
    (["adjudicate", "--codebook", CBS, SHEETS, "-o", f"{SHEETS}/coder_ben.xlsx"], {2}),
    (["merge", "--codebook", CBS, SHEETS, "--decisions", DECISIONS, "-o", "{out}/m.xlsx"], {0}),
    (["merge", "--codebook", CBS, SHEETS, "--strict", "-o", "{out}/m.parquet"], {1}),
    (
        [
            "report",
            "--codebook",
            CBS,
            SHEETS,
            "--decisions",
            DECISIONS,
            "--replicates",
            "20",
            "--format",
            "html,md,xlsx",
            "-o",
            "{out}/r.html",
        ],
        {0},
    ),
    (["codebook", "check", CBS, "--json"], {0}),
    (["codebook", "convert", CBS, "-o", "{out}/cb.json"], {0}),
    (["codebook", "convert", CBS, "-o", CBS], {2}),
]


@pytest.mark.parametrize(
    ("command", "codes"),
    COMMANDS,
    ids=[" ".join(c[:2]) + f" #{i}" for i, (c, _) in enumerate(COMMANDS)],
)
def test_command_leaves_every_input_byte_unchanged(tmp_path, command, codes):
    args = [a.replace("{out}", str(tmp_path)) for a in command]
    before = _digests()
    result = runner.invoke(app, args)
    assert result.exit_code in codes, (args, result.exit_code, result.output[-400:])
    assert _digests() == before


def test_the_same_template_twice_rewrites_identical_bytes_only(tmp_path):
    args = ["template", "--codebook", CBS, "--coders", "ana", "-o", str(tmp_path)]
    assert runner.invoke(app, args).exit_code == 0
    first = (tmp_path / "ana.xlsx").read_bytes()
    assert runner.invoke(app, args).exit_code == 0
    assert (tmp_path / "ana.xlsx").read_bytes() == first
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ana.xlsx"]  # no temporary file left
