"""Neutralise text that a spreadsheet program would run as a formula (CSV/formula injection).

Following the OWASP guidance on CSV injection, a text cell that begins with ``=``, ``+``, ``-``,
``@``, a tab or a carriage return is prefixed with a single quote when written to xlsx or csv.
Numbers are left alone (``-3`` stays a number); the parquet form keeps the stored value unchanged.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

DANGEROUS_PREFIXES: tuple[str, ...] = ("=", "+", "-", "@", "\t", "\r")


def neutralise(value: Any) -> Any:
    """Return ``value`` with a leading ``'`` if it is text that starts like a formula."""
    if isinstance(value, str) and value.startswith(DANGEROUS_PREFIXES):
        return "'" + value
    return value


def neutralise_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``frame`` with every text cell (and header) neutralised."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or pd.api.types.is_string_dtype(out[col]):
            out[col] = out[col].map(neutralise)
    out.columns = [neutralise(c) for c in out.columns]
    return out
