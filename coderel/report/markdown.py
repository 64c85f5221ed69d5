"""The report as Markdown: the same sections as the HTML, as tables and text.

Charts are written as SVG files into a folder beside the ``.md`` file (``report-charts/``) and
linked with relative paths. Text from the codebook or the data is escaped for Markdown and for the
HTML that many Markdown viewers let through (``<``, ``>`` and ``&`` become entities).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from urllib.parse import quote

from coderel.report.blocks import Block
from coderel.report.fmt import pct
from coderel.report.methods_text import fmt_coef
from coderel.report.model import COEFFICIENTS, STATUSES, ReportContent
from coderel.report.numeric import (
    ICC_HEADERS,
    LIMITS_HEADERS,
    STABILITY_HEADERS,
    icc_caption,
    icc_display,
    limits_display,
    recoding_lines,
    stability_display,
)
from coderel.report.sections import (
    CATEGORY_TITLES,
    ETHICS_NOTES,
    STATUS_MEANING,
    agreement_rows,
    category_cell,
    coefficient_cell,
    level_text,
    pair_text,
    present_coefficients,
    reproducibility_rows,
    sections,
    summary_rows,
)

_SPECIAL = str.maketrans(
    {"\\": "\\\\", "`": "\\`", "*": "\\*", "|": "\\|", "<": "&lt;", ">": "&gt;"}
)


def md(value: object) -> str:
    """Text made inert for Markdown, on one line.

    ``<`` and ``>`` become entities (many viewers pass raw HTML through), the characters of
    emphasis, code and tables are escaped, and ``](`` is broken so that no text becomes a link.
    """
    text = str(value).translate(_SPECIAL).replace("](", "]\\(")
    return " ".join(text.split())


def md_table(headers: Sequence[str], rows: Iterable[Sequence[object]], right: Iterable[int] = ()):
    """A pipe table (``right``: indexes of right-aligned columns)."""
    right = set(right)
    lines = ["| " + " | ".join(md(h) for h in headers) + " |"]
    lines.append("|" + "|".join("---:" if i in right else "---" for i in range(len(headers))) + "|")
    lines += ["| " + " | ".join(md(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


def chart_file(chart_id: str) -> str:
    """File name of a chart inside the charts folder."""
    return f"{chart_id}.svg"


def _summary(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    return [md_table(["Item", "Value"], summary_rows(content))]


def _agreement(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    level = level_text(content)
    rows = agreement_rows(content)
    show_se = any(r["se"] for r in rows)
    head = ["Variable", "Label", "Level", "Units", "Coders", "α", f"{level} CI"]
    head += ["SE"] if show_se else []
    head += ["Verdict", "Notes"]
    body = []
    for r in rows:
        name = r["variable"] + (" (applicability)" if r["kind"] != "variable" else "")
        notes = r["notes"] or r["reason"]
        line = [name, r["label"], r["level"], r["units"], r["coders"], r["alpha"], r["interval"]]
        line += [r["se"]] if show_se else []
        line += [r["verdict"], notes]
        body.append(line)
    keys = present_coefficients(content)
    coef_rows = [[r.variable, *(coefficient_cell(r, k) for k in keys)] for r in content.table]
    return [
        md_table(head, body, right=range(3, 8 if show_se else 7)),
        "### All coefficients",
        "Each cell: estimate, bootstrap interval and, where computed, standard error (SE).",
        md_table(["Variable", *(COEFFICIENTS.get(k, k) for k in keys)], coef_rows),
    ]


def _intervals(content: ReportContent, charts: Mapping[str, str]) -> list[str]:
    out = []
    if "chart-intervals" in charts:
        out.append(f"![Krippendorff's alpha with intervals]({_link(charts, 'chart-intervals')})")
    rows = [
        [
            r.variable,
            fmt_coef(r.alpha.estimate, 3) if r.alpha else "–",
            fmt_coef(r.alpha.ci_low, 3) if r.alpha else "–",
            fmt_coef(r.alpha.ci_high, 3) if r.alpha else "–",
            r.verdict,
        ]
        for r in content.table
    ]
    out.append(md_table(["Variable", "α", "low", "high", "Verdict"], rows, right=(1, 2, 3)))
    out.append(
        f"{level_text(content)} bootstrap intervals, {content.reproducibility.replicates:,} "
        "replicates. The thresholds .800 (reliable) and .667 (tentative) are conventions of the "
        "field (Krippendorff, 2004), not tests."
    )
    return out


def _categories(content: ReportContent, charts: Mapping[str, str]) -> list[str]:
    if not content.categories:
        return ["No categorical variable with per-category figures in this project."]
    out = []
    for p in content.categories:
        out.append(f"### {md(p.variable)}: {md(p.label)}")
        if p.matrix is not None:
            if p.heatmap_id in charts:
                out.append(f"![{md(p.variable)} heat map]({_link(charts, p.heatmap_id)})")
            out.append(md(p.matrix_caption))
            heads = ["first / second coder", *p.codes]
            out.append(
                md_table(
                    heads,
                    [
                        [c, *(f"{n:,}" for n in line)]
                        for c, line in zip(p.codes, p.matrix, strict=True)
                    ],
                    right=range(1, len(heads)),
                )
            )
        elif p.multiple:
            out.append("Multi-select: each category is treated as chosen or not chosen.")
        heads = [CATEGORY_TITLES.get(c, c) for c in p.category_columns]
        rows = [
            [category_cell(c, v) for c, v in zip(p.category_columns, row, strict=True)]
            for row in p.category_rows
        ]
        out.append(md_table(heads, rows, right=range(2, len(heads))))
    return out


def _blocks(blocks: Iterable[Block], charts: Mapping[str, str]) -> list[str]:
    """Generic blocks (:mod:`coderel.report.blocks`): heading, chart link, table, note."""
    out: list[str] = []
    for b in blocks:
        out.append(f"### {md(b.title)}")
        if b.chart and b.chart in charts:
            out.append(f"![{md(b.caption)}]({_link(charts, b.chart)})")
        if b.headers:
            out.append(md_table(b.headers, b.rows, right=b.numeric))
        if b.note:
            out.append(md(b.note))
    return out


def _protocol(name: str):
    def part(content: ReportContent, charts: Mapping[str, str]) -> list[str]:
        parts = content.protocol
        return _blocks(getattr(parts, name), charts) if parts is not None else []

    return part


def _coders(content: ReportContent, charts: Mapping[str, str]) -> list[str]:
    return _pairs(content, charts) + _protocol("coders")(content, charts)


def _pairs(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    c = content.coders
    out = ["### Pairs of coders"]
    if len(c.coders) < 2:
        out.append("Only one coder: no pairs to compare.")
    else:
        rows = [
            [a, *(pair_text(content, i, j) for j in range(len(c.coders)))]
            for i, a in enumerate(c.coders)
        ]
        out.append(md_table(["", *c.coders], rows, right=range(1, len(c.coders) + 1)))
        out.append(
            "Percent agreement pooled over the variables; Krippendorff's α of the two coders at "
            "each variable's level, averaged over the variables; Cohen's κ (Cohen, 1960) averaged "
            "over the categorical variables."
        )
    if c.final:
        out.append("### Each coder against the final value")
        rows = [
            [f.coder, f"{f.units:,}", pct(f.percent_agreement), fmt_coef(f.mean_kappa), f.variables]
            for f in c.final
        ]
        out.append(
            md_table(
                ["Coder", "Values compared", "Agreement with final", "Mean Cohen's κ", "Variables"],
                rows,
                right=range(1, 5),
            )
        )
        out.append(
            "Only settled cells count. The final value partly comes from the coders themselves, "
            "so these figures flatter every coder; compare coders with each other."
        )
    return out


def _adjudication(content: ReportContent, charts: Mapping[str, str]) -> list[str]:
    adj = content.adjudication
    if adj is None:
        return []
    total = sum(n for _, n in adj.totals)
    out = [
        f"**{adj.resolved:,}** of {total:,} cells are settled; **{adj.unresolved:,}** remain "
        "unresolved" + (f" (rule: {md(adj.rule)})" if adj.rule else "") + "."
    ]
    if "chart-adjudication" in charts:
        out.append(f"![Adjudication progress]({_link(charts, 'chart-adjudication')})")
    heads = ["Variable", *(s.replace("_", " ") for s in STATUSES)]
    rows = [[name, *(f"{n:,}" for n in counts)] for name, counts in adj.by_variable]
    out.append(md_table(heads, rows, right=range(1, len(heads))))
    out.append("\n".join(f"- **{s.replace('_', ' ')}**: {STATUS_MEANING[s]}" for s in STATUSES))
    return out


def _methods(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    m = content.methods
    return [
        "> " + md(m.paragraph),
        "**Before you paste**\n\n" + "\n".join(f"- {md(t)}" for t in m.cautions[:2]),
        "### References\n\n" + "\n".join(f"{i}. {md(t)}" for i, t in enumerate(m.references, 1)),
    ]


def _ethics(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    del content
    return ["\n".join(f"- {md(t)}" for t in ETHICS_NOTES)]


def _reproducibility(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    return [md_table(["Item", "Value", "SHA-256"], reproducibility_rows(content))]


def _numeric(content: ReportContent, charts: Mapping[str, str]) -> list[str]:
    out = []
    for panel in content.numeric:
        out += [f"### {md(panel.variable)}", md(icc_caption(panel))]
        out.append(md_table(ICC_HEADERS, icc_display(panel)))
        if panel.pairs:
            out.append(md_table(LIMITS_HEADERS, limits_display(panel)))
        for pair in panel.pairs:
            if pair.chart_id in charts:
                out.append(
                    f"![Bland-Altman plot, {md(pair.coder_a)} − {md(pair.coder_b)}]"
                    f"({_link(charts, pair.chart_id)})"
                )
    return out


def _stability(content: ReportContent, _charts: Mapping[str, str]) -> list[str]:
    return [
        *(md(x) for x in recoding_lines(content.stability)),
        md_table(STABILITY_HEADERS, stability_display(content.stability)),
    ]


_PARTS = {
    "summary": _summary,
    "agreement": _agreement,
    "intervals": _intervals,
    "categories": _categories,
    "coders": _coders,
    "training": _protocol("training"),
    "rounds": _protocol("rounds"),
    "adjudication": _adjudication,
    "methods": _methods,
    "ethics": _ethics,
    "reproducibility": _reproducibility,
    "numeric": _numeric,
    "stability": _stability,
}
_FOLDER_KEY = "__folder__"


def _link(charts: Mapping[str, str], chart_id: str) -> str:
    return quote(f"{charts.get(_FOLDER_KEY, 'charts')}/{chart_file(chart_id)}")


def render_markdown(
    content: ReportContent, charts: Mapping[str, str] | None = None, *, folder: str = "charts"
) -> str:
    """The report as Markdown text; chart links point to ``folder/<chart id>.svg``.

    Parameters
    ----------
    content
        The report's content.
    charts
        Chart ids that exist (their SVG text is written by :func:`coderel.report.write_report`);
        without it, no chart is linked.
    folder
        Relative folder of the chart files.
    """
    linked = {**dict(charts or {}), _FOLDER_KEY: folder}
    r = content.reproducibility
    s = content.summary
    blocks = [
        f"# Reliability report: {md(s.title)}",
        md(
            f"Codebook version {r.codebook_version} · {s.units:,} units · {len(s.coders)} "
            f"{'coder' if len(s.coders) == 1 else 'coders'} "
            f"· {r.generated_utc} · coderel {r.coderel_version}"
        ),
    ]
    for section in sections(content):
        blocks.append(f"## {section.title}")
        blocks.append(f"*{md(section.about)}*")
        blocks.extend(_PARTS[section.key](content, linked))
    blocks.append(
        f"---\n\nWritten by coderel {md(r.coderel_version)}. This report holds no narrative "
        "text. Reliability is not validity."
    )
    return "\n\n".join(blocks) + "\n"
