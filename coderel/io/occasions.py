"""A coder's second coding occasion (test-retest): the ``occasion`` column of long tables.

A long table may carry a fifth column, ``occasion``, naming when each row was coded (a label such
as ``1``/``2``, or a date such as ``2026-03-17``). While reading, the occasion travels inside the
coder name (``ana @ 2026-03-17``, so every problem names it); :func:`split_occasions` then keeps
each coder's first occasion as the coding of that coder and moves the second to a table of its
own (:attr:`coderel.codings.Codings.occasions`), so agreement between coders is never computed
on a mixture of occasions. A coder's rows without an occasion (a wide sheet, a blank cell) are
that coder's first occasion; otherwise the earliest label is (dates in time order, numbers in
numeric order, other text alphabetically).
"""

from __future__ import annotations

from dataclasses import replace

import pandas as pd

from coderel.io.text_tables import RawRow, RawTable
from coderel.problems import Problems

OCCASION_COLUMN = "occasion"
#: Between the coder and the occasion label in the coder name used while reading.
MARK = " @ "


def tag_occasions(table: RawTable) -> RawTable:
    """The long table with its occasion (fifth cell) folded into the coder cell (second)."""
    rows = []
    for row in table.rows:
        cells = tuple(row.cells) + (None,) * max(0, 5 - len(row.cells))
        coder, occasion = cells[1], cells[4]
        label = _label(occasion)
        if coder is not None and label is not None and str(coder).strip():
            coder = f"{str(coder).strip()}{MARK}{label}"
        rows.append(RawRow(row.number, (cells[0], coder, cells[2], cells[3]), row.line))
    return replace(table, header=table.header[:4], rows=tuple(rows))


def _label(value: object) -> str | None:
    if value is None:
        return None
    if isinstance(value, pd.Timestamp) or hasattr(value, "isoformat"):
        text = value.isoformat()  # type: ignore[union-attr]
        return text[:10] if text.endswith("T00:00:00") or len(text) == 10 else text
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    text = str(value).strip()
    return text or None


def _order_key(label: str) -> tuple[int, object]:
    """Sort labels: plain first, then dates in time order, numbers, text."""
    if label == "":
        return (0, 0)
    stamp = pd.to_datetime(label, errors="coerce", format="ISO8601")
    if stamp is not pd.NaT and not pd.isna(stamp):
        return (1, stamp.value)
    try:
        return (2, float(label))
    except ValueError:
        return (3, label)


def split_occasions(frame: pd.DataFrame, problems: Problems) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Split rows read with :func:`tag_occasions` into first occasions and second occasions.

    Returns the frame of first occasions (coder names restored) and the frame of second
    occasions with an ``occasion`` column (the later label) and ``first_occasion`` (the earlier
    label, ``""`` when the first had none). A coder with more than two occasions gets a
    ``too-many-occasions`` error and the later ones are not read.
    """
    if not any(MARK in str(name) for name in pd.unique(frame["coder"])):
        return frame, pd.DataFrame(columns=[*frame.columns, "occasion", "first_occasion"])
    coder = frame["coder"].astype(str)
    tagged = coder.str.contains(MARK, regex=False)
    parts = coder.str.partition(MARK)
    base = parts[0].where(tagged, coder)
    label = parts[2].where(tagged, "")
    keep = pd.Series(True, index=frame.index)
    second = pd.Series(False, index=frame.index)
    firsts: dict[str, str] = {}
    for name in pd.unique(base[tagged]):
        mine = base == name
        labels = sorted(pd.unique(label[mine]), key=_order_key)
        firsts[name] = labels[0]
        if len(labels) > 2:
            extra = labels[2:]
            first_row = frame.loc[mine & label.isin(extra)].iloc[0]
            problems.add(
                "too-many-occasions",
                f"coder {name!r} has {len(labels)} occasions "
                f"({', '.join(x or 'none' for x in labels)});"
                f" only the first two were read",
                hint="give each coder at most two occasions (the first coding and one recoding)",
                file=first_row.get("file"),
                sheet=first_row.get("sheet"),
                coder=name,
            )
            keep &= ~(mine & label.isin(extra))
        if len(labels) > 1:
            second |= mine & (label == labels[1])
    main = frame[keep & ~second].copy()
    main["coder"] = base[keep & ~second]
    later = frame[keep & second].copy()
    later["coder"] = base[keep & second]
    later["occasion"] = label[keep & second]
    later["first_occasion"] = later["coder"].map(firsts)
    return main.reset_index(drop=True), later.reset_index(drop=True)
