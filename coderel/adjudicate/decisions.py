"""An adjudicator's decisions: parsing a decision cell for a variable, and the decisions read."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

import pandas as pd

from coderel.adjudicate.tokens import NA_TOKEN, NOT_APPLICABLE, Token
from coderel.codebook import MULTI_SEPARATOR, Variable
from coderel.codings import SourceFile
from coderel.normalise import is_none_code, separator_hint
from coderel.problems import Problems


@dataclass(frozen=True, slots=True)
class Decision:
    """An adjudicator's decision for one cell.

    ``token`` is ``("value", v)``, ``("missing", code)`` or ``("na", None)`` for "not applicable";
    ``value`` is the code, tuple of codes or number (``None`` for not applicable).
    """

    value: Any
    token: Token
    text: str
    adjudicator: str | None = None
    note: str | None = None
    cell: str | None = None
    #: the coders' values as shown on the list when the decision was made (coder -> text);
    #: ``None`` when unknown. A merge uses the decision only while they still hold.
    values: Mapping[str, str] | None = None
    #: the list's ``check`` cell: filled while the decision waits to be re-confirmed (the coders'
    #: values changed after it was made); ``merge`` does not use such a decision.
    check: str | None = None

    def to_dict(self) -> dict[str, Any]:
        value = list(self.value) if isinstance(self.value, tuple) else self.value
        return {
            "value": value,
            "state": self.token[0],
            "decision": self.text,
            "adjudicator": self.adjudicator,
            "note": self.note,
            "cell": self.cell,
            "check": self.check,
        }


def _label_of(var: Variable, code: Any) -> str:
    for item in (*var.categories, *var.missing):
        if item.code == code:
            return str(item.label or "")
    return ""


def _same_label(a: str, b: str) -> bool:
    return " ".join(a.casefold().split()) == " ".join(b.casefold().split())


def _match_code(var: Variable, text: str) -> Any:
    """One code given as ``code``, ``code = label`` or a label; ``None`` when none matches."""
    text = text.strip()
    if " = " in text:
        text, label = (t.strip() for t in text.split(" = ", 1))
        code = _match_code(var, text)
        # "7 = Moose" when 7 is "Other animal": which one was meant is not clear.
        return code if code is not None and _same_label(_label_of(var, code), label) else None
    candidates = list(var.codes) + list(var.missing_codes)
    for code in candidates:
        if str(code) == text:
            return code
    try:
        number = float(text)
    except ValueError:
        number = None
    if number is not None:
        for code in candidates:
            if isinstance(code, int) and code == number:
                return code
    lowered = text.casefold()
    for cat in var.categories:
        if cat.label.casefold() == lowered:
            return cat.code
    for miss in var.missing:
        if miss.label.casefold() == lowered:
            return miss.code
    return None


def parse_decision(var: Variable, raw: Any) -> tuple[Token | None, str | None]:
    """Parse a decision cell for ``var``; return ``(token, None)`` or ``(None, reason)``.

    Accepted: a code (``3``), ``code = label`` (``3 = Used bear spray``), a label, a missing code,
    ``not applicable`` (only for a variable with ``applies_when``), several codes ``1;3`` for a
    multi-select variable, a number within range for interval and ratio variables.
    """
    if isinstance(raw, bool):
        return None, "a yes/no cell is not a code"
    if isinstance(raw, float) and raw.is_integer():
        raw = int(raw)
    text = str(raw).strip()
    if text.startswith("'"):
        text = text[1:].strip()
    if text.casefold() == NOT_APPLICABLE:
        if var.applies_when is None:
            return None, f"{var.name!r} has no applies_when condition, so it always applies"
        return NA_TOKEN, None
    if var.is_numeric:
        for code in var.missing_codes:
            if str(code) == text or (
                isinstance(code, int) and text.split(" = ", 1)[0].strip() == str(code)
            ):
                return ("missing", code), None
        try:
            number = float(text.replace(",", "."))
        except ValueError:
            return None, f"not a number, a missing code or {NOT_APPLICABLE!r}"
        if not math.isfinite(number):
            return None, "not a finite number"
        if var.range is not None and not (var.range[0] <= number <= var.range[1]):
            return None, f"outside the range {var.range[0]:g} to {var.range[1]:g}"
        if var.integer and not number.is_integer():
            return None, "the variable holds whole numbers"
        return ("value", float(number)), None
    parts = [p for p in (s.strip() for s in text.split(MULTI_SEPARATOR)) if p]
    if not parts:
        return None, "empty"
    if var.multiple and var.none is not None:
        if len(parts) == 1 and is_none_code(var, parts[0]):
            return ("value", ()), None  # the coded empty set
        if any(is_none_code(var, p) for p in parts):
            return None, f"{var.display(var.none_code)} cannot be combined with other codes"
    codes = []
    for part in parts:
        code = _match_code(var, part)
        if code is None and " = " in part:
            alone = _match_code(var, part.split(" = ", 1)[0])
            if alone is not None:
                return None, (
                    f"{part[:40]!r}: code {alone} is {_label_of(var, alone)[:40]!r}, so code and "
                    "label do not match"
                )
        if code is None:
            sep = separator_hint(var, part)
            return None, f"{part[:40]!r} is not a code or label of {var.name!r}" + (
                f" ({sep})" if sep else ""
            )
        codes.append(code)
    if len(codes) == 1 and codes[0] in var.missing_codes:
        return ("missing", codes[0]), None
    if any(c in var.missing_codes for c in codes):
        return None, "a missing code cannot be combined with other codes"
    if var.multiple:
        order = {c: i for i, c in enumerate(var.codes)}
        return ("value", tuple(sorted(set(codes), key=order.__getitem__))), None
    if len(codes) > 1:
        return None, f"{var.name!r} takes one code only"
    return ("value", codes[0]), None


@dataclass(frozen=True)
class Decisions:
    """Decisions read from an adjudication file: (unit, variable) -> :class:`Decision`."""

    decisions: Mapping[tuple[str, str], Decision]
    problems: Problems = field(default_factory=Problems)
    source: SourceFile | None = None

    def get(self, unit: str, variable: str) -> Decision | None:
        return self.decisions.get((unit, variable))

    def __len__(self) -> int:
        return len(self.decisions)

    def to_frame(self) -> pd.DataFrame:
        rows = [{"unit": u, "variable": v, **d.to_dict()} for (u, v), d in self.decisions.items()]
        cols = ["unit", "variable", "value", "state", "decision", "adjudicator", "note", "cell"]
        cols.append("check")
        return pd.DataFrame(rows, columns=cols)

    def to_dict(self) -> dict[str, Any]:
        return {
            "decisions": self.to_frame().to_dict(orient="records"),
            **self.problems.to_dict(),
            "source": None if self.source is None else asdict(self.source),
        }


def hint(var: Variable) -> str:
    if var.is_numeric:
        lo_hi = f" between {var.range[0]:g} and {var.range[1]:g}" if var.range else ""
        codes = ", ".join(map(str, var.missing_codes))
        extra = f", a missing code ({codes})" if var.missing else ""
        return f"write a number{lo_hi}{extra}" + (
            f" or {NOT_APPLICABLE!r}" if var.applies_when else ""
        )
    text = "pick a code from the dropdown (code, 'code = label' or the label)"
    if var.multiple:
        text = "write the codes separated by ';', for example 1;3"
    if var.applies_when is not None:
        text += f", or {NOT_APPLICABLE!r}"
    return text
