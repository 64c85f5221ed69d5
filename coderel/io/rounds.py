"""Rounds in one long table: the ``round`` column.

A long table (``unit, coder, variable, value``, optionally ``occasion``) may carry a ``round``
column naming the round each row belongs to (``pilot``, ``training 1``, ``2026-03``...), as an
alternative to one folder per round (``--round NAME=PATH``). While reading, the round travels
inside the unit ID (``pilot :: U017``): every check of the reader (skip logic, partial units,
duplicates) then works within a round, and every problem names the round with the unit.
:func:`split_rounds` turns the codings read into one :class:`~coderel.codings.Codings` per round,
unit IDs as they were written, so a round read from the column is the same data, and gives the
same numbers, as the same round read from its own folder.

Commands that do not read rounds (``agree``, ``merge``...) see each round's units as units of
their own (``pilot :: U017`` and ``training 1 :: U017`` are two units).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING, Any

import pandas as pd

from coderel.io.occasions import OCCASION_COLUMN
from coderel.io.text_tables import RawRow, RawTable
from coderel.problems import Problems, make_problem

if TYPE_CHECKING:
    from coderel.codings import Codings

ROUND_COLUMN = "round"
#: Between the round and the unit ID in the unit ID used while reading.
ROUND_MARK = " :: "
_LONG = ("unit", "coder", "variable", "value")


def is_round_table(folded_header: Sequence[str]) -> bool:
    """Is this the header of a long table with a ``round`` column (and perhaps ``occasion``)?"""
    header = list(folded_header)
    if ROUND_COLUMN not in header[4:] or header.count(ROUND_COLUMN) != 1:
        return False
    rest = tuple(h for h in header if h != ROUND_COLUMN)
    return rest in (_LONG, (*_LONG, OCCASION_COLUMN))


def tag_rounds(table: RawTable, text_of: Callable[[Any], str | None]) -> RawTable:
    """The table without its ``round`` column, the round folded into each row's unit ID.

    ``text_of`` turns a cell into an ID as the reader does (so ``17.0`` and ``"17"`` read
    alike, with or without the column). A row whose round is blank (or holds the mark
    ``' :: '``) is left out with a ``round-blank`` error naming its cell; a row without a unit
    ID is passed on for the reader to report.
    """
    folded = [h.casefold() for h in table.header]
    pos = folded.index(ROUND_COLUMN)
    keep = [i for i in range(len(table.header)) if i != pos]
    rows, problems = [], list(table.problems)
    for row in table.rows:
        cells = tuple(row.cells) + (None,) * max(0, len(table.header) - len(row.cells))
        out = [cells[i] for i in keep]
        unit = text_of(out[0])
        label = text_of(cells[pos])
        if unit is None:
            rows.append(RawRow(row.number, tuple(out), row.line))
            continue
        if label is None or ROUND_MARK.strip() in label:
            problems.append(
                make_problem(
                    "round-blank",
                    "this row has no round"
                    if label is None
                    else f"the round {label!r} holds '{ROUND_MARK.strip()}'",
                    hint="give every row the name of its round (pilot, training 1, ...), "
                    f"without '{ROUND_MARK.strip()}'",
                    file=table.file,
                    sheet=table.sheet,
                    cell=table.cell_ref(pos, row.number),
                    line=row.line,
                )
            )
            continue
        out[0] = f"{label}{ROUND_MARK}{unit}"
        rows.append(RawRow(row.number, tuple(out), row.line))
    return replace(
        table,
        header=tuple(table.header[i] for i in keep),
        columns=tuple(table.columns[i] for i in keep),
        rows=tuple(rows),
        problems=tuple(problems),
        text_positions=frozenset(
            (p if p < pos else p - 1) for p in table.text_positions if p != pos
        ),
    )


def round_names(codings: Codings) -> list[str]:
    """The rounds of codings read from tables with a ``round`` column, in natural order."""
    from coderel.codings import natural_order

    column = codings.frame["unit"]
    if isinstance(column.dtype, pd.CategoricalDtype):
        # the unit IDs in use, from the categories: no text per row of a long table
        units = [str(u) for u in column.cat.remove_unused_categories().cat.categories]
    else:
        units = pd.unique(column.astype(str))
    return natural_order({u.partition(ROUND_MARK)[0] for u in units if ROUND_MARK in u})


def _part(frame: pd.DataFrame, name: str) -> pd.DataFrame:
    if not len(frame):
        return frame.copy()
    units = frame["unit"].astype(str)
    parts = units.str.partition(ROUND_MARK)
    keep = (parts[1] == ROUND_MARK) & (parts[0] == name)
    out = frame[keep].copy()
    out["unit"] = parts[2][keep]
    return out.reset_index(drop=True)


def split_rounds(codings: Codings, names: Sequence[str] | None = None) -> list[tuple[str, Codings]]:
    """One :class:`Codings` per round (``names`` in this order, else every round in natural
    order), unit IDs without the round. Each round keeps the problems of its own units; rows of
    units without a round (sheets without the column) belong to no round."""
    from coderel.codings import Codings

    out = []
    for name in names if names is not None else round_names(codings):
        prefix = f"{name}{ROUND_MARK}"
        problems = Problems(p for p in codings.problems if str(p.unit or "").startswith(prefix))
        occasions = codings.occasions
        out.append(
            (
                name,
                Codings.from_records(
                    codings.codebook,
                    _part(codings.frame, name),
                    texts=_part(codings.texts, name),
                    problems=problems,
                    sources=codings.sources,
                    occasions=_part(occasions, name) if len(occasions) else None,
                ),
            )
        )
    return out


__all__ = [
    "ROUND_COLUMN",
    "ROUND_MARK",
    "is_round_table",
    "round_names",
    "split_rounds",
    "tag_rounds",
]
