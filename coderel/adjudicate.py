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
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, Literal

import pandas as pd

from coderel.codebook import MULTI_SEPARATOR, Codebook, Variable
from coderel.codings import Codings, SourceFile
from coderel.errors import InputRefused
from coderel.io.atomic import sha256_file
from coderel.problems import Problems

Token = tuple[str, Any]
TokenKind = Literal["na", "missing", "value", "blank"]
Kind = Literal["values differ", "applies?", "no value"]

NA_TOKEN: Token = ("na", None)
BLANK_TOKEN: Token = ("blank", None)
NOT_APPLICABLE = "not applicable"

#: Sheet names of the adjudication workbook.
MAIN_SHEET = "to decide"
RETIRED_SHEET = "no longer needed"
SUMMARY_SHEET = "summary"
ABOUT_SHEET = "about"
LISTS_SHEET = "lists"

#: Fixed column names (coder and text columns sit between ``kind`` and ``decision``).
FIXED_COLUMNS: tuple[str, ...] = (
    "unit",
    "variable",
    "kind",
    "decision",
    "note",
    "adjudicator",
    "key",
    "reason",
    "list",
)
KEY_SEPARATOR = "|"


# ---- tokens and ordering -------------------------------------------------------------------
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


def cell_tokens(codings: Codings) -> dict[tuple[str, str], dict[str, Token]]:
    """Every cell's tokens per coder, for coders who have a row for that unit and variable."""
    f = codings.frame
    cb = codings.codebook
    cells: dict[tuple[str, str], dict[str, Token]] = {}
    for unit, coder, var, value, missing, applies in zip(
        f["unit"], f["coder"], f["variable"], f["value"], f["missing"], f["applies"], strict=True
    ):
        if var not in cb:
            continue
        token = token_of(value, missing, applies)
        if token[0] == "missing":
            token = (
                "missing",
                _as_code(cb.variable(var), token[1], cb.variable(var).missing_codes),
            )
        elif token[0] == "value" and isinstance(token[1], float):
            variable = cb.variable(var)
            if variable.is_categorical:
                token = ("value", _as_code(variable, token[1], variable.codes))
        cells.setdefault((unit, var), {})[coder] = token
    return cells


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
        return "(blank)"
    if kind == "missing":
        return var.display(value)
    if var.multiple:
        return "; ".join(var.display(c) for c in value)
    if var.is_numeric:
        return format_number(var, value)
    return var.display(value)


def classify(tokens: Mapping[str, Token]) -> Kind | None:
    """Kind of disagreement of one cell, ``None`` when the coders agree on a value or on n/a."""
    distinct = set(tokens.values())
    if len(distinct) > 1:
        kinds = {k for k, _ in distinct}
        if "na" in kinds:
            return "applies?"
        return "values differ"
    if distinct == {BLANK_TOKEN}:
        return "no value"
    return None


