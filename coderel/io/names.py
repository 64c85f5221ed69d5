"""Unit IDs, coder names and variable names as text, and the closest known name.

A spreadsheet gives an ID as a number, a date or text; :func:`text_of` makes every kind the text a
coder would have typed (``12.0`` -> ``12``, a date -> its ISO form, a leading ``'`` that coderel
wrote before a dangerous prefix removed). :func:`closest` finds a name for "did you mean" hints.
"""

from __future__ import annotations

import datetime as dt
import difflib
import functools
from collections.abc import Iterable
from typing import Any

from coderel.io.safe_text import restore
from coderel.normalise import CellError, FormulaNoValue


@functools.lru_cache(maxsize=1 << 16)
def _str_text(raw: str) -> str | None:
    """:func:`text_of` of a string: IDs and names repeat row after row, so it is cached."""
    # neutralised when coderel wrote it (a template's unit '-002; a CSV's 'a;'=b')
    return restore(raw.strip()) or None


def text_of(raw: Any) -> str | None:
    """A unit ID, coder name or long-table name as text (``None`` when blank)."""
    if type(raw) is str:
        return _str_text(raw)
    if raw is None or isinstance(raw, CellError | FormulaNoValue):
        return None
    if isinstance(raw, bool):
        return str(raw).upper()
    if isinstance(raw, float):
        if raw != raw:
            return None
        if raw.is_integer():
            return str(int(raw))
    if isinstance(raw, dt.datetime) and raw.time() == dt.time(0):
        return raw.date().isoformat()  # a date cell, as the same date typed as text reads
    if isinstance(raw, dt.datetime | dt.date | dt.time):
        return raw.isoformat()
    return _str_text(str(raw))


def closest(name: str, options: Iterable[str]) -> str | None:
    """The known name closest to ``name`` (difflib ratio >= 0.6, then without case), or None."""
    options = list(options)
    found = difflib.get_close_matches(name, options, n=1, cutoff=0.6)
    if not found:
        lowered = {o.casefold(): o for o in options}
        found = [
            lowered[m] for m in difflib.get_close_matches(name.casefold(), lowered, n=1, cutoff=0.6)
        ]
    return found[0] if found else None
