"""Tokens: each coder's entry in a cell reduced to something comparable, and how it is shown.

See :mod:`coderel.adjudicate` for the kinds of token and of disagreement.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Literal

import pandas as pd

from coderel.codebook import Variable
from coderel.codings import Codings

Token = tuple[str, Any]
TokenKind = Literal["na", "missing", "value", "blank"]
Kind = Literal["values differ", "applies?", "no value"]

NA_TOKEN: Token = ("na", None)
BLANK_TOKEN: Token = ("blank", None)
NOT_APPLICABLE = "not applicable"
#: How the list shows a blank entry, and the empty set of a multi-select without a 'none' code.
BLANK_SHOWN = "(blank)"
NONE_SHOWN = "(none)"


def _absent(value: Any) -> bool:
    """``None``, NaN or ``pd.NA``: a column of the long table may turn ``None`` into NaN."""
    if value is None or value is pd.NA:
        return True
    return isinstance(value, float) and math.isnan(value)


def token_of(value: Any, missing: Any, applies: Any) -> Token:
    """Reduce one coder's entry in a cell to a comparable token (see the module docstring)."""
    if applies is False or (not _absent(applies) and applies is not True and not applies):
        return NA_TOKEN
    if not _absent(missing):
        return ("missing", missing)
    if not _absent(value):
        if isinstance(value, list):
            value = tuple(value)
        return ("value", value)
    return BLANK_TOKEN


def _as_code(var: Variable, code: Any, known_codes: Sequence[Any]) -> Any:
    """A code as the codebook writes it (``999.0`` read from a float column -> ``999``)."""
    for known in known_codes:
        if known == code and type(known) is not type(code):
            return known
    return code


def _token(variable: Variable, value: Any, missing: Any, applies: Any) -> Token:
    """:func:`token_of`, with codes as the codebook writes them (``999.0`` read from a float
    column -> ``999``); the commonest entries (a whole number, a blank) without its checks."""
    if applies is True and missing is None:
        kind = type(value)
        if kind is int:
            return ("value", value)
        if value is None:
            return BLANK_TOKEN
        if kind is float and value == value:  # a number, not NaN
            if variable.is_categorical:
                return ("value", _as_code(variable, value, variable.codes))
            return ("value", value)
    token = token_of(value, missing, applies)
    if token[0] == "missing":
        return ("missing", _as_code(variable, token[1], variable.missing_codes))
    if token[0] == "value" and isinstance(token[1], float) and variable.is_categorical:
        return ("value", _as_code(variable, token[1], variable.codes))
    return token


def token_rows(
    codings: Codings,
) -> tuple[list[str], list[str], list[str], list[Token | None]]:
    """Units, coders, variables and tokens of the long table's rows (``None`` for a variable
    the codebook lacks).

    Whole columns as Python lists: iterating pandas (arrow-backed) columns costs more than the
    tokens themselves.
    """
    f = codings.frame
    cb = codings.codebook
    units, coders, names = (f[c].tolist() for c in ("unit", "coder", "variable"))
    variables = {name: cb.variable(name) for name in cb.names}
    tokens = [
        None if variable is None else _token(variable, value, missing, applies)
        for variable, value, missing, applies in zip(
            map(variables.get, names),
            f["value"].tolist(),
            f["missing"].tolist(),
            f["applies"].tolist(),
            strict=True,
        )
    ]
    return units, coders, names, tokens


def unit_sort_key(unit: str) -> tuple[Any, ...]:
    """Natural order of unit IDs: ``R2`` before ``R10``; numbers before text."""
    parts = re.split(r"(\d+)", str(unit))
    return tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in parts if p != "")


def sorted_units(units: Iterable[str]) -> list[str]:
    return sorted(set(units), key=lambda u: (unit_sort_key(u), u))


def format_number(var: Variable, number: float) -> str:
    if var.integer or (isinstance(number, float) and number.is_integer()):
        return str(int(number))
    return repr(float(number))


def display_token(var: Variable, token: Token) -> str:
    """A token as a person reads it: ``1 = Backed away; 3 = Used bear spray``, ``(blank)``."""
    kind, value = token
    if kind == "na":
        return NOT_APPLICABLE
    if kind == "blank":
        return BLANK_SHOWN
    if kind == "missing":
        return var.display(value)
    if var.multiple:
        if not value:  # the coded empty set ("none of these")
            return var.display(var.none_code) if var.none is not None else NONE_SHOWN
        return "; ".join(var.display(c) for c in value)
    if var.is_numeric:
        return format_number(var, value)
    return var.display(value)


def shown_values(
    var: Variable, tokens: Mapping[str, Token], cache: dict[Any, str] | None = None
) -> dict[str, str]:
    """Each coder's token as :func:`display_token` shows it; ``cache`` (one dict shared over
    many cells) keeps what was shown per variable and token, so each is formatted once."""
    if cache is None:
        return {coder: display_token(var, tok) for coder, tok in tokens.items()}
    out = {}
    for coder, tok in tokens.items():
        value = tok[1]
        # the type is part of the key: 1 and 1.0 are equal but may be shown differently
        key = (var.name, tok[0], type(value), value) if not isinstance(value, tuple) else None
        shown = cache.get(key) if key is not None else None
        if shown is None:
            shown = display_token(var, tok)
            if key is not None:
                cache[key] = shown
        out[coder] = shown
    return out


def classify(tokens: Mapping[str, Token]) -> Kind | None:
    """Kind of disagreement of one cell, ``None`` when the coders agree on a value or on n/a."""
    distinct = set(tokens.values())
    if len(distinct) > 1:
        if any(token[0] == "na" for token in distinct):
            return "applies?"
        return "values differ"
    if BLANK_TOKEN in distinct:
        return "no value"
    return None
