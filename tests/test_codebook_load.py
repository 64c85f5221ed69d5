"""Loading codebooks: every problem at once, each with its code and the line it sits on.

The expected codes and lines are read off the fixture files under tests/data/codebook/ (the line
numbers shown by ``cat -n``); they are the oracle, not coderel's own output.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from coderel.codebook import Category, Codebook, Condition, MissingCode, Thresholds
from coderel.codebook.load import codebook_problems, load_codebook, parse_codebook_yaml
from coderel.errors import CodebookError, UsageError
from coderel.problems import PROBLEM_CODES

DATA = Path(__file__).parent / "data" / "codebook"
SAMPLE = Path(__file__).parents[1] / "sample_codebooks" / "wildlife_encounters.yaml"


def found(name: str) -> list[tuple[str, int | None]]:
    return [(p.code, p.line) for p in codebook_problems(DATA / name)]


def test_valid_codebook_builds_the_model() -> None:
    cb = load_codebook(DATA / "valid.yaml")
    assert isinstance(cb, Codebook)
    assert cb.title == "Visitor-wildlife encounters (test)"
    assert cb.unit == "report_id"
    assert cb.text_columns == ("narrative",)
    assert cb.thresholds == Thresholds(0.8, 0.667)
    assert cb.names == ("behaviour", "group_size", "actions", "spray_worked", "distance_m")
    behaviour = cb.variable("behaviour")
    assert behaviour.level == "ordinal"
    assert behaviour.codes == (1, 2, 3)
    assert behaviour.categories[1] == Category(2, "Alert", None, ("the elk raised its head",))
    assert behaviour.missing == (MissingCode(99, "cannot be coded"),)
    group = cb.variable("group_size")
    assert group.range == (1.0, 60.0)
    assert group.integer
    assert group.missing == (MissingCode(999, "not stated"),)
    assert cb.variable("actions").multiple
    spray = cb.variable("spray_worked")
    assert spray.applies_when == Condition("actions", (3,))
    assert spray.thresholds == Thresholds(0.9, 0.7)
    assert cb.thresholds_for("spray_worked").reliable == 0.9
    assert cb.source == str(DATA / "valid.yaml")


def test_yaml_types_of_codes_are_kept() -> None:
    cb = load_codebook(DATA / "valid.yaml")
    codes = cb.variable("spray_worked").codes
    assert codes == ("y", "n", "01")  # "01" stays text, it is not the number 1
    assert all(isinstance(c, str) for c in codes)
    assert all(type(c) is int for c in cb.variable("behaviour").codes)


def test_unquoted_yes_no_labels_are_text() -> None:
    text = (
        "title: t\nvariables:\n  - name: v\n    level: nominal\n"
        "    categories:\n      - {code: 1, label: Yes}\n      - {code: 0, label: No}\n"
    )
    cb, problems = parse_codebook_yaml(text)
    assert not problems
    assert cb is not None
    assert [c.label for c in cb.variable("v").categories] == ["Yes", "No"]


def test_five_problems_reported_at_once_with_lines() -> None:
    with pytest.raises(CodebookError) as info:
        load_codebook(DATA / "five_problems.yaml")
    problems = info.value.problems
    assert [(p.code, p.line) for p in problems] == [
        ("unknown-level", 6),
        ("duplicate-code", 9),
        ("duplicate-variable", 10),
        ("bad-range", 16),
        ("missing-categories", 17),
    ]
    assert all(p.file == "five_problems.yaml" for p in problems)
    assert problems[0].hint == "did you mean 'ordinal'?"
    assert problems[0].variable == "behaviour"
    assert "line 5" in (problems[2].hint or "")
    assert "[1, 60]" in (problems[3].hint or "")


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        (
            "bad_condition.yaml",
            [("unknown-condition-variable", 11), ("bad-condition-code", 18)],
        ),
        ("syntax_error.yaml", [("codebook-syntax", 6)]),
        (
            "unknown_keys.yaml",
            [
                ("codebook-field", 2),
                ("codebook-field", 5),
                ("codebook-field", 8),
                ("duplicate-code", 9),
            ],
        ),
        (
            "clashes.yaml",
            [("column-clash", 2), ("column-clash", 3), ("duplicate-variable", 9)],
        ),
        (
            "numeric_misuse.yaml",
            [
                ("bad-thresholds", 2),
                ("ambiguous-missing-code", 7),
                ("categories-on-numeric", 9),
                ("multiple-not-nominal", 12),
                ("codebook-field", 18),
                ("codebook-field", 19),
                ("codebook-field", 20),
            ],
        ),
        ("cycle.yaml", [("condition-cycle", 5)]),
        # a misspelled level is one error, not a second one about the applies_when that names
        # the variable (issue 9, item 19)
        ("misspelled_level_condition.yaml", [("unknown-level", 5)]),
        ("not_a_mapping.yaml", [("codebook-field", 1)]),
    ],
)
def test_broken_codebooks(name: str, expected: list[tuple[str, int]]) -> None:
    assert found(name) == expected


def test_hints_suggest_the_close_word() -> None:
    problems = codebook_problems(DATA / "unknown_keys.yaml")
    assert [p.hint for p in problems][:3] == [
        "did you mean 'text_columns'?",
        "did you mean 'level'?",
        "did you mean 'label'?",
    ]
    cond = codebook_problems(DATA / "bad_condition.yaml")
    assert cond[0].hint == "did you mean 'actions'?"


def test_every_problem_code_is_catalogued() -> None:
    for name in DATA.glob("*.yaml"):
        for p in codebook_problems(name):
            assert p.code in PROBLEM_CODES
            assert p.severity == PROBLEM_CODES[p.code][0]


def test_quote_hint_for_yes_as_code() -> None:
    problems = codebook_problems(DATA / "numeric_misuse.yaml")
    by_line = {p.line: p for p in problems}
    assert by_line[18].hint == "put quotes around it: 'yes'"


def test_duplicate_yaml_key_is_a_problem() -> None:
    text = "title: a\ntitle: b\nvariables:\n  - {name: v, level: ratio}\n"
    _, problems = parse_codebook_yaml(text, file="x.yaml")
    assert [(p.code, p.line) for p in problems] == [("codebook-field", 2)]


def test_empty_and_missing_parts() -> None:
    _, problems = parse_codebook_yaml("")
    assert problems.codes() == ["codebook-syntax"]
    _, problems = parse_codebook_yaml("title: t\n")
    assert [(p.code, p.line) for p in problems] == [("codebook-field", 1)]
    _, problems = parse_codebook_yaml("variables:\n  - name: v\n")
    assert sorted(problems.codes()) == ["codebook-field", "codebook-field"]  # no title, no level


def test_mixed_int_and_text_code_that_look_alike_clash() -> None:
    text = (
        "title: t\nvariables:\n  - name: v\n    level: nominal\n"
        "    categories:\n      - {code: 1, label: A}\n      - {code: '1', label: B}\n"
    )
    _, problems = parse_codebook_yaml(text)
    assert [(p.code, p.line) for p in problems] == [("duplicate-code", 7)]


def test_missing_code_clashing_with_a_category() -> None:
    text = (
        "title: t\nvariables:\n  - name: v\n    level: nominal\n"
        "    categories: [{code: 9, label: A}]\n    missing: [{code: 9, label: x}]\n"
    )
    _, problems = parse_codebook_yaml(text)
    assert [(p.code, p.line) for p in problems] == [("duplicate-code", 6)]


def test_condition_on_numeric_variable() -> None:
    text = (
        "title: t\nvariables:\n  - {name: n, level: ratio}\n"
        "  - name: v\n    level: nominal\n    applies_when: {variable: n, includes: [1]}\n"
        "    categories: [{code: 1, label: A}]\n"
    )
    _, problems = parse_codebook_yaml(text)
    assert [(p.code, p.line) for p in problems] == [("bad-condition-code", 6)]


def test_alias_bomb_is_refused() -> None:
    lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x, x]"]
    for i in range(1, 9):
        prev = f"*a{i - 1}"
        lines.append(f"a{i}: &a{i} [{', '.join([prev] * 10)}]")
    lines.append("title: *a8")
    from coderel.errors import InputRefused

    with pytest.raises(InputRefused):
        parse_codebook_yaml("\n".join(lines))


def test_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "cb.yaml"
    path.write_bytes(b"title: caf\xe9\nvariables: []\n")
    assert [(p.code, p.line) for p in codebook_problems(path)] == [("codebook-syntax", 1)]


def test_missing_file_and_wrong_suffix(tmp_path: Path) -> None:
    with pytest.raises(UsageError):
        load_codebook(tmp_path / "none.yaml")
    other = tmp_path / "cb.txt"
    other.write_text("title: t\n")
    with pytest.raises(UsageError):
        load_codebook(other)


def test_input_file_is_not_changed() -> None:
    path = DATA / "five_problems.yaml"
    before = path.read_bytes()
    codebook_problems(path)
    assert path.read_bytes() == before


@pytest.mark.skipif(not SAMPLE.exists(), reason="demo codebook not written yet")
def test_demo_codebook_loads() -> None:
    cb = load_codebook(SAMPLE)
    assert cb.variables
    assert not codebook_problems(SAMPLE)
