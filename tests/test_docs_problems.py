"""docs/problems.md lists every problem code of the catalogue with its severity."""

from pathlib import Path

from coderel.problems import PROBLEM_CODES

DOC = Path(__file__).resolve().parents[1] / "docs" / "problems.md"


def test_every_code_is_documented():
    text = DOC.read_text(encoding="utf-8")
    for code, (severity, _) in PROBLEM_CODES.items():
        assert f"| `{code}` | {severity} |" in text, code
