"""What-if agreement with categories merged (``coderel agree --collapse behaviour=4+5``).

Before a team revises its codebook it can ask whether merging two categories the coders confuse
would make a variable reliable. :func:`what_if` recodes the named categories into the first one
given (the others leave the variable's category list), computes Krippendorff's alpha of the
recoded variable exactly as :func:`coderel.agree.agreement` does, and sets it beside the alpha of
the codebook as it is. The bootstrap weights are keyed by unit ID (:mod:`coderel.stats.bootstrap`),
so the original and the what-if are resampled on the same replicates.

A what-if is not a result: the coders coded with the categories apart, and merged categories
agree more by construction (fewer ways to differ), while the agreement expected by chance rises
too, so alpha can move either way. Whether the merged category still measures
what the study needs is for the team to decide (Krippendorff 2004, section 11.3: reliability is
judged on the distinctions the analysis uses).

References
----------
Krippendorff, K. (2004). *Content Analysis* (2nd ed.), section 11.3. Sage.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from coderel.agree.driver import agreement
from coderel.agree.prepare import Prepared, prepare
from coderel.agree.results import AgreementResult, Estimate
from coderel.codebook.model import Code, Codebook, Variable
from coderel.codings import Codings
from coderel.errors import UsageError
from coderel.io.versions import recode_rows

WHAT_IF_WORDS = (
    "what-if: alpha with the named categories merged, computed on the same codings; the coders "
    "coded with the categories apart, merging raises raw agreement by construction (and the "
    "agreement expected by chance with it), so this is a guide for revising the codebook, not a "
    "reliability result to report"
)


@dataclass(frozen=True)
class Collapse:
    """The categories of one variable to merge; the first code is the one kept."""

    variable: str
    codes: tuple[Code, ...]

    @property
    def into(self) -> Code:
        return self.codes[0]

    @property
    def spec(self) -> str:
        return f"{self.variable}=" + "+".join(str(c) for c in self.codes)


def _find_code(var: Variable, text: str) -> Code | None:
    for code in var.codes:
        if str(code).strip().casefold() == text.strip().casefold():
            return code
    return None


def parse_collapses(specs: Sequence[str], codebook: Codebook) -> tuple[Collapse, ...]:
    """``VAR=a+b[+c...]`` specifications, checked against the codebook; one :class:`Collapse`
    per variable (several specifications of one variable are merged when they share no code).

    Raises
    ------
    UsageError
        No ``=``, an unknown variable, a variable that is not nominal or ordinal, a code the
        variable does not have (or a missing-value code), fewer than two codes, or one code in
        two groups of the same variable.
    """
    groups: dict[str, list[tuple[Code, ...]]] = {}
    for spec in specs:
        name, sep, rest = spec.partition("=")
        name = name.strip()
        if not sep or not name or not rest.strip():
            raise UsageError(
                f"--collapse {spec!r}: give VARIABLE=CODE+CODE, for example behaviour=4+5"
            )
        if name not in codebook:
            raise UsageError(
                f"--collapse {spec!r}: the codebook has no variable {name!r} "
                f"(variables: {', '.join(codebook.names)})"
            )
        var = codebook.variable(name)
        if not var.is_categorical:
            raise UsageError(
                f"--collapse {spec!r}: {name} is {var.level}; only nominal and ordinal "
                "categories can be merged"
            )
        codes: list[Code] = []
        for part in rest.split("+"):
            code = _find_code(var, part)
            if code is None:
                missing = {str(c) for c in var.missing_codes}
                what = "a missing-value code" if part.strip() in missing else "not a code"
                raise UsageError(
                    f"--collapse {spec!r}: {part.strip()!r} is {what} of {name} "
                    f"(categories: {', '.join(str(c) for c in var.codes)})"
                )
            if code not in codes:
                codes.append(code)
        if len(codes) < 2:
            raise UsageError(f"--collapse {spec!r}: name two or more different codes to merge")
        for earlier in groups.get(name, []):
            shared = set(earlier) & set(codes)
            if shared:
                raise UsageError(
                    f"--collapse {spec!r}: code {sorted(map(str, shared))[0]} of {name} is in two "
                    "--collapse groups; give them as one, e.g. "
                    f"{name}=" + "+".join(str(c) for c in dict.fromkeys([*earlier, *codes]))
                )
        groups.setdefault(name, []).append(tuple(codes))
    out = []
    for name, code_groups in groups.items():
        for codes in code_groups:
            out.append(Collapse(name, codes))
    return tuple(out)


def _mapping(collapses: Sequence[Collapse], variable: str) -> dict[Code, Code]:
    out: dict[Code, Code] = {}
    for c in collapses:
        if c.variable == variable:
            out.update(dict.fromkeys(c.codes[1:], c.into))
    return out


def collapsed_variable(var: Variable, mapping: dict[Code, Code]) -> Variable:
    """The variable with the mapped categories removed and the kept ones labelled ``a + b``.

    Its ``applies_when`` is dropped: the what-if is about the variable's values (the ``applies``
    of every coding is kept as read).
    """
    merged: dict[Code, list[str]] = {}
    for old, new in mapping.items():
        merged.setdefault(new, [var.label_of(new) or str(new)]).append(
            var.label_of(old) or str(old)
        )
    categories = tuple(
        dataclasses.replace(c, label=" + ".join(merged[c.code])) if c.code in merged else c
        for c in var.categories
        if c.code not in mapping
    )
    return dataclasses.replace(var, categories=categories, applies_when=None)


def collapsed_codings(codings: Codings, collapses: Sequence[Collapse]) -> Codings:
    """The codings of the collapsed variables only, recoded, under a codebook that holds those
    variables with their categories merged (a new object; ``codings`` is not changed)."""
    cb = codings.codebook
    names = list(dict.fromkeys(c.variable for c in collapses))
    variables = []
    frame = codings.frame[codings.frame["variable"].isin(names)].copy()
    for name in names:
        mapping = _mapping(collapses, name)
        var = collapsed_variable(cb.variable(name), mapping)
        variables.append(var)
        recode_rows(frame, name, mapping, var.codes)
    codebook = dataclasses.replace(cb, variables=tuple(variables), recode=())
    return Codings.from_records(codebook, frame)


@dataclass(frozen=True)
class CollapsedAlpha:
    """One variable's alpha as coded and with categories merged (a what-if)."""

    variable: str
    merged: tuple[tuple[Code, ...], ...]
    original: Estimate | None
    collapsed: Estimate | None
    original_verdict: str
    collapsed_verdict: str

    @property
    def spec(self) -> str:
        return ", ".join("+".join(str(c) for c in group) for group in self.merged)

    @property
    def change(self) -> float | None:
        a, b = self.original, self.collapsed
        if a is None or b is None or a.estimate is None or b.estimate is None:
            return None
        return b.estimate - a.estimate

    def to_dict(self) -> dict[str, Any]:
        return {
            "variable": self.variable,
            "merged": [list(g) for g in self.merged],
            "original": self.original.to_dict() if self.original else None,
            "collapsed": self.collapsed.to_dict() if self.collapsed else None,
            "change": self.change,
            "original_verdict": self.original_verdict,
            "collapsed_verdict": self.collapsed_verdict,
        }


