"""The one internal table of codings, in long form: (unit, coder, variable) -> value.

Every reader produces a :class:`Codings`; every later step (validation summary, agreement,
adjudication, merge, report) reads only this table. Columns of :attr:`Codings.frame`:

``unit`` (text, categorical)
    Unit ID as text, spaces stripped.
``coder`` (text, categorical)
    Coder name (file stem, sheet name, or the ``coder`` column).
``variable`` (text, categorical)
    Variable name from the codebook.

These three are pandas categoricals whose categories are the names in use, in text order: one
small integer per row and each name once (millions of labels name a few thousand units), while
each element is still a ``str``, and sorting or grouping by the column follows the text.
``value`` (object)
    The normalised value, or ``None`` when the cell is blank, holds a missing code, or is invalid:
    a category code (``int`` or ``str``, exactly as in the codebook) for single-choice variables;
    a ``tuple`` of codes in codebook order for multi-select variables; a ``float`` for interval and
    ratio variables.
``missing`` (object)
    The missing code given (``99``), else ``None``.
``applies`` (object)
    ``True``/``False`` from the variable's ``applies_when`` condition evaluated on the same coder's
    value of the condition variable; ``None`` when that value is blank or missing. Always ``True``
    for variables without a condition.
``file``, ``sheet`` (str or None), ``cell`` (text or NA)
    Where the value came from, e.g. ``coder_a.xlsx``, ``Sheet1``, ``C14``. ``cell`` is a pyarrow
    text column (a few bytes per row, not a Python string each); a row without a cell (a variable
    the coder did not give) holds ``NA`` there (:func:`none_for_na` gives ``None``).

A coder's second coding occasion (test-retest) is kept apart in :attr:`Codings.occasions`: the
same columns plus ``occasion`` (its label) and ``first_occasion`` (the label of the first, ``""``
when it had none); agreement between coders never sees it.

A coder who skipped a unit has no rows for it; a unit row with a blank cell has a row whose
``value`` is ``None``. Narrative text columns are kept apart in :attr:`Codings.texts` (unit, coder,
column, text) and never appear in messages or logs.
"""

from __future__ import annotations

import contextlib
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook import Codebook, Variable
from coderel.problems import Problems

CODING_COLUMNS: tuple[str, ...] = (
    "unit",
    "coder",
    "variable",
    "value",
    "missing",
    "applies",
    "file",
    "sheet",
    "cell",
)
TEXT_COLUMNS: tuple[str, ...] = ("unit", "coder", "column", "text")
OCCASION_COLUMNS: tuple[str, ...] = (*CODING_COLUMNS, "occasion", "first_occasion")
_DIGITS = re.compile(r"(\d+)")


def natural_key(text: str) -> tuple[tuple[str | tuple[int, str], ...], str]:
    """Sort key of a unit ID or coder name in natural order: ``u2`` before ``u10``.

    Runs of digits compare as numbers, the rest without regard to case; the text itself breaks
    ties (``u01`` and ``u1``), so the order is total and never depends on input order.

    >>> sorted(["u10", "U2", "u1", "u01", "b"], key=natural_key)
    ['b', 'u01', 'u1', 'U2', 'u10']
    """
    parts = _DIGITS.split(text)
    # a run of digits as (length, digits) without leading zeros: numeric order for any length
    # (int() refuses more than 4,300 digits, and an ID may hold more)
    return tuple(_number_key(p) if i % 2 else p.casefold() for i, p in enumerate(parts)), text


def _number_key(digits: str) -> tuple[int, str]:
    significant = digits.lstrip("0")
    return len(significant), significant


def natural_order(names: Iterable[Any]) -> list[str]:
    """Distinct names as text, in :func:`natural_key` order."""
    distinct = list({str(n) for n in names})
    fast = _natural_prefix_number(distinct)
    return fast if fast is not None else sorted(distinct, key=natural_key)


