"""One record for every problem found in the input, and the list that collects them.

Every reader and check appends :class:`Problem` records to a :class:`Problems` list instead of
raising, so that a user sees all of them at once, each with its place (file, sheet, cell, line),
the unit, coder and variable concerned, a message and a hint. Problem codes are stable slugs
(``not-in-codebook``); the catalogue lives in :data:`PROBLEM_CODES` and in ``docs/problems.md``.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from dataclasses import dataclass, fields
from typing import TYPE_CHECKING, Any, Literal

if TYPE_CHECKING:
    import pandas as pd

Severity = Literal["error", "warning"]

#: Stable problem codes with their severity and a one-line description.
PROBLEM_CODES: dict[str, tuple[Severity, str]] = {
    # codebook
    "codebook-syntax": ("error", "the codebook file is not valid YAML or JSON"),
    "codebook-field": ("error", "a codebook field is missing, unknown or of the wrong type"),
    "duplicate-variable": ("error", "two variables share one name"),
    "duplicate-code": ("error", "two categories of a variable share one code"),
    "unknown-level": (
        "error",
        "a level of measurement other than nominal, ordinal, interval, ratio",
    ),
    "missing-categories": ("error", "a nominal or ordinal variable lists no categories"),
    "unknown-condition-variable": ("error", "applies_when names a variable the codebook lacks"),
    "bad-condition-code": ("error", "applies_when lists a code its variable does not have"),
    "bad-range": ("error", "a numeric range is not [low, high] with low <= high"),
    "bad-thresholds": ("error", "thresholds are not 0 <= tentative <= reliable <= 1"),
    "categories-on-numeric": ("error", "an interval or ratio variable lists categories"),
    "multiple-not-nominal": ("error", "multiple: true on a variable that is not nominal"),
    "column-clash": (
        "error",
        "the unit column, a text column and a variable share one column name",
    ),
    "ambiguous-missing-code": ("error", "a numeric variable's missing code lies inside its range"),
    "condition-cycle": ("error", "applies_when conditions depend on each other in a loop"),
    # input files
    "input-refused": ("error", "the file cannot or must not be read"),
    "encoding": ("error", "a CSV file is not UTF-8"),
    "unclosed-quote": (
        "error",
        "a quote in a CSV file is never closed; the rows after it are lost",
    ),
    "too-many-columns": ("error", "a CSV row has more cells than the column limit"),
    "ragged-row": ("error", "a CSV row has more cells than its header"),
    "empty-sheet": ("error", "a sheet or file holds no data rows"),
    "duplicate-coder": ("error", "two files or sheets claim the same coder"),
    "unknown-column": (
        "error",
        "a column that is neither the unit ID, a variable nor a text column",
    ),
    "missing-column": ("error", "a variable of the codebook has no column"),
    "missing-unit-column": ("error", "the unit-ID column is missing"),
    "missing-unit-id": ("error", "a row has values but no unit ID"),
    "duplicate-unit": ("error", "a coder codes the same unit twice"),
    "duplicate-listed-unit": (
        "error",
        "a unit ID appears on more than one row of a population or unit list",
    ),
    "not-in-codebook": ("error", "a value is not a code of its variable"),
    "not-a-number": ("error", "a numeric variable holds text"),
    "duplicate-list-row": (
        "error",
        "two rows of an adjudication list are for the same unit and variable",
    ),
    "duplicate-list-column": (
        "error",
        "two columns of an adjudication list have the same header",
    ),
    "number-too-long": ("error", "a number of more than 300 characters (no codebook value)"),
    "out-of-range": ("error", "a number outside the variable's range"),
    "not-integer": ("error", "a count variable holds a fraction"),
    "multiple-not-allowed": ("error", "several codes in a single-choice variable"),
    "should-not-apply": ("error", "a value where applies_when says the variable does not apply"),
    "should-apply": ("error", "a blank where applies_when says the variable applies"),
    "date-converted": ("error", "a spreadsheet turned a code into a date"),
    "spreadsheet-error": ("error", "a cell holds a spreadsheet error value such as #N/A"),
    "formula-no-value": ("error", "a formula cell has no stored result"),
    "long-format": ("error", "a long table lacks the columns unit, coder, variable, value"),
    "missing-coder": ("error", "a row of a table with a coder column has no coder name"),
    "duplicate-column": ("error", "two columns of one sheet share a header"),
    "unknown-variable": ("error", "a long table names a variable the codebook lacks"),
    "too-many-occasions": ("error", "a coder has more than two coding occasions"),
    # coding protocol: answer key, rounds, codebook revisions
    "key-not-one-coder": ("error", "the answer key holds more or fewer than one coder"),
    "key-unit-not-coded": ("error", "a unit of the answer key was coded by no trainee"),
    "round-name-twice": ("error", "two rounds share one name"),
    "round-blank": ("error", "a row of a long table with a round column has no round"),
    "recode-unknown-code": (
        "error",
        "a codebook's recode block maps onto, or from, a code the variable does not have",
    ),
    "rename-cycle": ("error", "renamed_from entries of a codebook form a loop"),
    "version-no-recode": (
        "warning",
        "a sheet was made from another codebook version and no recode block leads from it",
    ),
    # adjudication
    "bad-decision": ("error", "an adjudication decision is not a valid code for its variable"),
    # warnings
    "partial-unit": ("warning", "a unit is coded by only some of the coders"),
    "uncoded-unit": (
        "warning",
        "a coder's row for a unit holds no value for any variable: not coded by that coder",
    ),
    "similar-coder-names": ("warning", "two coder names differ only in case or spaces"),
    "own-output": (
        "warning",
        "a file written by coderel (merged dataset, list, report) was not read",
    ),
    "date-unit-id": ("warning", "a unit ID cell holds a date or time (perhaps a converted ID)"),
    "blank-variable": ("warning", "a coder left a variable blank on every unit where it applies"),
    "normalised-number": ("warning", "a number stored as text was read as a number"),
    "normalised-space": ("warning", "spaces around a value were removed"),
    "normalised-label": ("warning", "a category's label was typed instead of its code"),
    "hidden-row": ("warning", "a hidden row was read"),
    "hidden-column": ("warning", "a hidden column was read"),
    "merged-cells": ("warning", "merged cells: only the top-left cell holds a value"),
    "missing-code": ("warning", "a value was coded as missing (cannot be coded from the text)"),
    "kept-column": (
        "warning",
        "a column added to the adjudication list by hand is kept as it is",
    ),
    "stale-decision": (
        "warning",
        "a decision for a cell the coders no longer disagree on, or a unit not in the data",
    ),
    "merged-skip-logic": (
        "warning",
        "in the merged data a conditional variable's final value contradicts the final value of "
        "its condition variable",
    ),
}


@dataclass(frozen=True, slots=True)
class Problem:
    """One problem in the input, with its place and a hint on how to fix it."""

    code: str
    severity: Severity
    message: str
    hint: str | None = None
    file: str | None = None
    sheet: str | None = None
    cell: str | None = None
    line: int | None = None
    unit: str | None = None
    coder: str | None = None
    variable: str | None = None

    def to_dict(self) -> dict[str, Any]:
        # the fields are flat (text, numbers, None): no deep copy as dataclasses.asdict makes
        return {name: getattr(self, name) for name in _PROBLEM_FIELDS}

    def where(self) -> str:
        """A short human-readable place: ``coder_a.xlsx!Sheet1!C14``, ``codebook.yaml:12`` or,
        for a CSV cell, ``coder_a.csv!C14 (line 15)`` (not ``C14:15``, which reads as a range)."""
        parts = [p for p in (self.file, self.sheet, self.cell) if p]
        place = "!".join(parts)
        if self.line is not None:
            if self.cell:
                place = f"{place} (line {self.line})"
            else:
                place = f"{place}:{self.line}" if place else f"line {self.line}"
        return place


def make_problem(code: str, message: str, **place: Any) -> Problem:
    """Build a problem whose severity comes from the catalogue :data:`PROBLEM_CODES`."""
    severity = PROBLEM_CODES[code][0]
    place = {k: (None if v is None else (v if k == "line" else str(v))) for k, v in place.items()}
    return Problem(code=code, severity=severity, message=message, **place)


PROBLEM_COLUMNS = [f.name for f in fields(Problem)]
_PROBLEM_FIELDS = tuple(PROBLEM_COLUMNS)


class Problems:
    """An ordered, append-only collection of :class:`Problem` records."""

    def __init__(self, items: Iterable[Problem] = ()) -> None:
        self._items: list[Problem] = list(items)

    def add(self, code: str, message: str, **place: Any) -> Problem:
        problem = make_problem(code, message, **place)
        self._items.append(problem)
        return problem

    def append(self, problem: Problem) -> None:
        self._items.append(problem)

    def extend(self, problems: Iterable[Problem]) -> None:
        self._items.extend(problems)

    def __iter__(self) -> Iterator[Problem]:
        return iter(self._items)

    def __len__(self) -> int:
        return len(self._items)

    def __bool__(self) -> bool:
        return bool(self._items)

    def __getitem__(self, i: int) -> Problem:
        return self._items[i]

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self._items if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self._items if p.severity == "warning"]

    @property
    def refused(self) -> list[Problem]:
        """Problems that mean a file was refused outright (exit code 3)."""
        return [p for p in self._items if p.code == "input-refused"]

    def codes(self) -> list[str]:
        return [p.code for p in self._items]

    def to_dict(self) -> dict[str, Any]:
        return {"problems": [p.to_dict() for p in self._items]}

    def to_frame(self) -> pd.DataFrame:
        import pandas as pd

        return pd.DataFrame([p.to_dict() for p in self._items], columns=PROBLEM_COLUMNS)

    def __repr__(self) -> str:
        return f"Problems({len(self.errors)} errors, {len(self.warnings)} warnings)"
