"""Neutralise text that a spreadsheet program would run as a formula (CSV/formula injection).

Following the OWASP guidance on CSV injection, a text cell that begins with ``=``, ``+``, ``-``,
``@``, a tab or a carriage return is prefixed with a single quote when written to xlsx or csv.
Numbers are left alone (``-3`` stays a number); the parquet form keeps the stored value unchanged.

A CSV file is also opened by spreadsheet programs set to a locale whose list separator is a
semicolon (or by a user who picks tab or comma as separators on import): such a program splits a
line at every ``;`` (or ``,``, tab), quotes or not, so the text ``a;=1+1`` becomes the two cells
``a`` and ``=1+1``, and the second runs as a formula. :func:`neutralise_csv` therefore also puts
a single quote after every separator that a trigger follows (``a;'=1+1``), so each piece such a
program splits off starts like text. :func:`restore` undoes both marks when coderel reads a file
it wrote (docs/adjudication.md).
"""

from __future__ import annotations

import re
from typing import Any

import pandas as pd

DANGEROUS_PREFIXES: tuple[str, ...] = ("=", "+", "-", "@", "\t", "\r")
#: Characters a spreadsheet program may split a CSV line at, whatever the file's own separator.
SPLIT_CHARACTERS: tuple[str, ...] = (";", ",", "\t")

_TRIGGER = "".join(re.escape(p) for p in DANGEROUS_PREFIXES)
_SPLIT = "".join(re.escape(s) for s in SPLIT_CHARACTERS)
#: A separator followed by a trigger (the trigger is not consumed: ``\t\t=`` marks both).
_AFTER_SPLIT = re.compile(f"([{_SPLIT}])(?=[{_TRIGGER}])")
#: A separator, the mark put after it, and a trigger.
_MARKED = re.compile(f"([{_SPLIT}])'(?=[{_TRIGGER}])")


def neutralise(value: Any) -> Any:
    """Return ``value`` with a leading ``'`` if it is text that starts like a formula."""
    if isinstance(value, str) and value.startswith(DANGEROUS_PREFIXES):
        return "'" + value
    return value


def neutralise_csv(value: Any) -> Any:
    """:func:`neutralise`, and a ``'`` after each ``;``, ``,`` or tab that a trigger follows.

    >>> neutralise_csv("a;=1+1")
    "a;'=1+1"
    >>> neutralise_csv("=x,@y")
    "'=x,'@y"
    >>> neutralise_csv("1 = Food; 3 = Trail")
    '1 = Food; 3 = Trail'
    """
    if not isinstance(value, str):
        return value
    return neutralise(_AFTER_SPLIT.sub(r"\1'", value))


def restore(text: str) -> str:
    """Text as it was before :func:`neutralise_csv` (or :func:`neutralise`) marked it.

    >>> restore("'=x,'@y")
    '=x,@y'
    """
    if text.startswith("'") and text[1:].startswith(DANGEROUS_PREFIXES):
        text = text[1:]
    if "'" in text:
        text = _MARKED.sub(r"\1", text)
    return text


def neutralise_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``frame`` with every text cell and header neutralised for CSV
    (:func:`neutralise_csv`)."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or pd.api.types.is_string_dtype(out[col]):
            out[col] = out[col].map(neutralise_csv)
    out.columns = [neutralise_csv(c) for c in out.columns]
    return out