# ---- decisions -----------------------------------------------------------------------------
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

    def to_dict(self) -> dict[str, Any]:
        value = list(self.value) if isinstance(self.value, tuple) else self.value
        return {
            "value": value,
            "state": self.token[0],
            "decision": self.text,
            "adjudicator": self.adjudicator,
            "note": self.note,
            "cell": self.cell,
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
            return None, f"{part[:40]!r} is not a code or label of {var.name!r}"
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
        return pd.DataFrame(rows, columns=cols)

    def to_dict(self) -> dict[str, Any]:
        return {
            "decisions": self.to_frame().to_dict(orient="records"),
            **self.problems.to_dict(),
            "source": None if self.source is None else asdict(self.source),
        }


# ---- the list ------------------------------------------------------------------------------
@dataclass(frozen=True)
class AdjudicationRow:
    """One row of the list: a cell, the coders' values as shown, and what the adjudicator wrote."""

    unit: str
    variable: str
    kind: str
    values: Mapping[str, str]
    decision: str | None = None
    note: str | None = None
    adjudicator: str | None = None
    reason: str | None = None

    @property
    def key(self) -> str:
        return f"{self.unit}{KEY_SEPARATOR}{self.variable}"

    @property
    def decided(self) -> bool:
        return bool(self.decision and str(self.decision).strip())

    def to_dict(self) -> dict[str, Any]:
        return {
            "unit": self.unit,
            "variable": self.variable,
            "kind": self.kind,
            "values": dict(self.values),
            "decision": self.decision,
            "note": self.note,
            "adjudicator": self.adjudicator,
            "reason": self.reason,
        }


@dataclass(frozen=True)
class Adjudication:
    """The adjudication list: open and decided rows, and rows that are no longer needed."""

    codebook: Codebook
    coders: tuple[str, ...]
    rows: tuple[AdjudicationRow, ...]
    retired: tuple[AdjudicationRow, ...] = ()
    text_columns: tuple[str, ...] = ()
    narratives: Mapping[str, Mapping[str, str]] = field(default_factory=dict, repr=False)
    problems: Problems = field(default_factory=Problems)
    kept: int = 0
    added: int = 0
    moved: int = 0

    def summary(self) -> pd.DataFrame:
        """Per variable (codebook order): disagreements, decided, open, no longer needed.

        Only valid decisions count as decided; a cell with an invalid decision is still open.
        """
        out = []
        for var in self.codebook.variables:
            rows = [r for r in self.rows if r.variable == var.name]
            # A decision that is not a valid value (a bad-decision problem) leaves the cell open.
            decided = sum(r.decided and parse_decision(var, r.decision)[1] is None for r in rows)
            out.append(
                {
                    "variable": var.name,
                    "disagreements": len(rows),
                    "decided": decided,
                    "open": len(rows) - decided,
                    "no longer needed": sum(r.variable == var.name for r in self.retired),
                }
            )
        return pd.DataFrame(
            out, columns=["variable", "disagreements", "decided", "open", "no longer needed"]
        )

    def to_frame(self) -> pd.DataFrame:
        """The list as one table (both sheets; ``list`` tells which), without narrative text."""
        return rows_frame(self.rows, self.retired, self.coders, text_columns=())

    def to_dict(self) -> dict[str, Any]:
        summary = self.summary()
        return {
            "codebook": {"title": self.codebook.title, "version": self.codebook.version},
            "coders": list(self.coders),
            "disagreements": len(self.rows),
            "decided": int(summary["decided"].sum()),
            "open": int(summary["open"].sum()),
            "no_longer_needed": len(self.retired),
            "kept": self.kept,
            "added": self.added,
            "moved": self.moved,
            "per_variable": summary.to_dict(orient="records"),
            "rows": [r.to_dict() for r in self.rows],
            **self.problems.to_dict(),
        }


def _first_texts(codings: Codings) -> tuple[tuple[str, ...], dict[str, dict[str, str]]]:
    """Per unit, the first coder's text in each text column (coders in order of appearance)."""
    texts = codings.texts
    if texts is None or texts.empty:
        return (), {}
    order = {c: i for i, c in enumerate(codings.coders)}
    columns = list(dict.fromkeys(texts["column"]))
    out: dict[str, dict[str, tuple[int, str]]] = {}
    for unit, coder, column, text in zip(
        texts["unit"], texts["coder"], texts["column"], texts["text"], strict=True
    ):
        if text is None or (isinstance(text, float) and math.isnan(text)) or str(text) == "":
            continue
        rank = order.get(coder, len(order))
        slot = out.setdefault(str(unit), {})
        if column not in slot or rank < slot[column][0]:
            slot[column] = (rank, str(text))
    return tuple(columns), {u: {c: t for c, (_, t) in d.items()} for u, d in out.items()}


def disagreements(codings: Codings) -> list[AdjudicationRow]:
    """Rows for every cell that needs a decision, sorted by unit then codebook variable order."""
    cb = codings.codebook
    var_order = {name: i for i, name in enumerate(cb.names)}
    rows = []
    for (unit, name), tokens in cell_tokens(codings).items():
        kind = classify(tokens)
        if kind is None:
            continue
        var = cb.variable(name)
        values = {coder: display_token(var, tok) for coder, tok in tokens.items()}
        rows.append(AdjudicationRow(unit=unit, variable=name, kind=kind, values=values))
    rows.sort(key=lambda r: (unit_sort_key(r.unit), r.unit, var_order[r.variable]))
    return rows


def build_adjudication(
    codings: Codings, previous: Adjudication | str | os.PathLike[str] | None = None
) -> Adjudication:
    """Build the adjudication list, keeping the decisions of a previous list.

    Parameters
    ----------
    codings
        The coders' current codings.
    previous
        An earlier list (object or path of an earlier ``adjudicate`` output). Its decisions are
        kept by unit and variable; rows no longer disagreeing move to ``retired``; rows already
        retired stay retired unless they disagree again, in which case they return with their
        decision. Nothing is dropped.
    """
    current = disagreements(codings)
    columns, narratives = _first_texts(codings)
    if previous is not None and not isinstance(previous, Adjudication):
        previous = read_adjudication(previous, codings.codebook)
    old_rows: dict[str, AdjudicationRow] = {}
    old_retired: dict[str, AdjudicationRow] = {}
    problems = Problems()
    if previous is not None:
        old_rows = {r.key: r for r in previous.rows}
        old_retired = {r.key: r for r in previous.retired}
        problems.extend(previous.problems)
    rows: list[AdjudicationRow] = []
    kept = added = 0
    changed: list[int] = []
    for row in current:
        old = old_rows.get(row.key) or old_retired.get(row.key)
        if old is not None:
            kept += 1
            if old.decided and {c: v for c, v in old.values.items() if v} != dict(row.values):
                changed.append(len(rows))
            row = AdjudicationRow(
                unit=row.unit,
                variable=row.variable,
                kind=row.kind,
                values=row.values,
                decision=old.decision,
                note=old.note,
                adjudicator=old.adjudicator,
            )
        else:
            added += 1
        rows.append(row)
    now_keys = {r.key for r in rows}
    units_now = set(codings.units)
    retired: list[AdjudicationRow] = [r for k, r in old_retired.items() if k not in now_keys]
    moved = 0
    for key, old in old_rows.items():
        if key in now_keys:
            continue
        moved += 1
        reason = "coders now agree" if old.unit in units_now else "unit no longer in the data"
        retired.append(
            AdjudicationRow(
                unit=old.unit,
                variable=old.variable,
                kind=old.kind,
                values=old.values,
                decision=old.decision,
                note=old.note,
                adjudicator=old.adjudicator,
                reason=reason,
            )
        )
    var_order = {name: i for i, name in enumerate(codings.codebook.names)}
    retired.sort(
        key=lambda r: (unit_sort_key(r.unit), r.unit, var_order.get(r.variable, len(var_order)))
    )
    adjudication = Adjudication(
        codebook=codings.codebook,
        coders=tuple(codings.coders),
        rows=tuple(rows),
        retired=tuple(retired),
        text_columns=columns,
        narratives=narratives,
        problems=problems,
        kept=kept if previous is not None else 0,
        added=added,
        moved=moved,
    )
    problems.extend(check_decisions(adjudication))
    problems.extend(_changed_since_decision(adjudication, changed))
    return adjudication


def _changed_since_decision(adjudication: Adjudication, indexes: Sequence[int]) -> Problems:
    """``stale-decision`` warnings for kept decisions whose coders' values have changed."""
    problems = Problems()
    headers = main_columns(adjudication.coders, adjudication.text_columns)
    col = _letter(headers.index("decision") + 1)
    for i in indexes:
        row = adjudication.rows[i]
        problems.add(
            "stale-decision",
            "the coders' values changed since this decision was made; it is kept, check it",
            hint="read the coders' new values on the list; change the decision if it no longer "
            "holds",
            sheet=MAIN_SHEET,
            cell=f"{col}{i + 2}",
            unit=row.unit,
            variable=row.variable,
        )
    return problems


def check_decisions(adjudication: Adjudication, file: str | None = None) -> Problems:
    """``bad-decision`` problems for decisions on the main list that are not valid.

    Cell references follow the layout :func:`write_adjudication` gives the list (header in row 1);
    ``file`` names the list, and a ``.csv`` file has no sheet.
    """
    problems = Problems()
    cb = adjudication.codebook
    sheet = None if file is not None and file.lower().endswith(".csv") else MAIN_SHEET
    headers = main_columns(adjudication.coders, adjudication.text_columns)
    col = _letter(headers.index("decision") + 1)
    for i, row in enumerate(adjudication.rows, start=2):
        if not row.decided:
            continue
        if row.variable not in cb:
            problems.add(
                "bad-decision",
                "a decision for a variable the codebook lacks",
                file=file,
                sheet=sheet,
                cell=f"{col}{i}",
                unit=row.unit,
                variable=row.variable,
            )
            continue
        _, reason = parse_decision(cb.variable(row.variable), row.decision)
        if reason is not None:
            problems.add(
                "bad-decision",
                f"the decision is not valid for {row.variable!r}: {reason}",
                file=file,
                sheet=sheet,
                cell=f"{col}{i}",
                unit=row.unit,
                variable=row.variable,
                hint=_hint(cb.variable(row.variable)),
            )
    return problems


def _hint(var: Variable) -> str:
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


# ---- tables --------------------------------------------------------------------------------
def coder_column(coder: str) -> str:
    """The column of a coder: the coder's name, unless it is one of the fixed column names."""
    return f"{coder} (coder)" if coder in FIXED_COLUMNS else coder


def main_columns(coders: Sequence[str], text_columns: Sequence[str]) -> list[str]:
    return [
        "unit",
        "variable",
        "kind",
        *[coder_column(c) for c in coders],
        *text_columns,
        "decision",
        "note",
        "adjudicator",
        "key",
    ]


def retired_columns(coders: Sequence[str]) -> list[str]:
    return [
        "unit",
        "variable",
        "kind",
        *[coder_column(c) for c in coders],
        "decision",
        "note",
        "adjudicator",
        "reason",
        "key",
    ]


def _row_record(
    row: AdjudicationRow, coders: Sequence[str], texts: Mapping[str, str] | None = None
) -> dict[str, Any]:
    record: dict[str, Any] = {"unit": row.unit, "variable": row.variable, "kind": row.kind}
    for c in coders:
        record[coder_column(c)] = row.values.get(c, "")
    for column, text in (texts or {}).items():
        record[column] = text
    record.update(
        decision=row.decision,
        note=row.note,
        adjudicator=row.adjudicator,
        reason=row.reason,
        key=row.key,
    )
    return record


def retired_coders(adjudication: Adjudication) -> list[str]:
    coders = list(adjudication.coders)
    for r in adjudication.retired:
        coders.extend(c for c in r.values if c not in coders)
    return coders


def rows_frame(
    rows: Sequence[AdjudicationRow],
    retired: Sequence[AdjudicationRow],
    coders: Sequence[str],
    *,
    text_columns: Sequence[str],
    narratives: Mapping[str, Mapping[str, str]] | None = None,
) -> pd.DataFrame:
    """Both lists in one table (the CSV form): main columns plus ``reason`` and ``list``."""
    all_coders = list(coders)
    for r in retired:
        all_coders.extend(c for c in r.values if c not in all_coders)
    columns = main_columns(all_coders, text_columns)
    columns += ["reason", "list"]
    records = []
    for r in rows:
        texts = {c: (narratives or {}).get(r.unit, {}).get(c, "") for c in text_columns}
        records.append({**_row_record(r, all_coders, texts), "list": MAIN_SHEET})
    for r in retired:
        records.append({**_row_record(r, all_coders), "list": RETIRED_SHEET})
    return pd.DataFrame(records, columns=columns)


def _letter(index: int) -> str:
    from openpyxl.utils import get_column_letter

    return get_column_letter(index)


# ---- reading an earlier list ---------------------------------------------------------------
def _clean(value: Any) -> str | None:
    if value is None:
        return None
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if value.is_integer():
            value = int(value)
    text = str(value)
    if text.startswith("'") and text[1:2] in ("=", "+", "-", "@", "\t", "\r"):
        text = text[1:]
    return text if text.strip() else None


def _read_tables(path: Path) -> dict[str, tuple[list[str], list[list[Any]], list[int]]]:
    """Sheets of an adjudication file: name -> (header, rows, spreadsheet row numbers)."""
    if path.suffix.lower() == ".csv":
        try:
            text = path.read_text(encoding="utf-8-sig")
        except (OSError, UnicodeDecodeError) as exc:
            raise InputRefused(f"cannot read {path.name!r} as UTF-8 CSV") from exc
        # A list edited in a spreadsheet program may come back with semicolons (or tabs).
        first_line = text.split("\n", 1)[0]
        delimiter = ";" if ";" in first_line and "," not in first_line else ","
        if "\t" in first_line and "," not in first_line and ";" not in first_line:
            delimiter = "\t"
        reader = list(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter))
        if not reader:
            return {MAIN_SHEET: ([], [], [])}
        header, body = reader[0], reader[1:]
        lists: dict[str, tuple[list[str], list[list[Any]], list[int]]] = {}
        list_col = header.index("list") if "list" in header else None
        for n, row in enumerate(body, start=2):
            name = row[list_col] if list_col is not None and list_col < len(row) else MAIN_SHEET
            name = name if name in (MAIN_SHEET, RETIRED_SHEET) else MAIN_SHEET
            entry = lists.setdefault(name, (header, [], []))
            entry[1].append(row)
            entry[2].append(n)
        lists.setdefault(MAIN_SHEET, (header, [], []))
        return lists
    if path.suffix.lower() != ".xlsx":
        raise InputRefused(f"{path.name!r}: an adjudication file is .xlsx or .csv")
    from openpyxl import load_workbook

    try:
        wb = load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:
        raise InputRefused(f"cannot open {path.name!r} as a workbook") from exc
    out: dict[str, tuple[list[str], list[list[Any]], list[int]]] = {}
    try:
        for name in (MAIN_SHEET, RETIRED_SHEET, ABOUT_SHEET):
            if name not in wb.sheetnames:
                continue
            it = wb[name].iter_rows(values_only=True)
            header = [str(h) if h is not None else "" for h in next(it, ())]
            rows, numbers = [], []
            for n, values in enumerate(it, start=2):
                if values is None or all(v is None for v in values):
                    continue
                rows.append(list(values))
                numbers.append(n)
            out[name] = (header, rows, numbers)
    finally:
        wb.close()
    if MAIN_SHEET not in out:
        raise InputRefused(
            f"{path.name!r} has no sheet {MAIN_SHEET!r}: not an adjudication list (if it is one, "
            f"name its main sheet {MAIN_SHEET!r} again; nothing was written)"
        )
    return out


