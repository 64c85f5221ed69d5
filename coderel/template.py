"""Blank coding workbooks, one per coder, made from the codebook.

Each workbook ``<coder>.xlsx`` holds three sheets:

* ``coding`` (the data sheet): a bold, frozen header row with the unit-ID column, the codebook's
  text columns and one column per variable, in codebook order; unit IDs pre-filled from an
  optional unit list; for every single-choice category variable a dropdown of ``code = label``
  entries (categories, then missing codes), for every interval or ratio variable a whole- or
  decimal-number limit from its ``range``, and an input message with the variable's label and
  instructions on every data cell;
* ``codebook`` (visible): every variable's level, instructions, categories with descriptions and
  examples, missing codes, range and skip logic, for the coder to read while coding;
* ``lists`` (hidden): the dropdown entries, one column per variable. A dropdown refers to its
  range there, because a list typed into the validation itself is limited to 255 characters.

The reader (:mod:`coderel.io.read`) takes the coder's name from the file name (the ``codebook``
sheet and hidden sheets are not data), and :mod:`coderel.normalise` reads a ``code = label``
entry as its code without a warning, so a template filled in with the dropdowns, typed codes,
``1;3`` in multi-select columns and plain numbers passes ``coderel validate`` unchanged.

Category and multi-select columns are formatted as text, so that a spreadsheet program does not
turn a typed ``1-3`` into a date; numeric columns keep the general format. Workbooks are written
atomically (:func:`coderel.io.atomic.write_bytes`) with fixed time stamps
(:func:`coderel.io.tables.workbook_bytes`): the same codebook, coders and units give the same
bytes.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.datavalidation import DataValidation

from coderel.codebook import Codebook, Variable
from coderel.errors import UsageError
from coderel.io.atomic import refuse_overwriting_inputs, write_bytes
from coderel.io.tables import cell_value, check_sheet_rows, workbook_bytes
from coderel.progress import Progress, report

__all__ = [
    "CODEBOOK_SHEET",
    "CODING_SHEET",
    "DEFAULT_ROWS",
    "LISTS_SHEET",
    "check_coder_names",
    "choices",
    "read_unit_list",
    "template_bytes",
    "write_templates",
]

CODING_SHEET = "coding"
CODEBOOK_SHEET = "codebook"
LISTS_SHEET = "lists"
#: Rows that carry dropdowns and number limits when no unit list is given (or a short one).
DEFAULT_ROWS = 500
#: Excel's limits on a data validation's input message and error message.
_PROMPT_LIMIT = 255
_ERROR_LIMIT = 225
_TITLE_LIMIT = 32
_TEXT_FORMAT = "@"
_HEADER_FILL = PatternFill("solid", start_color="DDE6F0", end_color="DDE6F0")
# Characters no file name may hold on common systems, and control characters.
_BAD_NAME = re.compile(r'[<>:"/\\|?*\x00-\x1f]')


# ---- inputs ----------------------------------------------------------------------------------
#: Names Windows reserves for devices, even with an extension (``con.xlsx`` cannot be made there).
_RESERVED_NAMES = frozenset(
    ["con", "prn", "aux", "nul"]
    + [f"com{i}" for i in range(1, 10)]
    + [f"lpt{i}" for i in range(1, 10)]
)


def check_coder_names(coders: Sequence[str]) -> list[str]:
    """Return the coder names stripped; :class:`UsageError` when one cannot name a file.

    A coder's name becomes the workbook's file name (``<coder>.xlsx``), which is where the
    reader takes the coder from; so a name must be a valid, unique file name on every common
    system (no Windows device name such as ``con``, no trailing dot).
    """
    if isinstance(coders, str):  # one name, not a sequence of one-letter names
        coders = [coders]
    names = [c.strip() for c in coders]
    if not names or not any(names):
        raise UsageError("give at least one coder name (--coders ana,ben)")
    seen: dict[str, str] = {}
    for name in names:
        if not name:
            raise UsageError("a coder name is empty (check the commas in --coders)")
        if (
            _BAD_NAME.search(name)
            or name.startswith((".", "~$"))
            or name.endswith(".")
            or name.casefold() in _RESERVED_NAMES
            or len(name) > 100
        ):
            raise UsageError(
                f"the coder name {name!r} cannot be a file name; use letters, digits, '_' or '-'"
            )
        folded = name.casefold()
        if folded in seen:
            raise UsageError(
                f"the coder name {name!r} is given twice (names are compared without case, "
                "as on many file systems)"
            )
        seen[folded] = name
    return names


def read_unit_list(path: str | os.PathLike[str]) -> list[str]:
    """Read unit IDs from a UTF-8 text file, one per line; blank lines are skipped.

    Raises
    ------
    UsageError
        When the file is missing, not UTF-8, or lists a unit twice.
    """
    path = Path(path)
    if not path.is_file():
        raise UsageError(f"no unit list {path.name!r}")
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise UsageError(
            f"the unit list {path.name} is not UTF-8 text; save it again as UTF-8"
        ) from None
    units: list[str] = []
    first: dict[str, int] = {}
    for number, line in enumerate(text.splitlines(), start=1):
        unit = line.strip()
        if not unit:
            continue
        if unit in first:
            raise UsageError(
                f"the unit list {path.name} lists {unit!r} twice (lines {first[unit]} and {number})"
            )
        first[unit] = number
        units.append(unit)
    return units


# ---- texts -----------------------------------------------------------------------------------
def choices(variable: Variable) -> list[str]:
    """Dropdown entries of a single-choice variable: ``code = label`` of categories and missing."""
    return [variable.display(c) for c in (*variable.codes, *variable.missing_codes)]


def _number(value: float) -> str:
    """A limit as a spreadsheet formula text: ``60``, ``-20``, ``0.5``, ``1234567`` (never 1e6)."""
    value = float(value)
    return str(int(value)) if value.is_integer() else repr(value)


def _missing_text(variable: Variable) -> str:
    if not variable.missing:
        return ""
    return "Missing: " + ", ".join(variable.display(m) for m in variable.missing_codes) + "."


def _how(variable: Variable) -> str:
    """What the coder may type into a cell of ``variable``."""
    if variable.is_numeric:
        kind = "a whole number" if variable.integer else "a number"
        if variable.range is not None:
            low, high = variable.range
            return f"Type {kind} from {_number(low)} to {_number(high)}."
        return f"Type {kind}."
    if variable.multiple:
        codes = ", ".join(variable.display(c) for c in variable.codes)
        none = (
            f" If none applies, type {variable.display(variable.none_code)}."
            if variable.none is not None
            else ""
        )
        return f"Type every code that applies, separated by ';' (e.g. 1;3). Codes: {codes}.{none}"
    return "Choose from the list, or type the code."


def _sentence(text: str) -> str:
    text = text.strip()
    return text if text.endswith((".", "?", "!", ":")) else text + "."


def _condition_text(codebook: Codebook, variable: Variable) -> str:
    cond = variable.applies_when
    if cond is None:
        return ""
    cond_var = codebook.variable(cond.variable)
    verb = "includes" if cond_var.multiple else "is"
    return (
        f"Applies only when {cond.variable} {verb} "
        f"{' or '.join(cond_var.display(c) for c in cond.includes)}; otherwise leave blank."
    )


def _prompt(codebook: Codebook, variable: Variable) -> str:
    parts = [_sentence(variable.title)]
    if variable.instructions:
        parts.append(_sentence(variable.instructions))
    parts.append(_how(variable))
    if variable.applies_when is not None:
        parts.append(_condition_text(codebook, variable))
    if variable.missing:
        parts.append(_missing_text(variable))
    text = " ".join(parts)
    return text if len(text) <= _PROMPT_LIMIT else text[: _PROMPT_LIMIT - 3] + "..."


def _limit(text: str, size: int) -> str:
    return text if len(text) <= size else text[: size - 3] + "..."


# ---- sheets ----------------------------------------------------------------------------------
def _columns(codebook: Codebook) -> list[tuple[str, Variable | None]]:
    """The coding sheet's columns in order: unit, text columns, variables."""
    cols: list[tuple[str, Variable | None]] = [(codebook.unit, None)]
    cols += [(t, None) for t in codebook.text_columns]
    cols += [(v.name, v) for v in codebook.variables]
    return cols


