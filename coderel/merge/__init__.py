"""The reconciled dataset: one final value per unit and variable, and how it was reached.

Every unit that any coder coded becomes one row. For each variable the dataset holds a value column
(named as the variable) and a status column ``<variable>_status``:

``agreed``
    every coder who coded the unit gave the same value (a missing code such as 99 counts as a value
    like any other);
``majority``
    only under ``rule="majority"``: more than half of the coders who coded the unit gave the same
    value (a tie, or a plurality short of half, is ``unresolved``);
``adjudicated``
    an adjudicator's decision settled the cell (see :mod:`coderel.adjudicate`);
``single``
    only one coder coded the unit;
``unresolved``
    the coders disagree (or all left the cell blank) and no decision settled it; the value is empty;
``not_applicable``
    every coder's own ``applies_when`` condition says the variable does not apply; value empty.

An empty value under ``majority`` or ``adjudicated`` means the majority or the adjudicator judged
that the variable does not apply. A decision is used only while it matches the current
disagreement: a decision for a cell the coders now agree on, for a unit no longer in the data, or
made when the coders' values were different (as recorded on the list) is a ``stale-decision``
warning and is not used. Run ``coderel adjudicate`` again to carry decisions over to the current
list.

Value columns hold codes exactly as in the codebook: whole-number codes as a nullable integer
column, text codes as text (a variable mixing number and text codes as text throughout), numbers
of interval and ratio variables as floats (whole numbers for ``integer`` variables). A missing
code is never a value: the value column is empty (a true missing value, so that a mean cannot
include ``999``) and the code, with its meaning kept, goes to the column ``<variable>_missing``,
which every variable with missing codes in its codebook gets, right after its status column. A
multi-select value is its codes joined with ``;`` in codebook order (``1;3``) in every form, csv,
xlsx and parquet alike; :func:`spread` adds one 0/1 column ``<variable>__<code>`` per category.

The package: ``result`` (statuses, rules, adjudicated cells), ``cells`` (deciding one cell),
``summary`` (a variable's per-unit summary: the coders' tokens as integer ids),
``settlement`` (a variable's cells decided at once),
``columns`` (value and status columns, the skip-logic check), ``core`` (:func:`merge`, the result,
writing), ``tables`` (spread columns, labels, data dictionary).
"""

from coderel.adjudicate.rules import RULES, Rule
from coderel.merge.columns import missing_column, output_columns, status_column, value_column
from coderel.merge.core import MergeResult, merge, write_merged
from coderel.merge.result import (
    SETTLED,
    SPREAD_SEPARATOR,
    STATUS_MEANINGS,
    STATUS_SUFFIX,
    STATUSES,
    AdjudicatedCell,
    Status,
)
from coderel.merge.tables import (
    DATA_SHEET,
    DICTIONARY_COLUMNS,
    DICTIONARY_SHEET,
    LABELS_SHEET,
    dictionary_frame,
    labels_frame,
    spread_column,
    spread_multiselect,
)

__all__ = [
    "DATA_SHEET",
    "DICTIONARY_COLUMNS",
    "DICTIONARY_SHEET",
    "LABELS_SHEET",
    "RULES",
    "SETTLED",
    "SPREAD_SEPARATOR",
    "STATUSES",
    "STATUS_MEANINGS",
    "STATUS_SUFFIX",
    "AdjudicatedCell",
    "MergeResult",
    "Rule",
    "Status",
    "dictionary_frame",
    "labels_frame",
    "merge",
    "missing_column",
    "output_columns",
    "spread_column",
    "spread_multiselect",
    "status_column",
    "value_column",
    "write_merged",
]
