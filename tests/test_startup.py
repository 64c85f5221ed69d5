"""Start-up: ``coderel --help`` and ``import coderel.cli`` do not load the heavy libraries.

pandas, pyarrow, openpyxl, matplotlib, scipy, dask and the YAML and JSON Schema libraries load only when a command needs them, so the
CLI answers ``--help`` at once. Checked in a fresh interpreter (a subprocess), since this test
process has long imported them. A new command module must import its working modules inside the
command function (see coderel/cli/cmd_agree.py).
"""

from __future__ import annotations

import json
import subprocess
import sys

HEAVY = (
    "pandas",
    "pyarrow",
    "openpyxl",
    "matplotlib",
    "scipy",
    "dask",
    "distributed",
    "numpy",
    "yaml",
    "jsonschema",
)


def _loaded(code: str) -> list[str]:
    probe = f"import sys, json\n{code}\nprint(json.dumps(sorted(m for m in {HEAVY!r} if m in sys.modules)))"
    out = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=120
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_importing_the_cli_loads_no_heavy_library():
    assert _loaded("import coderel.cli") == []
    assert _loaded("import coderel") == []


def test_help_loads_no_heavy_library():
    code = (
        "from coderel.cli import app\n"
        "try:\n"
        "    app(['--help'], standalone_mode=False)\n"
        "except SystemExit:\n"
        "    pass"
    )
    assert _loaded(code) == []


def test_the_public_api_still_loads_on_first_use():
    code = "import coderel\nassert coderel.Codings.__name__ == 'Codings'\nassert callable(coderel.agreement)"
    assert "pandas" in _loaded(code)