def _coding_sheet(wb: Workbook, codebook: Codebook, units: Sequence[str]) -> None:
    ws = wb.active
    ws.title = CODING_SHEET
    columns = _columns(codebook)
    last_row = 1 + max(len(units), DEFAULT_ROWS)
    for j, (name, variable) in enumerate(columns, start=1):
        cell = ws.cell(row=1, column=j, value=cell_value(name))
        cell.font = Font(bold=True)
        cell.fill = _HEADER_FILL
        letter = get_column_letter(j)
        dim = ws.column_dimensions[letter]
        if variable is None and name in codebook.text_columns:
            dim.width = 60
            dim.number_format = _TEXT_FORMAT
            dim.alignment = Alignment(wrap_text=True, vertical="top")
        elif variable is None:
            dim.width = max(14, len(name) + 2)
            dim.number_format = _TEXT_FORMAT
        elif variable.is_numeric:
            dim.width = max(12, len(name) + 2)
        else:
            longest = max([len(e) for e in choices(variable)] or [0])
            dim.width = min(max(14, len(name) + 2, longest + 2), 40)
            dim.number_format = _TEXT_FORMAT
    for i, unit in enumerate(units, start=2):
        cell = ws.cell(row=i, column=1, value=cell_value(unit))
        cell.number_format = _TEXT_FORMAT
    ws.freeze_panes = "B2"

    lists = wb.create_sheet(LISTS_SHEET)
    list_col = 0
    for j, (_, variable) in enumerate(columns, start=1):
        if variable is None:
            continue
        letter = get_column_letter(j)
        target = f"{letter}2:{letter}{last_row}"
        dv = _validation(variable, lists, list_col + 1)
        if dv.type == "list":
            list_col += 1
        dv.promptTitle = _limit(variable.name, _TITLE_LIMIT)
        dv.prompt = _prompt(codebook, variable)
        dv.showInputMessage = True
        dv.add(target)
        ws.add_data_validation(dv)
    lists.sheet_state = "hidden"


