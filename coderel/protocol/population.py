"""Reading a list of units: a population (corpus) table or a plain unit list.

A population is a table (``.csv``, ``.xlsx``, ``.parquet``) with one row per unit: the unit-ID
column (the codebook's, or one named by the user) and, optionally, columns to stratify by. A unit
list is a UTF-8 text file with one ID a line (what ``draw`` and ``assign`` write and
``template --units`` reads). IDs are read as text exactly as the coders' sheets read them
(``007`` stays ``007``; a whole number stored as a number reads as ``7``).

Blank and duplicate IDs are collected as problems, each with its row (or line), and stop the
command: a population with two rows for one unit would give that unit two chances to be drawn.
"""

from __future__ import annotations

import difflib
import os
from dataclasses import dataclass
from pathlib import Path

from coderel.errors import DataProblems, InputRefused, UsageError
from coderel.io.archive import DEFAULT_LIMITS, check_parquet, check_text
from coderel.io.atomic import sha256_file
from coderel.io.names import text_of as id_text
from coderel.io.text_tables import RawTable, read_csv, read_parquet
from coderel.problems import Problems

TABLE_SUFFIXES = (".csv", ".xlsx", ".parquet")
LIST_SUFFIXES = (".txt",)
#: How blank stratum values are shown (they form a stratum of their own).
BLANK_STRATUM = "(blank)"


@dataclass(frozen=True)
class UnitTable:
    """The units of a file in file order, with their strata values and places."""

    file: str
    sha256: str
    rows: int
    id_column: str | None
    ids: tuple[str, ...]
    strata_columns: tuple[str, ...] = ()
    strata: tuple[tuple[str, ...], ...] = ()

    def stratum_of(self) -> dict[str, tuple[str, ...]]:
        return dict(zip(self.ids, self.strata, strict=True)) if self.strata else {}


def _closest(name: str, options: list[str]) -> str:
    found = difflib.get_close_matches(name, options, n=1, cutoff=0.6)
    return f"; did you mean {found[0]!r}?" if found else ""


def _read_table(path: Path) -> RawTable:
    from coderel.io.xlsx import read_workbook

    suffix = path.suffix.lower()
    if suffix == ".csv":
        check_text(path, DEFAULT_LIMITS)
        return read_csv(path)
    if suffix == ".parquet":
        check_parquet(path, DEFAULT_LIMITS)
        try:
            return read_parquet(path)
        except Exception as exc:  # pyarrow raises many types on damaged files
            raise InputRefused(
                f"{path.name} cannot be read as Parquet ({type(exc).__name__})"
            ) from None
    workbook = read_workbook(path, DEFAULT_LIMITS)
    if not workbook.tables:
        raise UsageError(f"{path.name} holds no data in any visible sheet")
    return workbook.tables[0]


def _check_exists(path: Path, what: str) -> None:
    if not path.is_file():
        raise UsageError(
            f"no {what} file {path.name!r}"
            if not path.is_dir()
            else f"the {what} {path.name!r} is a folder; give a file"
        )
    suffix = path.suffix.lower()
    if suffix not in TABLE_SUFFIXES + LIST_SUFFIXES:
        raise UsageError(
            f"the {what} {path.name!r} must be a table (.csv, .xlsx, .parquet) or a unit list "
            f"(.txt, one ID a line), not {suffix or 'a file without extension'}"
        )


