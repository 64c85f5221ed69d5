"""From the long table to one units x coders matrix of value indices per variable (and per
variable's applicability): the rows to compute."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd

from coderel.agree.conventions import APPLIES_SUFFIX
from coderel.codebook import Codebook, Variable
from coderel.codebook.model import Thresholds
from coderel.codings import Codings
from coderel.stats.plan import Scale


@dataclass(frozen=True)
class Target:
    """One row to compute: a variable, or a variable's applicability."""

    name: str
    label: str
    level: str
    kind: str
    x: np.ndarray
    scale: Scale
    categories: tuple[Any, ...]
    thresholds: Thresholds
    var: Variable
    coders: tuple[str, ...] = ()

    def own(self) -> Target:
        """This row with only the coders who gave it at least one value, its matrix in 64-bit
        value indices (what the statistics take; a row may be stored in smaller integers,
        :func:`compact`).

        A coder with no value for a variable is not a coder of it: which formulas apply (Cohen's
        kappa for two coders, Light's for more) and every coefficient depend only on the coders
        who coded the variable, never on the coders of other variables.
        """
        keep = np.flatnonzero((self.x >= 0).any(axis=0))
        # a copy with each coder's column contiguous: the statistics walk the matrix by coder
        # and coder pair (a crowd design's pair tables take 10 times longer on rows of 20 coders)
        x = np.asfortranarray(self.x[:, keep], dtype=np.int64)
        return replace(self, x=x, coders=tuple(self.coders[i] for i in keep))


@dataclass(frozen=True)
class UnitIndex:
    """Row positions of the long table, factorised once: unit and coder index of every row, the
    rows of each variable, which rows hold a value that counts, and each row's applicability."""

    unit: np.ndarray
    coder: np.ndarray
    rows_of: dict[str, np.ndarray]
    counts: np.ndarray
    known: np.ndarray
    applies: np.ndarray
    values: np.ndarray


def build_index(codings: Codings, coders: list[str], units: list[str]) -> UnitIndex:
    frame = codings.frame
    unit = _positions(frame["unit"], units)
    coder = _positions(frame["coder"], coders)
    var_codes, var_names = _codes(frame["variable"])
    # small integer codes sort by radix (stable); row positions in 32 bits when they fit
    order = np.argsort(var_codes, kind="stable").astype(_row_type(len(frame)), copy=False)
    bounds = np.searchsorted(var_codes[order], np.arange(len(var_names) + 1))
    rows_of = {str(name): order[bounds[i] : bounds[i + 1]] for i, name in enumerate(var_names)}
    del order, var_codes
    is_true, is_false = _true_false(frame["applies"])
    values = frame["value"].to_numpy(dtype=object)
    has_value = ~pd.isna(frame["value"]).to_numpy()
    return UnitIndex(
        unit, coder, rows_of, has_value & ~is_false, is_true | is_false, is_true, values
    )


def canonical_sets(sets: Iterable[frozenset], var: Variable) -> tuple[frozenset, ...]:
    """Distinct code sets of a multi-select variable in one canonical order (by size, then by the
    codebook's order of their codes), whatever the order in which rows arrive."""
    position = {code: i for i, code in enumerate(var.codes)}
    return tuple(
        sorted(
            set(sets),
            key=lambda c: (len(c), sorted(position.get(v, len(position)) for v in c)),
        )
    )


def _row_type(n: int) -> type[np.signedinteger]:
    """The integer type of row (and unit) positions: 32 bits when they fit, else 64."""
    return np.int32 if n < np.iinfo(np.int32).max else np.int64


def _codes(column: pd.Series) -> tuple[np.ndarray, pd.Index]:
    """Each row's code among the column's names (-1: none) and those names: the categorical's own
    codes (no pass over the rows), else factorised."""
    if isinstance(column.dtype, pd.CategoricalDtype):
        return column.cat.codes.to_numpy(), column.cat.categories
    codes, distinct = pd.factorize(column)
    return codes, pd.Index(distinct)


def _positions(column: pd.Series, names: list[str]) -> np.ndarray:
    """Each row's position in ``names`` (-1 where absent), looked up once per distinct name."""
    codes, distinct = _codes(column)
    kind = _row_type(max(len(names), len(codes)))
    if not len(distinct):
        return np.full(len(codes), -1, dtype=kind)
    where = pd.Index(distinct, dtype=object).get_indexer(pd.Index(names, dtype=object))
    position = np.full(len(distinct) + 1, -1, dtype=kind)  # the last: rows without a name
    position[where[where >= 0]] = np.flatnonzero(where >= 0)
    return position[codes]  # code -1 takes the last entry