def _validation(variable: Variable, lists: Any, list_col: int) -> DataValidation:
    """The data validation of one variable's column (a list may be written to ``lists``)."""
    if variable.is_categorical and not variable.multiple:
        entries = choices(variable)
        letter = get_column_letter(list_col)
        lists.cell(row=1, column=list_col, value=cell_value(variable.name))
        for r, entry in enumerate(entries, start=2):
            lists.cell(row=r, column=list_col, value=cell_value(entry))
        # Warning style: a typed code (not in the list's wording) must stay possible.
        return DataValidation(
            type="list",
            formula1=f"'{LISTS_SHEET}'!${letter}$2:${letter}${len(entries) + 1}",
            allow_blank=True,
            showErrorMessage=True,
            errorStyle="warning",
            errorTitle=_limit(f"not a code of {variable.name}", _TITLE_LIMIT),
            error=_limit(
                f"Choose a code of {variable.name} from the list, or type one of: "
                + ", ".join(str(c) for c in (*variable.codes, *variable.missing_codes)),
                _ERROR_LIMIT,
            ),
        )
    if variable.is_numeric and variable.range is not None:
        low, high = variable.range
        # Missing codes (e.g. 999) usually lie outside the range: then the limit only warns.
        style = "warning" if variable.missing else "stop"
        extra = f" {_missing_text(variable)}" if variable.missing else ""
        return DataValidation(
            type="whole" if variable.integer else "decimal",
            operator="between",
            formula1=_number(low),
            formula2=_number(high),
            allow_blank=True,
            showErrorMessage=True,
            errorStyle=style,
            errorTitle=_limit(f"outside {variable.name}'s range", _TITLE_LIMIT),
            error=_limit(
                f"{variable.name} takes {'whole numbers' if variable.integer else 'numbers'} "
                f"from {_number(low)} to {_number(high)}.{extra}",
                _ERROR_LIMIT,
            ),
        )
    return DataValidation(type=None, allow_blank=True)