def read_units(
    path: str | os.PathLike[str],
    id_column: str | None = None,
    strata_columns: tuple[str, ...] = (),
    *,
    what: str = "population",
) -> UnitTable:
    """Read the units of a population table or a unit list.

    Parameters
    ----------
    path
        A ``.csv``, ``.xlsx`` (first visible sheet with data) or ``.parquet`` table, or a ``.txt``
        unit list.
    id_column
        The unit-ID column of a table (required for tables).
    strata_columns
        Columns of a table whose values define the strata (blank values form a stratum
        shown as ``(blank)``).
    what
        The file's role, for messages ("population", "corpus", "exclusion list").

    Raises
    ------
    UsageError
        A missing file, an unknown format, a missing column, or strata asked of a unit list.
    DataProblems
        Blank or duplicate unit IDs, each located (file, cell or line).
    InputRefused
        A file that fails the safety checks or cannot be parsed.
    """
    path = Path(path)
    _check_exists(path, what)
    problems = Problems()
    if path.suffix.lower() in LIST_SUFFIXES:
        if strata_columns:
            raise UsageError(
                f"the {what} {path.name} is a unit list (one ID a line): it has no columns to "
                "stratify by; give a table (.csv, .xlsx, .parquet) with the strata columns"
            )
        ids, places = _read_list(path, problems)
        table = UnitTable(path.name, sha256_file(path), len(ids), None, tuple(ids))
        _check_duplicates(table, places, problems)
        return table
    raw = _read_table(path)
    errors = [p for p in raw.problems if p.severity == "error"]
    if errors:
        raise DataProblems(f"the {what} {path.name} cannot be read", problems=Problems(errors))
    header = list(raw.header)
    if id_column is None:
        raise UsageError(f"name the unit-ID column of {path.name} (--id)")
    missing = [c for c in (id_column, *strata_columns) if c not in header]
    if missing:
        name = missing[0]
        role = "unit-ID" if name == id_column else "stratum"
        raise UsageError(
            f"the {what} {path.name} has no {role} column {name!r} (its columns: "
            f"{', '.join(repr(h) for h in header if h)}){_closest(name, header)}"
        )
    pos = header.index(id_column)
    spos = [header.index(c) for c in strata_columns]
    ids: list[str] = []
    strata: list[tuple[str, ...]] = []
    places: list[dict[str, object]] = []
    for row in raw.rows:
        cells = row.cells
        values = [id_text(c) for c in cells]
        if not any(v is not None for v in values):
            continue  # an empty row
        unit = values[pos] if pos < len(values) else None
        place = {
            "file": raw.file,
            "sheet": raw.sheet,
            "cell": raw.cell_ref(pos, row.number),
            "line": row.line,
        }
        if unit is None:
            problems.add(
                "missing-unit-id",
                f"row {row.number} of the {what} has no unit ID in column {id_column!r}",
                hint="give every unit an ID, or delete the row",
                **place,
            )
            continue
        ids.append(unit)
        places.append(place)
        strata.append(
            tuple((values[p] if p < len(values) else None) or BLANK_STRATUM for p in spos)
        )
    table = UnitTable(
        path.name,
        sha256_file(path),
        len(raw.rows),
        id_column,
        tuple(ids),
        tuple(strata_columns),
        tuple(strata) if strata_columns else (),
    )
    _check_duplicates(table, places, problems)
    return table


def _read_list(path: Path, problems: Problems) -> tuple[list[str], list[dict[str, object]]]:
    check_text(path, DEFAULT_LIMITS)
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise UsageError(f"the unit list {path.name} is not UTF-8 text; save it as UTF-8") from None
    ids, places = [], []
    for number, line in enumerate(text.splitlines(), start=1):
        unit = line.strip()
        if unit:
            ids.append(unit)
            places.append({"file": path.name, "line": number})
    return ids, places


def _check_duplicates(
    table: UnitTable, places: list[dict[str, object]], problems: Problems
) -> None:
    first: dict[str, int] = {}
    for i, unit in enumerate(table.ids):
        if unit in first:
            earlier = places[first[unit]]
            where = earlier.get("cell") or f"line {earlier.get('line')}"
            problems.add(
                "duplicate-listed-unit",
                f"the unit {unit!r} is listed again (first at {where})",
                hint="list each unit once: remove or renumber the repeated row",
                unit=unit,
                **places[i],
            )
        else:
            first[unit] = i
    if problems:
        raise DataProblems(
            f"{table.file}: {len(problems)} unit ID problem(s); nothing was drawn or written",
            problems=problems,
        )