def _natural_prefix_number(texts: list[str]) -> list[str] | None:
    """:func:`natural_key` order of many IDs that are all text and one number at the end
    (``u17``, ``ENC-0042``, ``310``), by pyarrow's sort on columns instead of a Python key per
    ID; None when some ID has another shape (or for few IDs: the key is then cheap enough).

    The columns are :func:`natural_key`'s parts: the text before the number without regard to
    case (ranked in Python, one per distinct text), the number's significant digits (their count,
    then their value), then the ID itself (UTF-8 byte order is code point order)."""
    if len(texts) < 1000:
        return None
    import pyarrow as pa
    import pyarrow.compute as pc

    ids = pa.array(texts, pa.string())
    if pc.any(pc.match_substring(ids, "\x00")).as_py():
        return None
    # RE2: \p{Nd} is every decimal digit, as Python's \d; the number itself in ASCII digits
    parts = pc.extract_regex(ids, r"^(?P<before>\P{Nd}*)(?P<digits>[0-9]+)$")
    if parts.null_count:
        return None
    before = parts.field("before").dictionary_encode()
    folded = [str(b).casefold() for b in before.dictionary.to_pylist()]
    rank_of = {f: i for i, f in enumerate(sorted(set(folded)))}
    prefix = np.array([rank_of[f] for f in folded], dtype=np.int64)[
        before.indices.to_numpy(zero_copy_only=False)
    ]
    digits = pc.utf8_ltrim(parts.field("digits"), characters="0")
    length = pc.utf8_length(digits)
    if pc.max(length).as_py() > 18:
        return None
    number = pc.cast(pc.if_else(pc.equal(length, 0), "0", digits), pa.int64())
    table = pa.table({"p": prefix, "l": length, "n": number, "t": ids})
    order = pc.sort_indices(table, sort_keys=[(c, "ascending") for c in "plnt"])
    return [texts[i] for i in order.to_numpy()]


@dataclass(frozen=True, slots=True)
class SourceFile:
    """An input file with its SHA-256, for provenance and reproducibility blocks."""

    path: str
    sha256: str
    size: int