def _codebook_rows(codebook: Codebook) -> list[list[Any]]:
    """The rows of the ``codebook`` sheet: a heading block, then one table of every variable."""
    rows: list[list[Any]] = [
        ["codebook", codebook.title],
        ["version", codebook.version],
        ["unit-ID column", codebook.unit],
    ]
    if codebook.text_columns:
        rows.append(["text columns (not coded)", ", ".join(codebook.text_columns)])
    if codebook.description:
        rows.append(["description", codebook.description])
    rows.append([])
    rows.append(
        ["variable", "label", "level", "code", "meaning", "description and examples", "notes"]
    )
    for v in codebook.variables:
        notes = [_how(v)]
        if v.instructions:
            notes.insert(0, _sentence(v.instructions))
        if v.applies_when is not None:
            notes.append(_condition_text(codebook, v))
        rows.append([v.name, v.label or "", v.level, "", "", "", " ".join(notes)])
        for c in v.categories:
            detail = c.description or ""
            if c.examples:
                examples = "; ".join(f'"{e}"' for e in c.examples)
                detail = f"{detail} Examples: {examples}".strip()
            rows.append(["", "", "", c.code, c.label, detail, ""])
        if v.none is not None:
            rows.append(["", "", "", v.none.code, v.none.label, "none of the categories", ""])
        for m in v.missing:
            rows.append(["", "", "", m.code, f"missing: {m.label}", "", ""])
    return rows


def _codebook_sheet(wb: Workbook, codebook: Codebook) -> None:
    ws = wb.create_sheet(CODEBOOK_SHEET)
    rows = _codebook_rows(codebook)
    header_row = rows.index(
        ["variable", "label", "level", "code", "meaning", "description and examples", "notes"]
    )
    for i, row in enumerate(rows, start=1):
        for j, value in enumerate(row, start=1):
            if value == "":
                continue
            cell = ws.cell(row=i, column=j, value=cell_value(value))
            cell.alignment = Alignment(wrap_text=True, vertical="top")
            if i == header_row + 1 or (j == 1 and i <= header_row):
                cell.font = Font(bold=True)
            if j == 1 and i > header_row + 1:
                cell.font = Font(bold=True)
    for letter, width in zip("ABCDEFG", (22, 30, 10, 10, 30, 50, 60), strict=True):
        ws.column_dimensions[letter].width = width
    ws.freeze_panes = f"A{header_row + 2}"


def _workbook(codebook: Codebook, coder: str, units: Sequence[str]) -> Workbook:
    wb = Workbook()
    _coding_sheet(wb, codebook, units)
    _codebook_sheet(wb, codebook)
    # the lists sheet was created second; keep the two visible sheets first
    wb.move_sheet(LISTS_SHEET, offset=len(wb.sheetnames) - 1 - wb.sheetnames.index(LISTS_SHEET))
    wb.active = 0
    wb.properties.title = _limit(f"{codebook.title} - coding sheet of {coder}", 255)
    return wb


def template_bytes(codebook: Codebook, coder: str, units: Sequence[str] = ()) -> bytes:
    """The bytes of one coder's blank workbook (as :func:`write_templates` writes them)."""
    return workbook_bytes(_workbook(codebook, coder, units))


# ---- entry point -----------------------------------------------------------------------------
def _checked_units(units: Sequence[str]) -> list[str]:
    """A unit list stripped; :class:`UsageError` for a blank or repeated ID."""
    unit_list = [str(u).strip() for u in units]
    if any(not u for u in unit_list):
        raise UsageError("a unit ID in the unit list is blank")
    seen: set[str] = set()
    for unit in unit_list:
        if unit in seen:
            raise UsageError(f"the unit list holds {unit!r} more than once")
        seen.add(unit)
    return unit_list