def _true_false(applies: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Which rows hold ``True`` and which ``False`` (the objects themselves, as ``is`` tells;
    anything else, such as ``None``, is neither), judged once per distinct object."""
    if applies.dtype == bool:
        flags = applies.to_numpy()
        return flags, ~flags
    codes, distinct = pd.factorize(applies.to_numpy(dtype=object), use_na_sentinel=False)
    objects = list(distinct)
    # factorize may fold equal objects of different types (1 and True): those keep a row loop
    if any(type(o) is not bool and o == True for o in objects if o is not None):  # noqa: E712
        arr = applies.to_numpy(dtype=object)
        is_true = np.fromiter((a is True for a in arr), dtype=bool, count=len(arr))
        is_false = np.fromiter((a is False for a in arr), dtype=bool, count=len(arr))
        return is_true, is_false
    true_of = np.array([o is True for o in objects] + [False], dtype=bool)
    false_of = np.array([o is False for o in objects] + [False], dtype=bool)
    return true_of[codes], false_of[codes]


def _distinct(values: np.ndarray) -> tuple[np.ndarray, list[Any]]:
    """Each value's position among the distinct values, and those values (first seen first):
    later steps convert and look up each distinct value once, not each row's."""
    if not len(values):
        return np.empty(0, dtype=np.int64), []
    codes, distinct = pd.factorize(values, use_na_sentinel=False)
    return codes.astype(np.int64, copy=False), list(distinct)


def value_matrix(
    ix: UnitIndex, var: Variable, n_units: int, n_coders: int
) -> tuple[np.ndarray, Scale]:
    """Units x coders value indices over ALL project units (-1: no value), and the scale."""
    rows = ix.rows_of.get(var.name, np.empty(0, dtype=np.int64))
    rows = rows[ix.counts[rows]]
    codes, distinct = _distinct(ix.values[rows])
    if var.is_categorical and not var.multiple:
        domain = {code: i for i, code in enumerate(var.codes)}
        scale = Scale("categorical", var.level, len(domain))
    elif var.multiple:
        distinct = [frozenset(v) for v in distinct]
        # Distinct sets in one canonical order (by the codebook's order of their codes), so the
        # domain never depends on the order in which rows arrive.
        sets = canonical_sets(distinct, var)
        domain = {s: i for i, s in enumerate(sets)}
        scale = Scale("set", "nominal", len(sets), sets=sets)
    else:
        distinct = [float(v) for v in distinct]
        numbers = np.array(sorted(set(distinct)), dtype=float)
        domain = {v: i for i, v in enumerate(numbers.tolist())}
        scale = Scale("numeric", var.level, len(numbers), values=numbers)
    index_of = np.array([domain[v] for v in distinct], dtype=int)
    x = np.full((n_units, n_coders), -1, dtype=int)
    x[ix.unit[rows], ix.coder[rows]] = index_of[codes]
    return x, scale


def applicability_matrix(ix: UnitIndex, var: Variable, n_units: int, n_coders: int) -> np.ndarray:
    """Units x coders: 1 applies, 0 does not apply, -1 unknown (condition not coded)."""
    rows = ix.rows_of.get(var.name, np.empty(0, dtype=np.int64))
    rows = rows[ix.known[rows]]
    x = np.full((n_units, n_coders), -1, dtype=int)
    x[ix.unit[rows], ix.coder[rows]] = ix.applies[rows].astype(int)
    return x


def build_targets(codings: Codings, coders: list[str], units: list[str]) -> list[Target]:
    return targets_from_index(codings.codebook, build_index(codings, coders, units), coders, units)


def compact(x: np.ndarray) -> np.ndarray:
    """Value indices (-1: none) in the smallest signed integer type that holds them: 1 byte per
    cell for up to 127 categories instead of 8. Storage only: the statistics take
    :meth:`Target.own`'s 64-bit indices (their arithmetic on indices is not checked for
    overflow in smaller types)."""
    top = int(x.max()) if x.size else 0
    for kind in (np.int8, np.int16, np.int32):
        if top <= np.iinfo(kind).max:
            return x.astype(kind)
    return x


def targets_from_index(
    cb: Codebook, ix: UnitIndex, coders: list[str], units: list[str], *, stored: bool = False
) -> list[Target]:
    """The rows to compute from the long table's :class:`UnitIndex`; with ``stored`` each
    matrix is kept :func:`compact` as soon as it is made (rows held through a bootstrap)."""
    n_units, n_coders = len(units), len(coders)
    keep = compact if stored else (lambda m: m)
    matrices: dict[str, tuple[np.ndarray, Scale, np.ndarray | None]] = {}
    for var in cb.variables:
        x, scale = value_matrix(ix, var, n_units, n_coders)
        xa = None
        if var.applies_when is not None:
            xa = keep(applicability_matrix(ix, var, n_units, n_coders))
        matrices[var.name] = (keep(x), scale, xa)
    return targets_of(cb, coders, matrices)


def targets_of(
    cb: Codebook,
    coders: list[str],
    matrices: dict[str, tuple[np.ndarray, Scale, np.ndarray | None]],
) -> list[Target]:
    """The rows to compute from each variable's units x coders matrix, scale and (for a variable
    with ``applies_when``) applicability matrix, in codebook order."""
    out: list[Target] = []
    for var in cb.variables:
        x, scale, xa = matrices[var.name]
        cats = tuple(var.codes) if var.is_categorical and not var.multiple else ()
        th = cb.thresholds_for(var.name)
        out.append(
            Target(
                var.name, var.title, var.level, "variable", x, scale, cats, th, var, tuple(coders)
            )
        )
        if var.applies_when is not None and xa is not None:
            out.append(
                Target(
                    var.name + APPLIES_SUFFIX,
                    f"Does '{var.title}' apply?",
                    "nominal",
                    "applicability",
                    xa,
                    Scale("categorical", "nominal", 2),
                    ("no", "yes"),
                    th,
                    var,
                    tuple(coders),
                )
            )
    return out
