"""Turning one raw cell into a codebook value, with the problems found on the way.

A cell can arrive as text (every CSV cell, a spreadsheet cell formatted as text), as a number, a
date, a boolean, a spreadsheet error or a formula without a stored result. :func:`normalise_cell`
maps it onto the codebook:

* blank (``None`` or only spaces) -> blank, no problem;
* a category code -> that code; in a multi-select variable several codes separated by ``;``
  -> a tuple in codebook order;
* a number stored as text in a typed cell (``"2"``), a float standing for an integer code
  (``2.0``) or the text ``"2.0"`` -> the code, warning ``normalised-number``;
  a plain ``"2"`` in a CSV file is ordinary (CSV has only text) and raises nothing;
* spaces around a value -> removed, warning ``normalised-space``;
* a category label typed instead of its code (any letter case) -> the code, ``normalised-label``;
* ``code = label`` as inserted by a template dropdown -> the code, silently, when both match
  (also ``'-1 = label``: a dropdown entry whose code starts like a formula is written with a
  leading quote, see :mod:`coderel.io.safe_text`);
* a missing code (e.g. ``99``) -> value ``None`` and ``missing = 99``, without a problem: it is a
  legitimate answer and is counted in the validation summary instead;
* anything else -> value ``None`` and an error (``not-in-codebook`` with a "did you mean" hint,
  ``not-a-number``, ``out-of-range``, ``not-integer``, ``multiple-not-allowed``,
  ``date-converted`` for a date cell or date-like text such as ``3-Jan`` in a CSV file,
  ``spreadsheet-error``, ``formula-no-value``).

Messages quote only codes and short coded values, never narrative text: the text columns of the
codebook are not passed through this module.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from coderel.codebook import MULTI_SEPARATOR, Code, Variable
from coderel.io.safe_text import DANGEROUS_PREFIXES

EXCEL_ERRORS: frozenset[str] = frozenset(
    {"#N/A", "#REF!", "#VALUE!", "#DIV/0!", "#NAME?", "#NULL!", "#NUM!", "#GETTING_DATA"}
)
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_INTEGER = re.compile(r"^[+-]?\d+$")
_MONTH = r"(jan|feb|mar|apr|may|jun|jul|aug|sep|oct|nov|dec)[a-z]*\.?"
#: Text a spreadsheet writes for a date when it saves a converted cell as CSV (``3-Jan``,
#: ``Jan-03``, ``2026-01-03``, ``03/01/2026``, ``3.1.2026``), optionally with a time.
_DATE_TEXT = re.compile(
    rf"^(\d{{1,2}}[- ]{_MONTH}([- ]\d{{2,4}})?|{_MONTH}[- ]\d{{1,4}}"
    r"|\d{4}-\d{1,2}-\d{1,2}|\d{1,2}/\d{1,2}/\d{2,4}|\d{1,2}\.\d{1,2}\.\d{4})"
    r"([ T]\d{1,2}:\d{2}(:\d{2})?)?$",
    re.IGNORECASE,
)
#: Longest raw value quoted in a message; longer values are summarised by their length.
_QUOTE_LIMIT = 40
#: Longest number accepted, in characters (digits, sign, point, exponent); a double holds
#: about 17 significant digits and nothing above 1.8e308, so a longer number is refused.
MAX_NUMBER_CHARS = 300


@dataclass(frozen=True, slots=True)
class CellError:
    """A spreadsheet error value (``#N/A``, ``#REF!``...) found in a cell."""

    text: str


@dataclass(frozen=True, slots=True)
class FormulaNoValue:
    """A formula cell whose workbook stores no computed result."""


@dataclass(frozen=True, slots=True)
class Finding:
    """A problem found in one cell, without its place (the reader adds file, cell, unit...)."""

    code: str
    message: str
    hint: str | None = None


@dataclass(frozen=True, slots=True)
class Normalised:
    """The result for one cell: value, missing code, whether it was blank, and findings."""

    value: Any
    missing: Code | None
    blank: bool
    findings: tuple[Finding, ...] = ()

    @property
    def invalid(self) -> bool:
        """True when an error (not a warning) was found: the value is then ``None``."""
        return any(f.code not in WARNING_CODES for f in self.findings)


WARNING_CODES: frozenset[str] = frozenset(
    {"normalised-number", "normalised-space", "normalised-label"}
)


def quote(value: Any) -> str:
    """A short, safe rendering of a coded value for messages."""
    text = str(value)
    if len(text) > _QUOTE_LIMIT:
        return f"a value of {len(text)} characters"
    return repr(text) if isinstance(value, str) else text


def _is_blank(raw: Any) -> bool:
    if raw is None:
        return True
    if isinstance(raw, float) and math.isnan(raw):
        return True
    return isinstance(raw, str) and raw.strip() == ""


def _code_list(variable: Variable, limit: int = 12) -> str:
    shown = [variable.display(c) for c in variable.codes[:limit]]
    shown += [variable.display(m) for m in variable.missing_codes]
    more = ", ..." if len(variable.codes) > limit else ""
    return ", ".join(shown) + more


def _suggest(variable: Variable, token: str) -> str:
    """A hint: the closest code or label (difflib), else the list of codes."""
    options: dict[str, Code] = {}
    for code in (*variable.codes, *variable.missing_codes):
        options[str(code).casefold()] = code
        label = variable.label_of(code)
        if label:
            options[label.casefold()] = code
    close = difflib.get_close_matches(token.casefold(), list(options), n=1, cutoff=0.6)
    if close:
        return f"did you mean {variable.display(options[close[0]])}? Codes: {_code_list(variable)}"
    return f"codes of {variable.name}: {_code_list(variable)}"


DATE_HINT = (
    "the spreadsheet turned the typed code into a date; format the column as Text "
    "(Format Cells > Text) and type the code again"
)


def _invalid(
    code: str, message: str, hint: str | None, before: Sequence[Finding] = ()
) -> Normalised:
    """No value: the findings so far (warnings) and one error."""
    return Normalised(None, None, False, (*before, Finding(code, message, hint)))


def _date_text(variable: Variable, raw: Any) -> Normalised | None:
    """A ``date-converted`` error when text that is no value of ``variable`` looks like a date."""
    if not isinstance(raw, str) or not _DATE_TEXT.match(raw):
        return None
    return _invalid(
        "date-converted",
        f"{quote(raw)} looks like a date, not a value of {variable.name}",
        DATE_HINT,
    )


def _number_text(token: str) -> int | float | None:
    """Parse text as a number: int for integer text, float otherwise; None when not a number."""
    if _INTEGER.match(token):
        return int(token)
    if _NUMBER.match(token):
        return float(token)
    return None


class _Matcher:
    """Finds the category or missing code that one token stands for."""

    def __init__(self, variable: Variable) -> None:
        self.variable = variable
        self.codes: tuple[Code, ...] = (*variable.codes, *variable.missing_codes)
        self.missing = set(variable.missing_codes)
        self.by_text = {str(c): c for c in self.codes}
        self.by_label: dict[str, Code] = {}
        for code in self.codes:
            label = variable.label_of(code)
            if label:
                self.by_label.setdefault(label.strip().casefold(), code)

    def _by_number(self, number: float) -> Code | None:
        if isinstance(number, float) and not math.isfinite(number):
            return None  # 1e999 is no code (int() of an infinity fails)
        if isinstance(number, float) and not number.is_integer():
            text = str(number)
            return self.by_text.get(text)
        as_int = int(number)
        for code in self.codes:
            if isinstance(code, int) and not isinstance(code, bool) and code == as_int:
                return code
        return self.by_text.get(str(as_int))

    def match(self, raw: Any, *, typed: bool) -> tuple[Code | None, list[Finding]]:
        """Return the code for ``raw`` (an int, float or stripped text token) and warnings."""
        findings: list[Finding] = []
        if isinstance(raw, bool):
            raw = "TRUE" if raw else "FALSE"
        if isinstance(raw, int):
            code = self._by_number(raw)
            return code, findings
        if isinstance(raw, float):
            code = self._by_number(raw)
            if code is not None and isinstance(code, int):
                findings.append(
                    Finding(
                        "normalised-number",
                        f"the number {raw!r} was read as code {code}",
                        "store codes as whole numbers",
                    )
                )
            return code, findings
        token = str(raw)
        if token in self.by_text:
            return self.by_text[token], findings
        number = _number_text(token)
        if number is not None:
            code = self._by_number(number)
            if code is not None:
                if typed or not _INTEGER.match(token):
                    findings.append(
                        Finding(
                            "normalised-number",
                            f"the text {quote(token)} was read as code {code}",
                            "type codes as numbers (not text)" if typed else None,
                        )
                    )
                return code, findings
        left, sep, right = token.partition("=")
        if sep:
            left = left.strip()
            if left.startswith("'") and left[1:].startswith(DANGEROUS_PREFIXES):
                left = left[1:]  # our own dropdown entry, neutralised when written (-1 = ...)
            code, _ = self.match(left, typed=False)
            label = self.variable.label_of(code) if code is not None else None
            if label is not None and label.strip().casefold() == right.strip().casefold():
                return code, []
            return None, findings
        code = self.by_label.get(token.casefold())
        if code is not None:
            findings.append(
                Finding(
                    "normalised-label",
                    f"the label {quote(token)} was read as code {code}",
                    f"type the code ({self.variable.display(code)}) or use the dropdown",
                )
            )
            return code, findings
        return None, findings


def _numeric(variable: Variable, raw: Any, *, typed: bool) -> Normalised:
    """Normalise a cell of an interval or ratio variable."""
    findings: list[Finding] = []
    number: float | None
    if isinstance(raw, bool):
        number = None
    elif isinstance(raw, int | float):
        number = float(raw)
    else:
        number_text = _number_text(str(raw))
        number = None if number_text is None else float(number_text)
        if number is not None and typed:
            findings.append(
                Finding(
                    "normalised-number",
                    f"the text {quote(raw)} was read as the number {number:g}",
                    "type numbers as numbers (not text)",
                )
            )
    if number is not None:
        for code in variable.missing_codes:
            if isinstance(code, int | float) and float(code) == number:
                return Normalised(None, code, False, tuple(findings))
    else:
        for code in variable.missing_codes:
            if str(code) == str(raw):
                return Normalised(None, code, False, tuple(findings))
    if number is None and (as_date := _date_text(variable, raw)) is not None:
        return as_date
    if number is None or not math.isfinite(number):
        return _invalid(
            "not-a-number",
            f"{quote(raw)} is not a number ({variable.name} is {variable.level})",
            "type a number with a dot as decimal separator"
            + (f", or a missing code ({_code_list(variable)})" if variable.missing_codes else ""),
        )
    if variable.integer and not number.is_integer():
        findings.append(
            Finding(
                "not-integer",
                f"{number:g} is not a whole number ({variable.name} counts)",
                "type a whole number",
            )
        )
        return Normalised(None, None, False, tuple(findings))
    if variable.range is not None:
        low, high = variable.range
        if not low <= number <= high:
            findings.append(
                Finding(
                    "out-of-range",
                    f"{number:g} is outside the range {low:g} to {high:g} of {variable.name}",
                    "check the value against the codebook",
                )
            )
            return Normalised(None, None, False, tuple(findings))
    return Normalised(number, None, False, tuple(findings))


def normalise_cell(variable: Variable, raw: Any, *, typed: bool = True) -> Normalised:
    """Map one raw cell onto the codebook.

    Parameters
    ----------
    variable
        The codebook variable of the cell's column.
    raw
        The cell as read: ``None``, ``str``, ``int``, ``float``, ``bool``, a date or time,
        :class:`CellError` or :class:`FormulaNoValue`.
    typed
        ``True`` for workbooks and Parquet (cells keep types, so text that looks like a number is
        worth a warning); ``False`` for CSV, where every cell is text.

    Returns
    -------
    Normalised
        ``value`` (``None`` when blank, missing or invalid), ``missing``, ``blank`` and findings.
    """
    if _is_blank(raw):
        return Normalised(None, None, True)
    if isinstance(raw, FormulaNoValue):
        return _invalid(
            "formula-no-value",
            "the cell holds a formula whose result is not stored in the file",
            "open the file in a spreadsheet program, let it calculate, save, or replace "
            "the formula with its value",
        )
    if isinstance(raw, CellError) or (isinstance(raw, str) and raw.strip() in EXCEL_ERRORS):
        text = raw.text if isinstance(raw, CellError) else raw.strip()
        return _invalid(
            "spreadsheet-error",
            f"the cell holds the spreadsheet error {text}",
            "replace the error by the code (or leave the cell blank)",
        )
    if isinstance(raw, dt.datetime | dt.date | dt.time):
        return _invalid(
            "date-converted",
            f"the cell holds a date or time, not a value of {variable.name}",
            DATE_HINT,
        )
    if (too_long := _too_long_number(raw)) is not None:
        return too_long
    findings: list[Finding] = []
    if isinstance(raw, str):
        stripped = raw.strip()
        if stripped != raw:
            findings.append(
                Finding(
                    "normalised-space",
                    f"spaces around {quote(stripped)} were removed",
                    "delete the spaces before or after the value",
                )
            )
        raw = stripped
    if variable.is_numeric:
        result = _numeric(variable, raw, typed=typed)
        return Normalised(result.value, result.missing, False, (*findings, *result.findings))
    return _categorical(variable, raw, typed=typed, findings=findings)


def _too_long_number(raw: Any) -> Normalised | None:
    """A ``number-too-long`` error for a number past :data:`MAX_NUMBER_CHARS` characters.

    Python refuses to convert integers of more than 4,300 digits to and from text, and a float
    overflows past 1.8e308: such a value is reported here, before anything converts it.
    """
    if isinstance(raw, int) and not isinstance(raw, bool):
        # bit_length is cheap on any int; 997 bits is about 300 decimal digits
        long = raw.bit_length() > MAX_NUMBER_CHARS * 3.32
    elif isinstance(raw, str):
        token = raw.strip()
        long = len(token) > MAX_NUMBER_CHARS and bool(_NUMBER.match(token))
    else:
        return None
    if not long:
        return None
    return _invalid(
        "number-too-long",
        f"the cell holds a number of more than {MAX_NUMBER_CHARS} characters",
        "type the value of the codebook (a code or a number in range)",
    )


def is_none_code(variable: Variable, raw: Any) -> bool:
    """Does ``raw`` give a multi-select variable's explicit empty set (its ``none`` code, the
    code's label, or ``code = label``)?"""
    none = variable.none
    if none is None or raw is None or isinstance(raw, bool):
        return False
    if isinstance(raw, int | float) and isinstance(none.code, int):
        return raw == none.code  # exact, no float conversion (a very long integer stays exact)
    text = str(raw).strip()
    if text.startswith("'"):
        text = text[1:].strip()
    label = none.label.strip().casefold()
    left, sep, right = text.partition("=")
    if sep:
        return left.strip() == str(none.code) and right.strip().casefold() == label
    return text == str(none.code) or text.casefold() == label


def _categorical(
    variable: Variable, raw: Any, *, typed: bool, findings: list[Finding]
) -> Normalised:
    if is_none_code(variable, raw):
        return Normalised((), None, False, tuple(findings))  # the coded empty set
    matcher = _Matcher(variable)
    code, found = matcher.match(raw, typed=typed)
    if code is not None:
        if code in matcher.missing:
            return Normalised(None, code, False, (*findings, *found))
        value: Any = (code,) if variable.multiple else code
        return Normalised(value, None, False, (*findings, *found))
    is_text = isinstance(raw, str)
    if is_text and MULTI_SEPARATOR in raw:
        tokens = [t.strip() for t in raw.split(MULTI_SEPARATOR)]
        tokens = [t for t in tokens if t]
        if not variable.multiple:
            if len(tokens) > 1:
                return _invalid(
                    "multiple-not-allowed",
                    f"{len(tokens)} codes in one cell, but {variable.name} takes one",
                    "keep one code; the codebook allows a single choice here",
                    before=findings,
                )
            if tokens:
                return _categorical(variable, tokens[0], typed=typed, findings=findings)
            return Normalised(None, None, True, tuple(findings))
        codes: list[Code] = []
        for token in tokens:
            if is_none_code(variable, token):
                return _invalid(
                    "not-in-codebook",
                    f"{variable.display(variable.none_code)} is combined with other codes",
                    f"give either codes or {variable.display(variable.none_code)}, not both",
                    before=findings,
                )
            token_code, token_found = matcher.match(token, typed=typed)
            if token_code is None:
                return _invalid(
                    "not-in-codebook",
                    f"{quote(token)} is not a code of {variable.name}",
                    _suggest(variable, token),
                    before=findings,
                )
            if token_code in matcher.missing:
                return _invalid(
                    "not-in-codebook",
                    f"the missing code {token_code} is combined with other codes",
                    "give either codes or the missing code, not both",
                    before=findings,
                )
            findings.extend(token_found)
            if token_code not in codes:
                codes.append(token_code)
        order = {c: i for i, c in enumerate(variable.codes)}
        value = tuple(sorted(codes, key=order.__getitem__))
        return Normalised(value if value else None, None, not value, tuple(findings))
    as_date = _date_text(variable, raw)
    if as_date is not None:
        return Normalised(None, None, False, (*findings, *as_date.findings))
    token = str(raw)
    return _invalid(
        "not-in-codebook",
        f"{quote(raw if is_text else token)} is not a code of {variable.name}",
        separator_hint(variable, token) or _suggest(variable, token),
        before=findings,
    )


#: Separators people type between several codes, other than ours (``1,3``, ``1/3``, ``1 3``).
OTHER_SEPARATORS: tuple[str, ...] = (",", "/", "|", "+", "&")


def separator_hint(variable: Variable, text: str) -> str | None:
    """For a multi-select variable, a hint when ``text`` is codes split by another separator.

    ``'1,3'`` -> ``"several codes are separated by ';': write 1;3"``; ``None`` when ``text`` is
    not several of the variable's codes joined by a comma, slash, bar, plus, ampersand or spaces.
    """
    if not variable.multiple:
        return None
    matcher = _Matcher(variable)
    for sep in (*OTHER_SEPARATORS, None):
        parts = [p.strip() for p in (text.split(sep) if sep else text.split())]
        parts = [p for p in parts if p]
        if len(parts) < 2:
            continue
        codes = [matcher.match(p, typed=False)[0] for p in parts]
        if all(c is not None and c not in matcher.missing for c in codes):
            joined = MULTI_SEPARATOR.join(str(c) for c in codes)
            return (
                f"several codes are separated by {MULTI_SEPARATOR!r}, not "
                f"{(repr(sep) if sep else 'spaces')}: write {joined}"
            )
    return None