def write_templates(
    codebook: Codebook,
    coders: Sequence[str],
    out_dir: str | os.PathLike[str],
    units: Sequence[str] | Mapping[str, Sequence[str]] | None = None,
    *,
    overwrite: bool = False,
    inputs: Sequence[str | os.PathLike[str]] = (),
    progress: Progress | None = None,
) -> list[Path]:
    """Write one blank coding workbook ``<coder>.xlsx`` per coder into ``out_dir``.

    Parameters
    ----------
    codebook
        The codebook that defines the columns, dropdowns, limits and the ``codebook`` sheet.
    coders
        Coder names; each becomes a file name, which is where the reader finds the coder.
    out_dir
        Folder for the workbooks (created when missing).
    units
        Unit IDs to pre-fill in the unit column, in order (see :func:`read_unit_list`): one list
        for every coder, or a mapping from each coder's name to that coder's own list (as
        ``coderel assign`` makes them).
    overwrite
        Replace an existing workbook whose bytes differ from the new one. Without it such a
        file, perhaps already filled in by its coder, is kept and :class:`UsageError` raised
        before anything is written. An existing file with identical bytes is simply rewritten.
    inputs
        Files that must never be written over (the codebook, the unit list); the codebook's own
        ``source`` is always included.
    progress
        Told of each workbook made ("making ana.xlsx"; :mod:`coderel.progress`).

    Returns
    -------
    list of Path
        The written workbooks, in the order of ``coders``.

    Raises
    ------
    UsageError
        For a coder name that cannot be a file name, a duplicate unit, an output that is an
        input, or an existing different file without ``overwrite``.
    """
    names = check_coder_names(coders)
    if isinstance(units, Mapping):
        unknown = sorted(set(map(str, units)) - set(names))
        if unknown or set(names) - set(units):
            raise UsageError(
                "the per-coder unit lists must name exactly the coders "
                f"({', '.join(names)}); "
                + (
                    f"{unknown[0]!r} is not one of them"
                    if unknown
                    else f"{sorted(set(names) - set(units))[0]!r} has no list"
                )
            )
        per_coder = {name: _checked_units(units[name]) for name in names}
    else:
        shared = _checked_units(units or ())
        per_coder = dict.fromkeys(names, shared)
    folder = Path(out_dir)
    if folder.exists() and not folder.is_dir():
        raise UsageError(f"the output {folder.name!r} is a file, not a folder")
    if not folder.exists() and folder.suffix.lower() in (".xlsx", ".xlsm", ".csv", ".parquet"):
        # A name like out/ana.xlsx would become a folder holding out/ana.xlsx/ana.xlsx.
        raise UsageError(
            f"the output folder {folder.name!r} looks like a file name; give a folder for the "
            "workbooks (one <coder>.xlsx each), for example 'templates'"
        )
    targets = [folder / f"{name}.xlsx" for name in names]
    for name, target in zip(names, targets, strict=True):
        check_sheet_rows(len(per_coder[name]), target, CODING_SHEET)
    protected = [*inputs, *([codebook.source] if codebook.source else [])]
    refuse_overwriting_inputs(targets, protected)
    contents = []
    for done, (name, target) in enumerate(zip(names, targets, strict=True)):
        report(progress, done, len(names), f"making {target.name}")
        contents.append(template_bytes(codebook, name, per_coder[name]))
    report(progress, len(names), len(names), "writing the workbooks")
    if not overwrite:
        for target, data in zip(targets, contents, strict=True):
            if target.exists() and target.read_bytes() != data:
                raise UsageError(
                    f"{target.name} already exists and differs from a blank template (it may be "
                    "filled in); nothing was written - choose another folder or pass --overwrite"
                )
    for target, data in zip(targets, contents, strict=True):
        write_bytes(target, data)
    return targets