@dataclass(frozen=True)
class Codings:
    """All codings of one project, in long form, with the problems found while reading them."""

    codebook: Codebook
    frame: pd.DataFrame
    texts: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=list(TEXT_COLUMNS)))
    problems: Problems = field(default_factory=Problems)
    sources: tuple[SourceFile, ...] = ()
    occasions: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame(columns=list(OCCASION_COLUMNS))
    )

    @classmethod
    def from_records(
        cls,
        codebook: Codebook,
        records: Sequence[dict[str, Any]] | pd.DataFrame,
        *,
        texts: pd.DataFrame | None = None,
        problems: Problems | None = None,
        sources: Sequence[SourceFile] = (),
        occasions: pd.DataFrame | None = None,
    ) -> Codings:
        """Build from rows holding at least unit, coder, variable, value (already normalised).

        Missing provenance columns are filled with ``None``; ``applies`` is computed from the
        codebook's conditions when absent.
        """
        source = (
            records
            if isinstance(records, pd.DataFrame)
            else pd.DataFrame(list(records), dtype=object)
        )
        for col in ("unit", "coder", "variable", "value"):
            if col not in source.columns:
                raise ValueError(f"codings need a {col!r} column")
        n = len(source)
        columns: dict[str, Any] = {}
        for col in ("unit", "coder", "variable"):
            columns[col] = text_category(source[col])
        # Object arrays keep ``None`` as ``None`` (a plain list of numbers and ``None`` would be
        # inferred as float with NaN).
        for col in ("value", "missing"):
            columns[col] = _none_for_na(source[col]) if col in source.columns else _nones(n)
        columns["applies"] = (
            source["applies"].to_numpy(copy=True) if "applies" in source.columns else None
        )
        for col in ("file", "sheet"):
            columns[col] = _none_for_na(source[col]) if col in source.columns else _nones(n)
        columns["cell"] = cell_text(source["cell"] if "cell" in source.columns else _nones(n))
        index = pd.RangeIndex(n)
        frame = pd.DataFrame(
            {
                k: v if k in ("unit", "coder", "variable", "cell") else _objects(v, index)
                for k, v in columns.items()
                if k != "applies"
            },
            index=index,
            copy=False,
        )
        if columns["applies"] is None:
            applies = pd.Series(applicability(codebook, frame), index=index, dtype=object)
        elif columns["applies"].dtype == bool:
            applies = pd.Series(columns["applies"], index=index, copy=False)
        else:
            applies = _objects(columns["applies"], index)
        frame.insert(CODING_COLUMNS.index("applies"), "applies", applies)
        return cls(
            codebook=codebook,
            frame=frame,
            texts=texts if texts is not None else pd.DataFrame(columns=list(TEXT_COLUMNS)),
            problems=problems if problems is not None else Problems(),
            sources=tuple(sources),
            occasions=(
                occasions.reindex(columns=list(OCCASION_COLUMNS)).reset_index(drop=True)
                if occasions is not None
                else pd.DataFrame(columns=list(OCCASION_COLUMNS))
            ),
        )

    @property
    def coders(self) -> list[str]:
        """Coder names in natural order (:func:`natural_key`), whatever the order of the input."""
        return natural_order(pd.unique(self.frame["coder"]))

    @property
    def units(self) -> list[str]:
        """Unit IDs in natural order (:func:`natural_key`), whatever the order of files and rows.

        This is the one unit index of the project: the rows of every agreement matrix and the
        columns of the bootstrap's unit weights follow it, so intervals never depend on the order
        in which units first appear.
        """
        return natural_order(pd.unique(self.frame["unit"]))

    def restricted_to(self, units: Sequence[str]) -> Codings:
        """The codings of the listed units only (e.g. the reliability sample of ``assign``);
        texts, problems and sources are kept."""
        keep = self.frame["unit"].isin(set(map(str, units)))
        return replace(self, frame=self.frame[keep].reset_index(drop=True))

    def single_coded_units(self) -> int:
        """How many units only one coder coded (agreement needs two or more values per unit, so
        these units are left out of it; ``merge`` marks their cells ``single``)."""
        if not len(self.frame):
            return 0
        return int((self.frame.groupby("unit")["coder"].nunique() == 1).sum())

    def for_variable(self, name: str) -> pd.DataFrame:
        """Rows of one variable."""
        return self.frame[self.frame["variable"] == name]

    def wide(self, name: str) -> pd.DataFrame:
        """One variable as a units x coders table of values (``None`` where blank or not coded)."""
        sub = self.for_variable(name)
        table = sub.pivot(index="unit", columns="coder", values="value")
        table = table.reindex(index=self.units, columns=self.coders)
        return table.astype(object).where(table.notna(), None)


def _is_na(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, float) and value != value:  # NaN
        return True
    return value is pd.NA


def condition_holds(condition_variable: Variable, value: Any, includes: Sequence[Any]) -> bool:
    """Does a coder's value of the condition variable satisfy ``includes``?"""
    if condition_variable.multiple:
        return any(code in includes for code in value)
    return value in includes


def text_category(column: pd.Series | pd.Categorical) -> pd.Categorical:
    """A column of IDs or names as text, categorical: one small integer per row and each name
    once, the categories in text order (so that sorting and grouping by the column give the order
    of the text itself) and only those in use."""
    if isinstance(getattr(column, "dtype", None), pd.CategoricalDtype):
        cat = pd.Categorical(column)
        codes = cat.codes
        used = np.bincount(codes[codes >= 0].astype(np.int64), minlength=len(cat.categories))
        if not used.all():
            cat = cat.remove_unused_categories()
        names = cat.categories
        if (names.inferred_type == "string" or not len(names)) and (cat.codes >= 0).all():
            texts = [str(n) for n in names]
            order = sorted(range(len(texts)), key=texts.__getitem__)
            if len(set(texts)) == len(texts):
                return pd.Categorical.from_codes(
                    np.argsort(order)[cat.codes] if len(order) else cat.codes,
                    categories=pd.Index([texts[i] for i in order], dtype=str),
                )
        column = pd.Series(cat).astype(object)
    texts = pd.Series(column, copy=False).astype(str)
    return pd.Categorical(texts, categories=pd.Index(sorted(pd.unique(texts)), dtype=str))


