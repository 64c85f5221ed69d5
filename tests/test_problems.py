"""The problem record and its catalogue."""

from coderel.problems import PROBLEM_CODES, Problems


def test_severity_comes_from_catalogue():
    problems = Problems()
    problems.add("not-in-codebook", "value 7 is not a code", file="a.xlsx", sheet="S", cell="C14")
    problems.add("normalised-space", "spaces removed", file="a.xlsx", cell="D2")
    assert [p.severity for p in problems] == ["error", "warning"]
    assert problems[0].where() == "a.xlsx!S!C14"
    assert len(problems.errors) == 1
    assert list(problems.to_frame()["code"]) == ["not-in-codebook", "normalised-space"]


def test_catalogue_codes_are_slugs():
    for code, (severity, text) in PROBLEM_CODES.items():
        assert code == code.lower()
        assert " " not in code
        assert severity in {"error", "warning"}
        assert text