def _coder_columns(
    header: list[str], known_text: set[str], coders: set[str] | None = None
) -> list[tuple[int, str]]:
    """(column index, coder name) of every coder column of a list's header.

    ``coders``: the coders the list was written for (its ``about`` sheet); a column of another
    name is then one the adjudicator added, not a coder.
    """
    out = [
        (i, h[: -len(" (coder)")] if h.endswith(" (coder)") else h)
        for i, h in enumerate(header)
        if h and h not in FIXED_COLUMNS and h not in known_text
    ]
    return out if coders is None else [(i, c) for i, c in out if c in coders]


def _about_coders(tables: Mapping[str, Any]) -> set[str] | None:
    """The coders named on a list's ``about`` sheet (None for a list without one, as a CSV)."""
    if ABOUT_SHEET not in tables:
        return None
    names = {str(row[1]) for row in tables[ABOUT_SHEET][1] if len(row) >= 2 and row[0] == "coder"}
    return names or None


def _added_columns(tables: Mapping[str, Any], codebook: Codebook) -> list[str]:
    """Columns the adjudicator added to the main list that hold something (not kept on rewrite)."""
    coders = _about_coders(tables)
    if coders is None:
        return []
    header, body, _ = tables[MAIN_SHEET]
    extra = [
        (i, header[i])
        for i, c in _coder_columns(header, _known_text(tables, codebook))
        if c not in coders
    ]
    return [h for i, h in extra if any(i < len(r) and _clean(r[i]) for r in body)]


