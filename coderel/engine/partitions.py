"""A folder of long Parquet tables as one dataset, split into groups of files that share no unit,
and each group read and summarised per unit on a worker.

Per-unit summaries are exact only when all rows of a unit are read together. The dataset need not
be partitioned by unit: every file's unit IDs (as the reader reads them, turned into 64-bit keys)
are collected first, and files that share a unit are put in one group (union-find over the
files). A dataset written partitioned by unit gives one group per file; files that all hold the
same units (one file per coder) give one group, read by one worker.

A group is read by :func:`coderel.io.read.read_codings`, the in-process reader, so values and
problems (with file and cell) are exactly those of the default engine; only the per-unit
summaries leave the worker: unit IDs, coder names and, per variable, a units x coders matrix of
value indices with the distinct values it indexes. Narrative text is never read from a long table
and never sent.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from coderel.codebook import Codebook
from coderel.errors import UsageError
from coderel.io.occasions import OCCASION_COLUMN
from coderel.problems import Problems
from coderel.stats.plan import Scale

#: Key of a unit ID for grouping files (any fixed seed: only equality of keys matters).
_GROUP_SEED = 0


def dataset_files(paths: Sequence[Path]) -> list[Path]:
    """The Parquet files of the dataset (folders expanded, in name order); refuse other files."""
    from coderel.io.read import collect_files

    files = collect_files(paths)
    other = [f.name for f in files if f.suffix.lower() != ".parquet"]
    if other:
        raise UsageError(
            "--engine dask reads long Parquet tables (unit, coder, variable, value), not "
            f"{', '.join(other[:3])}{' ...' if len(other) > 3 else ''}; convert them or use "
            "--engine local"
        )
    return files


def unit_keys_of(path: str) -> tuple[np.ndarray, bool]:
    """Distinct 64-bit keys of a long Parquet table's unit IDs, as the reader reads the IDs, and
    whether the table has an ``occasion`` column.

    A file that is not a long table gives no keys (the reader reports it when the group is read).
    """
    import pyarrow.parquet as pq

    from coderel.io.long_columnar import LONG_HEADER, _encode, _python_cells
    from coderel.io.names import text_of as _text_of
    from coderel.io.text_tables import _header_text
    from coderel.stats.bootstrap import unit_keys

    none = np.empty(0, dtype=np.uint64)
    try:
        schema = pq.read_schema(path)
        folded = [_header_text(n).casefold() for n in schema.names]
        occasion = OCCASION_COLUMN in folded
        names = [n for n, f in zip(schema.names, folded, strict=True) if f == LONG_HEADER[0]]
        if len(names) != 1:
            return none, occasion
        column = pq.read_table(path, columns=names).column(0)
    except Exception:  # damaged: the reader reports it
        return none, False
    values, _ = _encode(column)
    cells, _ = _python_cells(values, column.type)
    texts = {t for t in map(_text_of, cells) if t is not None}
    return np.unique(unit_keys(sorted(texts), _GROUP_SEED)), occasion


def check_no_occasions(files: Sequence[str], occasions: Sequence[bool]) -> None:
    """Refuse test-retest data: which occasion is a coder's first is decided over all of the
    coder's rows, not per group of units."""
    named = [Path(f).name for f, has in zip(files, occasions, strict=True) if has]
    if named:
        raise UsageError(
            f"--engine dask does not read the occasion column yet ({', '.join(named[:3])}); "
            "use --engine local for test-retest data"
        )


def file_groups(keys: Sequence[np.ndarray]) -> list[list[int]]:
    """Files (by position) grouped so that no unit key is in two groups (union-find)."""
    parent = list(range(len(keys)))

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    if keys:
        all_keys = np.concatenate([np.asarray(k, dtype=np.uint64) for k in keys])
        owner = np.concatenate([np.full(len(k), i, dtype=np.int64) for i, k in enumerate(keys)])
        order = np.argsort(all_keys, kind="stable")
        sk, so = all_keys[order], owner[order]
        same = sk[1:] == sk[:-1]
        links = np.unique(np.stack([so[:-1][same], so[1:][same]], axis=1), axis=0)
        for a, b in links:
            ra, rb = root(int(a)), root(int(b))
            if ra != rb:
                parent[max(ra, rb)] = min(ra, rb)
    groups: dict[int, list[int]] = {}
    for i in range(len(keys)):
        groups.setdefault(root(i), []).append(i)
    return list(groups.values())


@dataclass(frozen=True)
class Summary:
    """Per-unit summaries of one group of units (what a worker sends back).

    ``matrices`` maps each variable to its units x coders value indices (-1: no value, rows in
    ``units`` order, columns in ``coders`` order), the scale whose domain they index (distinct
    numbers or code sets of this group only) and, for a variable with ``applies_when``, the
    applicability matrix (1, 0, -1 unknown).
    """

    units: list[str]
    coders: list[str]
    matrices: dict[str, tuple[np.ndarray, Scale, np.ndarray | None]]
    problems: Problems
    single_coded_units: int
    labels: int


def summarise(codebook: Codebook, files: list[str]) -> Summary:
    """Read one group of files with the in-process reader and summarise it per unit (a task run
    on a worker)."""
    from coderel.io.read import read_codings

    return summarise_codings(codebook, read_codings(codebook, [Path(f) for f in files]))


def summarise_codings(codebook: Codebook, codings) -> Summary:
    """The per-unit summary of the codings of a group of units."""
    from coderel.agree.matrices import applicability_matrix, build_index, value_matrix

    units, coders = codings.units, codings.coders
    ix = build_index(codings, coders, units)
    matrices: dict[str, tuple[np.ndarray, Scale, np.ndarray | None]] = {}
    for var in codebook.variables:
        x, scale = value_matrix(ix, var, len(units), len(coders))
        xa = None
        if var.applies_when is not None:
            xa = applicability_matrix(ix, var, len(units), len(coders)).astype(np.int8)
        matrices[var.name] = (_compact(x), scale, xa)
    return Summary(
        units,
        coders,
        matrices,
        codings.problems,
        codings.single_coded_units(),
        len(codings.frame),
    )


def _compact(x: np.ndarray) -> np.ndarray:
    """Value indices in the smallest signed integer type that holds them."""
    top = int(x.max()) if x.size else 0
    for kind in (np.int8, np.int16, np.int32):
        if top <= np.iinfo(kind).max:
            return x.astype(kind)
    return x
