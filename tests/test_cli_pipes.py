"""Command-line behaviour with pipes: a closed stdout ends a command quietly (exit 0, no
traceback, no 'internal error'), as ``coderel ... --json | head`` does."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_json_into_a_closed_pipe_ends_quietly():
    exe = Path(sys.executable).with_name("coderel")
    proc = subprocess.Popen(
        [
            str(exe),
            "agree",
            "-c",
            str(ROOT / "sample_codebooks/wildlife_encounters.yaml"),
            str(ROOT / "demo/sheets"),
            "--json",
            "--replicates",
            "20",
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    proc.stdout.read(10)  # like `head -c 10`: read a little, then close
    proc.stdout.close()
    err = proc.stderr.read().decode()
    proc.stderr.close()
    assert proc.wait(timeout=60) == 0
    assert "internal error" not in err.lower()
    assert "Traceback" not in err