@dataclass(frozen=True)
class WhatIf:
    """Every ``--collapse`` what-if of one run, with the words that say what it is."""

    rows: tuple[CollapsedAlpha, ...]
    note: str = WHAT_IF_WORDS

    def to_dict(self) -> dict[str, Any]:
        return {"what_if": True, "note": self.note, "variables": [r.to_dict() for r in self.rows]}

    def to_frame(self) -> pd.DataFrame:
        """One row per variable: alpha as coded and merged, with intervals."""
        rows = []
        for r in self.rows:
            row: dict[str, Any] = {"variable": r.variable, "merged": r.spec}
            for key, est in (("original", r.original), ("collapsed", r.collapsed)):
                lo, hi = est.ci if est is not None and est.ci else (None, None)
                row[f"alpha_{key}"] = est.estimate if est is not None else None
                row[f"alpha_{key}_ci_low"] = lo
                row[f"alpha_{key}_ci_high"] = hi
            row.update(
                change=r.change,
                verdict_original=r.original_verdict,
                verdict_collapsed=r.collapsed_verdict,
            )
            rows.append(row)
        return pd.DataFrame(rows)


def what_if(
    codings: Codings,
    collapses: Sequence[Collapse],
    original: AgreementResult,
    **settings: Any,
) -> WhatIf:
    """Alpha of each collapsed variable beside its alpha in ``original``.

    Parameters
    ----------
    codings
        The codings ``original`` was computed from.
    collapses
        From :func:`parse_collapses`.
    original
        :func:`coderel.agree.agreement` of ``codings``.
    **settings
        The bootstrap settings ``original`` was computed with (``replicates``, ``seed``,
        ``ci_level``, ``interval_method``, ``bootstrap``, ``memory``), passed on to
        :func:`coderel.agree.agreement`.
    """
    if not collapses:
        return WhatIf(())
    return what_if_prepared(collapsed(codings, collapses), collapses, original, **settings)


def collapsed(codings: Codings, collapses: Sequence[Collapse]) -> Prepared:
    """The rows to compute of the collapsed variables (:func:`collapsed_codings`), prepared at
    once so that the table can be dropped before any bootstrap runs."""
    return prepare(collapsed_codings(codings, collapses))


def what_if_prepared(
    recoded: Prepared,
    collapses: Sequence[Collapse],
    original: AgreementResult,
    **settings: Any,
) -> WhatIf:
    """:func:`what_if` from the collapsed variables' rows (:func:`collapsed`)."""
    if not collapses:
        return WhatIf(())
    recoded_result = agreement(recoded, **settings)
    rows = []
    for name in dict.fromkeys(c.variable for c in collapses):
        before = original.variable(name)
        after = recoded_result.variable(name)
        rows.append(
            CollapsedAlpha(
                variable=name,
                merged=tuple(c.codes for c in collapses if c.variable == name),
                original=before.coefficients.get("krippendorff_alpha"),
                collapsed=after.coefficients.get("krippendorff_alpha"),
                original_verdict=before.verdict,
                collapsed_verdict=after.verdict,
            )
        )
    return WhatIf(tuple(rows))
