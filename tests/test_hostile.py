"""The hostile-input corpus: every case answered within a memory cap and a time limit.

Each case of tests/data/hostile/make_hostile.py is written into a temporary folder and run as a
``coderel`` command in a subprocess whose address space is capped with ``resource.setrlimit``
(RLIMIT_AS) and which is killed after the case's seconds, so that a regression fails here
instead of hanging or exhausting CI. The command must end with the expected exit code, print no
traceback, and (with ``--json``) name the expected problem codes. The limits and their defaults
are listed in docs/limits.md. The inputs reproduce the reported failures of issue 12; what each
must produce (refused, or read with a located problem) follows from coderel's own rules in
docs/limits.md and docs/problems.md, not from any program's output.
"""

from __future__ import annotations

import importlib.util
import json
import os
import resource
import subprocess
import sys
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
SCRIPT = HERE / "data" / "hostile" / "make_hostile.py"
#: Address-space cap of every run: the interpreter with numpy, pandas and pyarrow loaded
#: reserves about 1 GB of address space before reading anything; the rest is the budget.
MEMORY_CAP = 3 * 1024**3


def _load_script():
    spec = importlib.util.spec_from_file_location("make_hostile", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("make_hostile", module)
    spec.loader.exec_module(module)
    return module


hostile = _load_script()


def _cap_memory() -> None:  # pragma: no cover - runs in the child
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_CAP, MEMORY_CAP))


def run_capped(args: list[str], *, seconds: float, env: dict[str, str] | None = None):
    """Run ``coderel ARGS`` under the memory cap; return (exit code, stdout, stderr, peak MB)."""
    full_env = {**os.environ, "NO_COLOR": "1", **(env or {})}
    full_env.pop("CODEREL_DEBUG", None)
    proc = subprocess.run(
        [sys.executable, "-c", _CHILD, *args],
        capture_output=True,
        timeout=seconds,
        preexec_fn=_cap_memory,
        env=full_env,
        check=False,
    )
    err, _, peak = proc.stderr.rpartition(b"\npeak-kb=")
    try:
        peak_mb = int(peak) / 1024
    except ValueError:  # killed before it could say
        err, peak_mb = proc.stderr, None
    return proc.returncode, proc.stdout, err, peak_mb


#: The child: coderel's command line, then its peak resident memory on stderr's last line
#: (VmHWM of /proc/self/status: ru_maxrss would include the parent's peak, kept across exec).
_CHILD = """
import atexit, sys
def _peak():
    try:
        with open("/proc/self/status") as fh:
            kb = next(int(l.split()[1]) for l in fh if l.startswith("VmHWM:"))
    except (OSError, StopIteration):
        kb = 0
    sys.stderr.write("\\npeak-kb=%d" % kb)
atexit.register(_peak)
from coderel.cli import main
main()
"""


def _problem_codes(stdout: bytes) -> set[str]:
    data = json.loads(stdout)
    return {p["code"] for p in data.get("problems", [])}


def _located(stdout: bytes) -> set[tuple[str, int]]:
    return {(p["code"], p.get("line")) for p in json.loads(stdout).get("problems", [])}


def _check(name: str, case, tmp_path: Path) -> None:
    args = case.make(tmp_path)
    code, out, err, peak = run_capped(args, seconds=case.seconds, env=dict(case.env))
    text = err.decode("utf-8", "replace")
    assert "Traceback" not in text, text[-2000:]
    assert "internal error" not in text, text[-2000:]
    assert code == case.exit_code, (code, text[-2000:])
    if case.codes:
        assert case.codes <= _problem_codes(out), (_problem_codes(out), text[-2000:])
    if case.located:
        assert set(case.located) <= _located(out), _located(out)
    print(f"{name}: exit {code}, peak {peak if peak is None else round(peak)} MB")


@pytest.mark.parametrize("name", sorted(hostile.CASES))
def test_hostile_case(name: str, tmp_path: Path) -> None:
    _check(name, hostile.CASES[name], tmp_path)


@pytest.mark.skipif(
    os.environ.get("CODEREL_SLOW_TESTS") != "1",
    reason="slow hostile case (large inputs written for minutes); run with CODEREL_SLOW_TESTS=1",
)
@pytest.mark.parametrize("name", sorted(hostile.SLOW))
def test_hostile_slow_case(name: str, tmp_path: Path) -> None:
    _check(name, hostile.SLOW[name], tmp_path)
