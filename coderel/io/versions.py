"""Sheets made from an earlier codebook version: find the version, recode their values.

A coding workbook made by ``coderel template`` carries the codebook's version in its ``codebook``
sheet (row ``version``). :func:`read_versioned` reads every sheet as :func:`read_codings` does,
except that sheets made from an earlier version with a ``recode`` block in the codebook
(:mod:`coderel.codebook.revisions`) have their codes mapped onto this version's codes, and sheets
made from a version with no recode block get a ``version-no-recode`` warning naming both
versions. Sheets that carry no version (csv, parquet, workbooks not made by coderel) are read as
they are. Input files are never changed.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from coderel.codebook.model import Category, Code, Codebook, Recode
from coderel.codings import Codings
from coderel.io.archive import DEFAULT_LIMITS, Limits, check_workbook
from coderel.io.read import collect_files, read_codings
from coderel.problems import Problems, make_problem

#: How far down the ``codebook`` sheet the version row is looked for.
_VERSION_ROWS = 12


def sheet_version(path: Path, limits: Limits = DEFAULT_LIMITS) -> str | None:
    """The codebook version a workbook was made from (its ``codebook`` sheet), else ``None``.

    Only ``.xlsx`` files that pass the archive checks are opened (read-only); any failure gives
    ``None`` and leaves the report of the problem to the reader proper.
    """
    if path.suffix.lower() != ".xlsx":
        return None
    try:
        import openpyxl

        check_workbook(path, limits)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
        try:
            sheet = next(
                (ws for ws in wb.worksheets if ws.title.strip().casefold() == "codebook"), None
            )
            if sheet is None:
                return None
            for row in sheet.iter_rows(max_row=_VERSION_ROWS, max_col=2, values_only=True):
                if row and str(row[0] or "").strip().casefold() == "version" and len(row) > 1:
                    value = row[1]
                    return None if value is None else str(value).strip() or None
        finally:
            wb.close()
    except Exception:  # the reader reports unreadable files itself
        return None
    return None


def widened(codebook: Codebook, recode: Recode) -> Codebook:
    """The codebook with the recode block's old codes accepted as categories, so that sheets of
    the earlier version read without ``not-in-codebook`` errors before they are recoded."""
    variables = []
    for var in codebook.variables:
        mapping = recode.map_for(var.name)
        known = {str(c) for c in (*var.codes, *var.missing_codes)}
        extra = tuple(
            Category(old, f"{old} (version {recode.from_version})")
            for old in mapping
            if str(old) not in known
        )
        variables.append(
            dataclasses.replace(var, categories=var.categories + extra) if extra else var
        )
    return dataclasses.replace(codebook, variables=tuple(variables))


def _recoded(value: Any, mapping: dict[Code, Code], order: dict[Code, int]) -> Any:
    if value is None:
        return None
    if isinstance(value, tuple):
        mapped = {mapping.get(c, c) for c in value}
        return tuple(sorted(mapped, key=lambda c: order.get(c, len(order))))
    return mapping.get(value, value)


def recode_frame(frame: pd.DataFrame, codebook: Codebook, recode: Recode) -> pd.DataFrame:
    """The long table with every mapped code replaced (a new frame; ``applies`` recomputed)."""
    out = frame.copy()
    for var in codebook.variables:
        mapping = recode.map_for(var.name)
        if not mapping:
            continue
        rows = out["variable"] == var.name
        order = {c: i for i, c in enumerate(var.codes)}
        out.loc[rows, "value"] = pd.Series(
            [_recoded(v, mapping, order) for v in out.loc[rows, "value"]],
            index=out.index[rows],
            dtype=object,
        )
    return out.drop(columns=["applies"])


def _combine(codebook: Codebook, parts: list[Codings], problems: Problems) -> Codings:
    frames = [p.frame for p in parts if len(p.frame)]
    frame = pd.concat(frames, ignore_index=True) if frames else parts[0].frame
    texts = [p.texts for p in parts if len(p.texts)]
    for p in parts:
        problems.extend(p.problems)
    return Codings.from_records(
        codebook,
        frame,
        texts=pd.concat(texts, ignore_index=True) if texts else parts[0].texts,
        problems=problems,
        sources=[s for p in parts for s in p.sources],
    )


def read_versioned(
    codebook: Codebook,
    paths: Sequence[str | Path] | str | Path,
    *,
    limits: Limits = DEFAULT_LIMITS,
    progress: Any = None,
) -> Codings:
    """Read coders' sheets like :func:`coderel.io.read.read_codings`, recoding sheets made from
    an earlier codebook version (see the module docstring)."""
    files = collect_files(paths)
    versions = {f: sheet_version(f, limits) for f in files}
    own = str(codebook.version)
    groups: dict[str | None, list[Path]] = {}
    problems = Problems()
    for f, version in versions.items():
        if version is None or version == own:
            groups.setdefault(None, []).append(f)
            continue
        if codebook.recode_from(version) is None:
            problems.append(
                make_problem(
                    "version-no-recode",
                    f"{f.name} was made from codebook version {version}, this codebook is version "
                    f"{own} and has no recode block from {version}: its codes are read as they "
                    "are",
                    file=f.name,
                    sheet="codebook",
                    hint=f"add a recode block 'from_version: \"{version}\"' to the codebook, or "
                    "check that the codes did not change between the versions",
                )
            )
            groups.setdefault(None, []).append(f)
            continue
        groups.setdefault(version, []).append(f)
    if list(groups) == [None]:
        codings = read_codings(codebook, files, limits=limits, progress=progress)
        if problems:
            problems.extend(codings.problems)
            return dataclasses.replace(codings, problems=problems)
        return codings
    parts = []
    for version, group in groups.items():
        if version is None:
            parts.append(read_codings(codebook, group, limits=limits))
            continue
        recode = codebook.recode_from(version)
        assert recode is not None
        read = read_codings(widened(codebook, recode), group, limits=limits)
        parts.append(
            Codings.from_records(
                codebook,
                recode_frame(read.frame, codebook, recode),
                texts=read.texts,
                problems=read.problems,
                sources=read.sources,
            )
        )
    return _combine(codebook, parts, problems)