def _known_text(tables: Mapping[str, Any], codebook: Codebook) -> set[str]:
    """Text columns of a list: the codebook's, and those named on its ``about`` sheet."""
    known = set(codebook.text_columns)
    if ABOUT_SHEET in tables:
        for row in tables[ABOUT_SHEET][1]:
            if len(row) >= 2 and row[0] == "text column" and row[1]:
                known.add(str(row[1]))
    return known


def _rows_from(
    header: list[str],
    body: list[list[Any]],
    known_text: set[str],
    coders: set[str] | None = None,
) -> list[AdjudicationRow]:
    if "unit" not in header or "variable" not in header:
        return []
    coder_cols = _coder_columns(header, known_text, coders)

    def get(row: list[Any], name: str) -> str | None:
        if name not in header:
            return None
        i = header.index(name)
        return _clean(row[i]) if i < len(row) else None

    out = []
    for row in body:
        unit, variable = get(row, "unit"), get(row, "variable")
        if unit is None or variable is None:
            continue
        values = {c: (_clean(row[i]) or "") for i, c in coder_cols if i < len(row)}
        out.append(
            AdjudicationRow(
                unit=unit,
                variable=variable,
                kind=get(row, "kind") or "",
                values=values,
                decision=get(row, "decision"),
                note=get(row, "note"),
                adjudicator=get(row, "adjudicator"),
                reason=get(row, "reason"),
            )
        )
    return out


