"""Who coded which unit: one rule for every input path, and coder names that look alike.

A coder *coded* a unit when the coder gave it a value, a missing code or a (rejected) entry for at
least one variable. A unit a coder left entirely blank - in a template workbook the unit ID is
pre-filled, so an untouched row is still a row - was not coded by that coder, exactly as if the row
were absent (as it is in a long table that simply has no rows for it). :func:`drop_uncoded` removes
such rows from the long table once all files are read, so that ``validate``, ``agree``,
``adjudicate``, ``merge`` and ``report`` see the same data whatever the file format, and warns once
per coder with the count and the units (``uncoded-unit``).

Coder names that differ only in case or spaces (``Mara`` and ``mara ``) are most likely one coder
typed two ways; :func:`alike_coders` finds them and :func:`warn_alike_coders` says so with a
"did you mean".
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from coderel.problems import Problems

#: How many unit IDs a warning lists before it says "and N more".
SHOWN_UNITS = 10


def _natural(unit: str) -> tuple[Any, ...]:
    parts = re.split(r"(\d+)", str(unit))
    return tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in parts if p != "")


def unit_list(units: Iterable[str], shown: int = SHOWN_UNITS) -> str:
    """``ENC-001, ENC-004 and 3 more``: unit IDs in natural order, the first ``shown`` named."""
    ordered = sorted(set(units), key=lambda u: (_natural(u), u))
    head = ", ".join(ordered[:shown])
    rest = len(ordered) - shown
    return f"{head} and {rest} more" if rest > 0 else head


def written(frame: pd.DataFrame) -> pd.Series:
    """Per row of the reader's table: did the coder write anything for this variable?

    A value, a missing code, or an entry that was rejected (``_invalid`` with a cell: the coder
    wrote something that is not a valid value). A variable without a column has no cell.
    """
    value = frame["value"].notna()
    missing = frame["missing"].notna()
    if "_invalid" in frame.columns:
        rejected = frame["_invalid"].astype(bool) & frame["cell"].notna()
    else:
        rejected = pd.Series(False, index=frame.index)
    return value | missing | rejected


def drop_uncoded(frame: pd.DataFrame, problems: Problems) -> pd.DataFrame:
    """Drop the rows of units a coder left blank for every variable; warn once per coder.

    Parameters
    ----------
    frame
        The reader's long table (``unit``, ``coder``, ``variable``, ``value``, ``missing``,
        ``file``, ``sheet``, ``cell`` and, from the reader, ``_invalid``).
    problems
        Receives one ``uncoded-unit`` warning per coder who left units blank.

    Returns
    -------
    pandas.DataFrame
        The table without those rows (index reset).
    """
    if frame.empty:
        return frame
    # (unit, coder) pairs as integers: whole columns, no loop over rows
    unit_codes, _ = pd.factorize(frame["unit"])
    coder_codes, coder_names = pd.factorize(frame["coder"])
    pair, _ = pd.factorize(unit_codes.astype(np.int64) * max(len(coder_names), 1) + coder_codes)
    coded = np.zeros(pair.max(initial=-1) + 1, dtype=bool)
    coded[pair[written(frame).to_numpy(dtype=bool)]] = True
    drop = ~coded[pair]
    if not drop.any():
        return frame
    dropped = frame.loc[drop]
    for coder, rows in dropped.groupby("coder", sort=False):
        units = list(dict.fromkeys(rows["unit"]))
        files = list(dict.fromkeys(f for f in rows["file"] if f is not None))
        sheets = list(dict.fromkeys(s for s in rows["sheet"] if s is not None))
        n = len(units)
        them = "them" if n != 1 else "it"
        problems.add(
            "uncoded-unit",
            f"{coder} left {n} unit{'s' if n != 1 else ''} blank (no value for any variable): "
            f"{unit_list(units)}; {'they count' if n != 1 else 'it counts'} as not coded by "
            f"{coder}",
            hint=f"if {coder} should code {them}, code {them} in {coder}'s sheet; until then "
            f"agreement, adjudication and the merged data treat {them} as not coded by {coder}",
            file=files[0] if len(files) == 1 else None,
            sheet=sheets[0] if len(sheets) == 1 else None,
            coder=coder,
        )
    return frame.loc[~drop].reset_index(drop=True)


def coder_key(name: str) -> str:
    """A coder name without case and spaces: ``' Mara '`` and ``'mara'`` give ``'mara'``."""
    return "".join(str(name).casefold().split())


def alike_coders(coders: Sequence[str]) -> list[list[str]]:
    """Groups of two or more coder names that differ only in case or spaces (first seen first)."""
    groups: dict[str, list[str]] = {}
    for coder in coders:
        groups.setdefault(coder_key(coder), []).append(coder)
    return [names for names in groups.values() if len(names) > 1]


def did_you_mean(coder: str, coders: Sequence[str]) -> str | None:
    """The first other coder name that differs from ``coder`` only in case or spaces."""
    key = coder_key(coder)
    return next((c for c in coders if c != coder and coder_key(c) == key), None)


def warn_alike_coders(frame: pd.DataFrame, problems: Problems) -> None:
    """One ``similar-coder-names`` warning per coder name that looks like an earlier one."""
    coders = [str(c) for c in pd.unique(frame["coder"])]  # first seen first
    for names in alike_coders(coders):
        first = names[0]
        for other in names[1:]:
            rows = frame.loc[frame["coder"] == other]
            units = list(dict.fromkeys(rows["unit"]))
            files = list(dict.fromkeys(f for f in rows["file"] if f is not None))
            problems.add(
                "similar-coder-names",
                f"the coder names {other!r} and {first!r} differ only in case or spaces, so they "
                f"are read as two coders ({other!r} on {len(units)} unit"
                f"{'s' if len(units) != 1 else ''})",
                hint=f"did you mean {first!r}? write each coder's name the same way everywhere; "
                "if they are two people, give them names that differ in more than case or spaces",
                file=files[0] if len(files) == 1 else None,
                coder=other,
            )


__all__ = [
    "alike_coders",
    "coder_key",
    "did_you_mean",
    "drop_uncoded",
    "unit_list",
    "warn_alike_coders",
    "written",
]