def cell_text(column: pd.Series | np.ndarray) -> pd.Series:
    """A column of cell references as compact text (pyarrow), ``NA`` where there is none."""
    kind = pd.StringDtype("pyarrow")
    series = pd.Series(column, copy=False)
    if series.dtype == kind:
        return series.reset_index(drop=True)
    return series.astype(object).where(series.notna(), None).astype(kind).reset_index(drop=True)


def none_for_na(value: Any) -> Any:
    """One cell of a column as a problem or record takes it: ``None`` for a missing one (``NA``
    of a text column, NaN)."""
    return None if _is_na(value) else value


def _objects(values: np.ndarray, index: pd.Index) -> pd.Series:
    """An object column as it is (pandas would otherwise infer text or numbers from it)."""
    return pd.Series(values, index=index, dtype=object, copy=False)


def _nones(n: int) -> np.ndarray:
    return np.full(n, None, dtype=object)


def _none_for_na(column: pd.Series) -> np.ndarray:
    """The column as an object array with ``None`` wherever pandas sees a missing value (None,
    NaN, ``pd.NA``, ``NaT``), with no loop over rows."""
    values = column.to_numpy(dtype=object, copy=True)
    values[pd.isna(values)] = None
    return values


def applicability(codebook: Codebook, frame: pd.DataFrame) -> np.ndarray:
    """Evaluate every row's ``applies_when`` on the same coder's value of the condition variable.

    Returns ``True``/``False`` per row, ``None`` where the condition variable is blank or missing
    for that coder and unit (or the row's variable is not in the codebook), and ``True`` for
    variables without a condition: an object array, or a boolean array of ``True`` when every
    row's variable is in a codebook without conditions. Works on whole columns: the condition is
    evaluated once per distinct value of the condition variable.
    """
    known = frame["variable"].isin(codebook.names).to_numpy()
    conditions = {v.name: v.applies_when for v in codebook.variables if v.applies_when}
    if not conditions and known.all():
        return np.ones(len(known), dtype=bool)
    out = np.full(len(known), None, dtype=object)
    out[known] = True
    var_codes, var_names = pd.factorize(frame["variable"])
    position = {str(n): i for i, n in enumerate(var_names)}
    for name, cond in conditions.items():
        rows = np.flatnonzero(var_codes == position.get(name, -2))
        if not len(rows):
            continue
        source = frame.loc[var_codes == position.get(cond.variable, -2), ["unit", "coder", "value"]]
        source = source.drop_duplicates(["unit", "coder"], keep="last")
        lookup = pd.Series(
            source["value"].to_numpy(dtype=object),
            index=pd.MultiIndex.from_arrays(
                [source["unit"].to_numpy(dtype=object), source["coder"].to_numpy(dtype=object)]
            ),
            dtype=object,
        )
        keys = pd.MultiIndex.from_arrays(
            [
                frame["unit"].iloc[rows].to_numpy(dtype=object),
                frame["coder"].iloc[rows].to_numpy(dtype=object),
            ]
        )
        given = lookup.reindex(keys).to_numpy(dtype=object) if len(lookup) else None
        result = np.full(len(rows), None, dtype=object)
        if given is not None:
            condition_variable = codebook.variable(cond.variable)
            holds: dict[Any, object] = {}
            for i, value in enumerate(given):
                if value is None or _is_na(value):
                    continue
                try:
                    hit = holds.get(value)
                except TypeError:  # unhashable
                    hit = None
                if hit is None:
                    hit = condition_holds(condition_variable, value, cond.includes)
                    with contextlib.suppress(TypeError):
                        holds[value] = hit
                result[i] = hit
        out[rows] = result
    return out
