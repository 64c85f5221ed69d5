"""Sheets made from an earlier codebook version: find the version, recode their values.

A coding workbook made by ``coderel template`` carries the codebook's version in its ``codebook``
sheet (row ``version``). :func:`read_versioned` reads every sheet as :func:`read_codings` does,
except for sheets made from another version:

* variables renamed since (``renamed_from: old_name`` in this codebook) are read under their old
  names and stored under their new ones;
* with a ``recode`` block from that version (:mod:`coderel.codebook.revisions`), their codes are
  mapped onto this version's codes;
* without one, a ``version-no-recode`` warning names both versions and the codes are read as
  they are.

Sheets that carry no version (csv, parquet, workbooks not made by coderel) are read as they are.
Input files are never changed.
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


def renames(codebook: Codebook) -> dict[str, str]:
    """Old name -> this version's name, from the variables' ``renamed_from`` keys."""
    return {v.renamed_from: v.name for v in codebook.variables if v.renamed_from}


def earlier_view(codebook: Codebook, version: str) -> Codebook:
    """The codebook as a sheet made from ``version`` names it: renamed variables (and the
    conditions that name them) under their old names; the old codes of the recode block from
    ``version``, if any, accepted (:func:`widened`)."""
    recode = codebook.recode_from(version)
    if recode is not None:
        codebook = widened(codebook, recode)
    back = {new: old for old, new in renames(codebook).items()}
    if not back:
        return codebook
    variables = []
    for var in codebook.variables:
        cond = var.applies_when
        if cond is not None and cond.variable in back:
            var = dataclasses.replace(
                var, applies_when=dataclasses.replace(cond, variable=back[cond.variable])
            )
        if var.name in back:
            var = dataclasses.replace(var, name=back[var.name])
        variables.append(var)
    return dataclasses.replace(codebook, variables=tuple(variables))


def _recoded(value: Any, mapping: dict[Code, Code], order: dict[Code, int]) -> Any:
    if value is None:
        return None
    if isinstance(value, tuple):
        mapped = {mapping.get(c, c) for c in value}
        return tuple(sorted(mapped, key=lambda c: order.get(c, len(order))))
    return mapping.get(value, value)


def recode_rows(
    frame: pd.DataFrame, variable: str, mapping: dict[Code, Code], codes: Sequence[Code]
) -> None:
    """Replace, in place, the mapped codes of ``variable``'s rows of a long table; a
    multi-select set stays a set, in the order of ``codes`` (the variable's codes after the
    mapping). Shared by codebook recodes and the what-if of ``agree --collapse``."""
    rows = frame["variable"] == variable
    order = {c: i for i, c in enumerate(codes)}
    frame.loc[rows, "value"] = pd.Series(
        [_recoded(v, mapping, order) for v in frame.loc[rows, "value"]],
        index=frame.index[rows],
        dtype=object,
    )


def recode_frame(frame: pd.DataFrame, codebook: Codebook, recode: Recode) -> pd.DataFrame:
    """The long table with every mapped code replaced (a new frame; ``applies`` recomputed)."""
    out = frame.copy()
    for var in codebook.variables:
        mapping = recode.map_for(var.name)
        if not mapping:
            continue
        recode_rows(out, var.name, mapping, var.codes)
    return out.drop(columns=["applies"], errors="ignore")


def _combine(codebook: Codebook, parts: list[Codings], problems: Problems) -> Codings:
    frames = [p.frame for p in parts if len(p.frame)]
    frame = pd.concat(frames, ignore_index=True) if frames else parts[0].frame
    texts = [p.texts for p in parts if len(p.texts)]
    occasions = [p.occasions for p in parts if len(p.occasions)]
    for p in parts:
        problems.extend(p.problems)
    return Codings.from_records(
        codebook,
        frame,
        texts=pd.concat(texts, ignore_index=True) if texts else parts[0].texts,
        problems=problems,
        sources=[s for p in parts for s in p.sources],
        occasions=pd.concat(occasions, ignore_index=True) if occasions else None,
    )


def _as_now(
    frame: pd.DataFrame, codebook: Codebook, renamed: dict[str, str], recode: Recode | None
) -> pd.DataFrame:
    """Rows read under an earlier version with this version's names and codes."""
    if not len(frame):
        return frame
    frame = frame.copy()
    if renamed:
        frame["variable"] = frame["variable"].map(lambda n: renamed.get(n, n))
    if recode is not None:
        frame = recode_frame(frame, codebook, recode)
    return frame


def read_versioned(
    codebook: Codebook,
    paths: Sequence[str | Path] | str | Path,
    *,
    limits: Limits = DEFAULT_LIMITS,
    progress: Any = None,
) -> Codings:
    """Read coders' sheets like :func:`coderel.io.read.read_codings`, renaming and recoding
    sheets made from another codebook version (see the module docstring)."""
    files = collect_files(paths)
    versions = {f: sheet_version(f, limits) for f in files}
    own = str(codebook.version)
    renamed = renames(codebook)
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
                    "are" + (", its renamed variables under their old names" if renamed else ""),
                    file=f.name,
                    sheet="codebook",
                    hint=f"add a recode block 'from_version: \"{version}\"' to the codebook, or "
                    "check that the codes did not change between the versions",
                )
            )
            if not renamed:
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
            parts.append(read_codings(codebook, group, limits=limits, progress=progress))
            continue
        read = read_codings(
            earlier_view(codebook, version), group, limits=limits, progress=progress
        )
        recode = codebook.recode_from(version)
        frame, occasions = (
            _as_now(f, codebook, renamed, recode) for f in (read.frame, read.occasions)
        )
        parts.append(
            Codings.from_records(
                codebook,
                frame.drop(columns=["applies"], errors="ignore"),
                texts=read.texts,
                problems=read.problems,
                sources=read.sources,
                occasions=occasions if len(occasions) else None,
            )
        )
    return _combine(codebook, parts, problems)