def read_adjudication(path: str | os.PathLike[str], codebook: Codebook) -> Adjudication:
    """Read an earlier adjudication list (xlsx or csv) with its decisions, as an object."""
    path = Path(path)
    tables = _read_tables(path)
    known_text = _known_text(tables, codebook)
    header, body, _ = tables[MAIN_SHEET]
    if body and not {"unit", "variable", "decision"} <= set(header):
        # Rows we cannot read: treating the file as empty would write over its decisions.
        raise InputRefused(
            f"{path.name!r} holds rows but no unit, variable and decision columns, so its "
            "decisions cannot be read; nothing was written - restore the header row or choose "
            "another output"
        )
    added = _added_columns(tables, codebook)
    if added:
        raise InputRefused(
            f"{path.name!r} has column(s) coderel does not keep when it writes the list again: "
            f"{', '.join(map(repr, added))}; move their content to the 'note' column (or delete "
            "them) and run again; nothing was written"
        )
    coders = _about_coders(tables)
    rows = _rows_from(header, body, known_text, coders)
    retired: list[AdjudicationRow] = []
    if RETIRED_SHEET in tables:
        rh, rb, _ = tables[RETIRED_SHEET]
        retired = _rows_from(rh, rb, known_text)  # may hold coders no longer in the data
    coders = [c for r in rows for c in r.values]
    return Adjudication(
        codebook=codebook,
        coders=tuple(dict.fromkeys(coders)),
        rows=tuple(rows),
        retired=tuple(retired),
    )


