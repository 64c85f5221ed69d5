"""Assembling the report's content once from the results.

:func:`build_report` reads an agreement result (``coderel.agree``), the codings it came from and,
when a decisions file was given, the merge result (``coderel.merge``). It computes nothing that the
engine already computes: coefficients, intervals, verdicts and notes are copied; the coder panel's
agreement with the final values uses :func:`coderel.stats.kappa.cohen_kappa_table` (Cohen, 1960).
HTML, Markdown and xlsx renderers read only :class:`~coderel.report.model.ReportContent`.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from coderel._version import __version__
from coderel.codebook.model import Codebook
from coderel.codings import Codings
from coderel.report.facts import TableFacts, table_facts
from coderel.report.methods_text import methods_text
from coderel.report.model import (
    COEFFICIENTS,
    VERDICTS,
    CategoryPanel,
    CoderPanel,
    Coefficient,
    ReportContent,
    Reproducibility,
    SourceRow,
    Summary,
    VariableRow,
    number_or_none,
)
from coderel.report.numeric import methods_sentences, numeric_panels, stability_panel


def _coefficients(va: Any) -> tuple[Coefficient, ...]:
    coefs: Mapping[str, Any] = getattr(va, "coefficients", {}) or {}
    out = []
    keys = [k for k in COEFFICIENTS if k in coefs] + [k for k in coefs if k not in COEFFICIENTS]
    for key in keys:
        est = coefs[key]
        if est is None:
            continue
        ci = getattr(est, "ci", None) or (None, None)
        out.append(
            Coefficient(
                key=key,
                name=COEFFICIENTS.get(key, key),
                estimate=number_or_none(getattr(est, "estimate", None)),
                ci_low=number_or_none(ci[0]),
                ci_high=number_or_none(ci[1]),
                reason=getattr(est, "reason", None),
                se=number_or_none(getattr(est, "se", None)),
            )
        )
    return tuple(out)


def _table(result: Any, codebook: Codebook) -> tuple[VariableRow, ...]:
    rows = []
    for va in result.variables:
        name = str(va.variable)
        th = codebook.thresholds_for(name) if name in codebook else codebook.thresholds
        rows.append(
            VariableRow(
                variable=name,
                label=str(getattr(va, "label", None) or name),
                level=str(va.level),
                kind=str(getattr(va, "kind", "variable")),
                units=int(getattr(va, "units", 0) or 0),
                coders=int(getattr(va, "coders", 0) or 0),
                coefficients=_coefficients(va),
                verdict=str(getattr(va, "verdict", "undefined")),
                notes=tuple(str(n) for n in (getattr(va, "notes", ()) or ())),
                reliable=float(th.reliable),
                tentative=float(th.tentative),
                multiple=bool(name in codebook and codebook.variable(name).multiple),
                conditional=bool(
                    name in codebook and codebook.variable(name).applies_when is not None
                ),
            )
        )
    return tuple(rows)


def _code_label(codebook: Codebook, variable: str, code: Any) -> str:
    if variable in codebook:
        label = codebook.variable(variable).label_of(code)
        if label is not None:
            return str(label)
    return str(code)


def _category_panels(result: Any, codebook: Codebook) -> tuple[CategoryPanel, ...]:
    """Per categorical variable: the summed coder-by-coder table and per-category agreement.

    Single-choice variables get the confusion table (summed over coder pairs) and the engine's
    per-category Fleiss kappa and specific agreement; multi-select variables get the engine's
    per-category alpha (chosen or not) only (a code set has no single confusion table).
    """
    panels = []
    for va in result.variables:
        name = str(va.variable)
        if getattr(va, "kind", "variable") != "variable" or name not in codebook:
            continue
        var = codebook.variable(name)
        if not var.is_categorical:
            continue
        per_cat: Mapping[Any, Mapping[str, Any]] = getattr(va, "category_agreement", {}) or {}
        confusion: Mapping[tuple[str, str], Any] = getattr(va, "confusion", {}) or {}
        cats = tuple(getattr(va, "categories", ()) or ()) or tuple(var.codes)
        if not per_cat and not confusion:
            continue
        matrix = None
        caption, row_title, col_title = "", "", ""
        if confusion and not var.multiple:
            pairs = list(confusion)
            total = np.zeros((len(cats), len(cats)), dtype=np.int64)
            for pair in pairs:
                total += np.asarray(confusion[pair], dtype=np.int64)
            matrix = tuple(tuple(int(x) for x in row) for row in total)
            if len(pairs) == 1:
                a, b = pairs[0]
                caption = f"Units coded by {a} (rows) and {b} (columns)."
                row_title, col_title = str(a), str(b)
            else:
                caption = (
                    f"Summed over all {len(pairs)} pairs of coders: each unit counts once per "
                    "pair; rows are the first coder of each pair, columns the second. Counts off "
                    "the diagonal are disagreements."
                )
                row_title, col_title = "first coder of a pair", "second coder of a pair"
        columns: list[str] = []
        for stats in per_cat.values():
            for key in stats:
                if key not in columns:
                    columns.append(str(key))
        cat_rows = []
        for code in cats:
            stats = per_cat.get(code, per_cat.get(str(code), {}))
            values = tuple(_plain(stats.get(c)) for c in columns)
            cat_rows.append((str(code), _code_label(codebook, name, code), *values))
        panels.append(
            CategoryPanel(
                variable=name,
                label=str(getattr(va, "label", None) or var.title),
                codes=tuple(str(c) for c in cats),
                labels=tuple(_code_label(codebook, name, c) for c in cats),
                matrix=matrix,
                matrix_caption=caption,
                row_title=row_title,
                column_title=col_title,
                category_columns=("code", "label", *columns),
                category_rows=tuple(cat_rows),
                multiple=bool(var.multiple),
            )
        )
    return tuple(panels)


def _plain(value: Any) -> Any:
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, list | tuple):
        return ", ".join(str(v) for v in value)
    return value


def _coder_pairs(result: Any, coders: Sequence[str]) -> CoderPanel:
    """Pooled pairwise agreement over variables (weighted by units), mean Cohen's kappa (categorical
    variables) and mean Krippendorff's alpha at each variable's level (every variable)."""
    index = {c: i for i, c in enumerate(coders)}
    k = len(coders)
    agree = np.zeros((k, k))
    units = np.zeros((k, k), dtype=np.int64)
    kappa_sum = np.zeros((k, k))
    kappa_n = np.zeros((k, k), dtype=np.int64)
    alpha_sum = np.zeros((k, k))
    alpha_n = np.zeros((k, k), dtype=np.int64)
    for va in result.variables:
        if getattr(va, "kind", "variable") != "variable":
            continue
        for pa in getattr(va, "pairs", ()) or ():
            if pa.coder_a not in index or pa.coder_b not in index:
                continue
            i, j = index[pa.coder_a], index[pa.coder_b]
            n = int(pa.units or 0)
            p = number_or_none(_estimate_of(pa.percent_agreement))
            if n and p is not None:
                for a, b in ((i, j), (j, i)):
                    agree[a, b] += p * n
                    units[a, b] += n
            kap = number_or_none(_estimate_of(pa.cohen_kappa))
            if kap is not None:
                for a, b in ((i, j), (j, i)):
                    kappa_sum[a, b] += kap
                    kappa_n[a, b] += 1
            alp = number_or_none(_estimate_of(getattr(pa, "krippendorff_alpha", None)))
            if alp is not None:
                for a, b in ((i, j), (j, i)):
                    alpha_sum[a, b] += alp
                    alpha_n[a, b] += 1
    percent = tuple(
        tuple(
            None if i == j or units[i, j] == 0 else float(agree[i, j] / units[i, j])
            for j in range(k)
        )
        for i in range(k)
    )
    kappa = tuple(
        tuple(
            None if i == j or kappa_n[i, j] == 0 else float(kappa_sum[i, j] / kappa_n[i, j])
            for j in range(k)
        )
        for i in range(k)
    )
    alpha = tuple(
        tuple(
            None if i == j or alpha_n[i, j] == 0 else float(alpha_sum[i, j] / alpha_n[i, j])
            for j in range(k)
        )
        for i in range(k)
    )
    return CoderPanel(
        coders=tuple(coders),
        pair_percent=percent,
        pair_kappa=kappa,
        pair_units=tuple(tuple(int(x) for x in row) for row in units),
        pair_alpha=alpha,
    )


def _estimate_of(value: Any) -> Any:
    """Pair statistics may be plain numbers or :class:`Estimate` objects."""
    return getattr(value, "estimate", value)


def _summary(facts: TableFacts, result: Any, table: Sequence[VariableRow]) -> Summary:
    codebook = facts.codebook
    names = [v.name for v in codebook.variables]
    main = [r for r in table if r.kind == "variable"]
    verdicts = tuple((v, sum(1 for r in main if r.verdict == v)) for v in VERDICTS)
    return Summary(
        title=str(getattr(result, "codebook_title", None) or codebook.title),
        units=len(facts.units),
        coders=facts.coders,
        variables=len(main),
        verdicts=verdicts,
        cells_total=len(facts.units) * len(facts.coders) * len(names),
        cells_filled=facts.cells_filled,
        cells_not_applicable=facts.cells_not_applicable,
        units_all_coders=facts.units_all_coders,
        units_per_coder=facts.units_per_coder,
        units_one_coder=facts.units_one_coder,
    )


def _source_row(src: Any) -> SourceRow:
    from pathlib import Path

    return SourceRow(name=Path(str(src.path)).name, sha256=str(src.sha256), size=int(src.size or 0))


def build_report(
    codings: Codings | TableFacts,
    result: Any,
    merged: Any | None = None,
    *,
    command: str = "",
    decisions_source: Any | None = None,
    codebook_source: Any | None = None,
    generated: dt.datetime | None = None,
    stability: Any | None = None,
) -> ReportContent:
    """Assemble the report's content from an agreement result (and a merge result).

    Parameters
    ----------
    codings
        The codings the agreement was computed on (for completeness and the coder panel), or
        what :func:`coderel.report.facts.table_facts` kept of them (and of ``merged``): a caller
        that drops the table runs the bootstrap without it.
    result
        The :class:`coderel.agree.AgreementResult` of these codings.
    merged
        The :class:`coderel.merge.MergeResult` when a decisions file was given; adds the
        adjudication progress and each coder's agreement with the final value. Read only with
        the codings themselves (the table's facts already hold its parts).
    command
        The command line, for the reproducibility block.
    decisions_source
        The decisions file as a :class:`coderel.codings.SourceFile` (name and SHA-256).
    codebook_source
        The codebook file as a :class:`coderel.codings.SourceFile`.
    generated
        Time stamp of the report (UTC); now by default.
    stability
        A :class:`coderel.stability.StabilityResult`: adds the Stability section.

    Returns
    -------
    ReportContent
        Frozen content that :func:`coderel.report.write_report` renders as HTML, Markdown or xlsx.
    """
    facts = codings if isinstance(codings, TableFacts) else table_facts(codings, merged)
    codebook = facts.codebook
    table = _table(result, codebook)
    coders = _coder_pairs(result, facts.coders)
    adjudication = facts.adjudication
    if facts.final is not None:
        coders = dataclasses.replace(coders, final=facts.final)
    summary = _summary(facts, result, table)
    when = (generated or dt.datetime.now(dt.UTC)).astimezone(dt.UTC)
    repro = Reproducibility(
        coderel_version=__version__,
        codebook_title=str(getattr(result, "codebook_title", None) or codebook.title),
        codebook_version=str(getattr(result, "codebook_version", None) or codebook.version),
        sources=tuple(_source_row(s) for s in facts.sources),
        seed=getattr(result, "seed", None),
        replicates=int(getattr(result, "replicates", 0) or 0),
        interval=str(getattr(result, "method", "") or ""),
        ci_level=float(getattr(result, "ci_level", 0.95) or 0.95),
        generated_utc=when.strftime("%Y-%m-%d %H:%M:%S UTC"),
        command=command,
        decisions_file=_source_row(decisions_source) if decisions_source is not None else None,
        codebook_file=_source_row(codebook_source) if codebook_source is not None else None,
    )
    numeric = numeric_panels(result)
    stable = stability_panel(stability)
    extra = methods_sentences(numeric, stable, round(repro.ci_level * 100))
    methods = methods_text(
        summary=summary, table=table, repro=repro, extra=extra, adjudication=adjudication
    )
    return ReportContent(
        summary=summary,
        table=table,
        categories=_category_panels(result, codebook),
        coders=coders,
        adjudication=adjudication,
        methods=methods,
        reproducibility=repro,
        numeric=numeric,
        stability=stable,
    )
