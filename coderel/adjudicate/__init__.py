"""The adjudication list: one row per cell where coders disagree, kept across regenerations.

A *cell* is one unit x one variable. Each coder's entry in a cell is reduced to a *token*:

* ``("na", None)`` - the variable does not apply for this coder (``applies_when`` is false);
* ``("missing", code)`` - the coder gave a missing code such as 99;
* ``("value", value)`` - a code, a tuple of codes (multi-select) or a number;
* ``("blank", None)`` - the coder left the cell empty although the variable applies.

A cell goes on the list when the coders' tokens differ (kind ``values differ``; a missing code
against a code and a blank against a value are differences), when some coders find the variable
applies and others not (kind ``applies?``, decided with a code or ``not applicable``), or when
every coder left it blank (kind ``no value``). Regenerating the list keeps every decision made
(matched by unit and variable), moves rows whose disagreement vanished to the sheet
``no longer needed`` and appends new ones. See ``docs/adjudication.md``.

The package: ``tokens`` (entries reduced to tokens, display, ordering), ``cell_table`` (every
cell's tokens grouped once, its kind of disagreement worked out on arrays), ``decisions`` (parsing
and holding decisions), ``model`` (rows, the list, its sheets and columns), ``build`` (the list
from the codings, keeping earlier decisions), ``read`` and ``write`` (the list as xlsx or csv).
"""

from coderel.adjudicate.build import (
    build_adjudication,
    check_decisions,
    disagreements,
)
from coderel.adjudicate.cell_table import cell_tokens
from coderel.adjudicate.decisions import Decision, Decisions, hint, parse_decision
from coderel.adjudicate.model import (
    ABOUT_SHEET,
    FIXED_COLUMNS,
    KEY_SEPARATOR,
    LISTS_SHEET,
    MAIN_SHEET,
    RETIRED_SHEET,
    STALE_CHECK,
    SUMMARY_SHEET,
    Adjudication,
    AdjudicationRow,
    coder_column,
    column_letter,
    main_columns,
    retired_coders,
    retired_columns,
    rows_frame,
)
from coderel.adjudicate.read import read_adjudication, read_decisions
from coderel.adjudicate.tokens import (
    BLANK_TOKEN,
    NA_TOKEN,
    NOT_APPLICABLE,
    Kind,
    Token,
    TokenKind,
    classify,
    display_token,
    format_number,
    shown_values,
    sorted_units,
    token_of,
    unit_sort_key,
)
from coderel.adjudicate.write import write_adjudication

__all__ = [
    "ABOUT_SHEET",
    "BLANK_TOKEN",
    "FIXED_COLUMNS",
    "KEY_SEPARATOR",
    "LISTS_SHEET",
    "MAIN_SHEET",
    "NA_TOKEN",
    "NOT_APPLICABLE",
    "RETIRED_SHEET",
    "STALE_CHECK",
    "SUMMARY_SHEET",
    "Adjudication",
    "AdjudicationRow",
    "Decision",
    "Decisions",
    "Kind",
    "Token",
    "TokenKind",
    "build_adjudication",
    "cell_tokens",
    "check_decisions",
    "classify",
    "coder_column",
    "column_letter",
    "disagreements",
    "display_token",
    "format_number",
    "hint",
    "main_columns",
    "parse_decision",
    "read_adjudication",
    "read_decisions",
    "retired_coders",
    "retired_columns",
    "rows_frame",
    "shown_values",
    "sorted_units",
    "token_of",
    "unit_sort_key",
    "write_adjudication",
]