def read_decisions(path: str | os.PathLike[str], codebook: Codebook) -> Decisions:
    """Read the decisions of an adjudication list (sheet ``to decide`` of xlsx, or csv).

    Every filled ``decision`` cell is parsed for its variable; an invalid one becomes a
    ``bad-decision`` problem with its cell reference (``H14``) and is left out.
    """
    path = Path(path)
    tables = _read_tables(path)
    header, body, numbers = tables[MAIN_SHEET]
    problems = Problems()
    decisions: dict[tuple[str, str], Decision] = {}
    if "decision" not in header or "unit" not in header or "variable" not in header:
        problems.add(
            "bad-decision",
            "the list has no unit, variable or decision column",
            file=path.name,
            sheet=MAIN_SHEET if path.suffix.lower() == ".xlsx" else None,
            cell="A1",
        )
        source = SourceFile(str(path), sha256_file(path), path.stat().st_size)
        return Decisions({}, problems, source)
    icol = {name: header.index(name) for name in header if name}
    coder_cols = _coder_columns(header, _known_text(tables, codebook), _about_coders(tables))
    dcol = _letter(icol["decision"] + 1)
    sheet = MAIN_SHEET if path.suffix.lower() == ".xlsx" else None

    def get(row: list[Any], name: str) -> Any:
        i = icol.get(name)
        return row[i] if i is not None and i < len(row) else None

    for row, number in zip(body, numbers, strict=True):
        unit, variable = _clean(get(row, "unit")), _clean(get(row, "variable"))
        raw = get(row, "decision")
        text = _clean(raw)
        if unit is None or variable is None or text is None:
            continue
        place = {"file": path.name, "sheet": sheet, "cell": f"{dcol}{number}"}
        if variable not in codebook:
            problems.add(
                "bad-decision",
                "a decision for a variable the codebook lacks",
                unit=unit,
                variable=variable,
                **place,
            )
            continue
        var = codebook.variable(variable)
        token, reason = parse_decision(var, raw if not isinstance(raw, str) else text)
        if token is None:
            problems.add(
                "bad-decision",
                f"the decision is not valid for {variable!r}: {reason}",
                unit=unit,
                variable=variable,
                hint=_hint(var),
                **place,
            )
            continue
        if (unit, variable) in decisions:
            problems.add(
                "bad-decision",
                "a second decision for the same unit and variable (the first one is used)",
                unit=unit,
                variable=variable,
                **place,
            )
            continue
        decisions[(unit, variable)] = Decision(
            value=token[1],
            token=token,
            text=text,
            adjudicator=_clean(get(row, "adjudicator")),
            note=_clean(get(row, "note")),
            cell=place["cell"],
            values={c: (_clean(row[i]) or "") for i, c in coder_cols if i < len(row)},
        )
    source = SourceFile(str(path), sha256_file(path), path.stat().st_size)
    return Decisions(decisions, problems, source)


# ---- writing the list ----------------------------------------------------------------------
_GROUP_FILL = "EEF2F7"


def _choices(var: Variable) -> list[str]:
    """Dropdown entries of a variable: ``code = label`` of categories, missing codes, n/a."""
    entries = [var.display(c) for c in var.codes] + [var.display(m) for m in var.missing_codes]
    if var.applies_when is not None:
        entries.append(NOT_APPLICABLE)
    return entries


def _input_message(var: Variable) -> str:
    return _hint(var)[:250]


def write_adjudication(adjudication: Adjudication, path: str | os.PathLike[str]) -> None:
    """Write the list as ``.xlsx`` (sheets, dropdowns, protection) or ``.csv``, atomically."""
    from coderel.io.tables import table_format, write_csv

    form = table_format(path)
    if form == "csv":
        write_csv(
            rows_frame(
                adjudication.rows,
                adjudication.retired,
                adjudication.coders,
                text_columns=adjudication.text_columns,
                narratives=adjudication.narratives,
            ),
            path,
        )
        return
    if form != "xlsx":
        from coderel.errors import UsageError

        raise UsageError("the adjudication list is written as .xlsx or .csv")
    _write_workbook(adjudication, path)


def _write_workbook(adj: Adjudication, path: str | os.PathLike[str]) -> None:
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font, PatternFill, Protection
    from openpyxl.worksheet.datavalidation import DataValidation

    from coderel.io.tables import cell_value, fill_sheet, save_workbook

    cb = adj.codebook
    wb = Workbook()
    ws = wb.active
    ws.title = MAIN_SHEET
    headers = main_columns(adj.coders, adj.text_columns)
    ws.append(headers)
    for cell in ws[1]:
        cell.font = Font(bold=True)
    editable = {headers.index(n) + 1 for n in ("decision", "note", "adjudicator")}
    text_idx = {headers.index(c) + 1 for c in adj.text_columns}
    fill = PatternFill("solid", start_color=_GROUP_FILL, end_color=_GROUP_FILL)
    shade, last_unit = False, None
    ranges: dict[str, list[str]] = {}
    dcol = _letter(headers.index("decision") + 1)
    for i, row in enumerate(adj.rows, start=2):
        texts = {c: adj.narratives.get(row.unit, {}).get(c, "") for c in adj.text_columns}
        record = _row_record(row, adj.coders, texts)
        ws.append([cell_value(record.get(h)) for h in headers])
        if row.unit != last_unit:
            shade, last_unit = (not shade), row.unit
        for j, cell in enumerate(ws[i], start=1):
            if j in editable:
                cell.protection = Protection(locked=False)
            if j in text_idx:
                cell.alignment = Alignment(wrap_text=True, vertical="top")
            if shade:
                cell.fill = fill
        ranges.setdefault(row.variable, []).append(f"{dcol}{i}")
    widths = {"unit": 12, "variable": 20, "kind": 14, "decision": 30, "note": 30}
    widths.update({"adjudicator": 16, "key": 24})
    for j, h in enumerate(headers, start=1):
        default = 60 if j in text_idx else 26
        ws.column_dimensions[_letter(j)].width = widths.get(h, default)
    ws.column_dimensions[_letter(headers.index("key") + 1)].hidden = True
    ws.freeze_panes = "D2"
    if adj.rows:
        ws.auto_filter.ref = f"A1:{_letter(len(headers))}{len(adj.rows) + 1}"

    # dropdown lists live on a hidden sheet (a literal list is limited to 255 characters)
    lists = wb.create_sheet(LISTS_SHEET)
    list_col = 0
    for var in cb.variables:
        if var.name not in ranges:
            continue
        if var.is_categorical and not var.multiple:
            list_col += 1
            letter = _letter(list_col)
            lists.cell(row=1, column=list_col, value=var.name)
            entries = _choices(var)
            for r, entry in enumerate(entries, start=2):
                lists.cell(row=r, column=list_col, value=cell_value(entry))
            dv = DataValidation(
                type="list",
                formula1=f"'{LISTS_SHEET}'!${letter}$2:${letter}${len(entries) + 1}",
                allow_blank=True,
                errorStyle="warning",
                showErrorMessage=True,
                error=_input_message(var),
                errorTitle="not a code of this variable",
            )
        else:
            dv = DataValidation(type=None, allow_blank=True)
        dv.promptTitle = var.name[:32]
        dv.prompt = _input_message(var)
        dv.showInputMessage = True
        for ref in ranges[var.name]:
            dv.add(ref)
        ws.add_data_validation(dv)
    lists.sheet_state = "hidden"

    ws.protection.sheet = True
    ws.protection.autoFilter = False
    ws.protection.sort = False
    ws.protection.formatColumns = False
    ws.protection.formatRows = False

    summary = adj.summary()
    fill_sheet(wb.create_sheet(SUMMARY_SHEET), summary, width=30)

    retired_ws = wb.create_sheet(RETIRED_SHEET)
    rcoders = retired_coders(adj)
    rcols = retired_columns(rcoders)
    frame = pd.DataFrame([_row_record(r, rcoders) for r in adj.retired], columns=rcols)
    fill_sheet(retired_ws, frame, width=40)

    about = pd.DataFrame(
        [
            ("codebook", cb.title),
            ("codebook version", cb.version),
            *[("coder", c) for c in adj.coders],
            *[("text column", c) for c in adj.text_columns],
            ("how to decide", "fill 'decision' with a code, 'code = label', a label, "),
            ("", f"several codes as 1;3 (multi-select), a missing code, or {NOT_APPLICABLE!r}"),
            ("", "decisions are kept when the list is made again (matched by unit|variable)"),
        ],
        columns=["item", "value"],
    )
    fill_sheet(wb.create_sheet(ABOUT_SHEET), about, width=80)
    save_workbook(wb, path)
