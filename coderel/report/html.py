"""The report as one self-contained HTML file: inline CSS, inline SVG charts, no script, no fetch.

A Content-Security-Policy in the page forbids every network request (``default-src 'none'``);
styles are inline and images may only be ``data:`` URIs. Every text that comes from the codebook
or the data is escaped with :func:`html.escape`; narrative text is never part of the content.
Each variable's row in the agreement table carries ``id="row-<variable>"`` and its mark in the
interval chart ``id="chart-<variable>"``.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from html import escape

from coderel.report.blocks import Block
from coderel.report.charts import report_charts
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
    Section,
    agreement_rows,
    category_cell,
    coefficient_parts,
    level_text,
    pair_text,
    present_coefficients,
    reproducibility_rows,
    sections,
    summary_rows,
)

CSP = (
    "default-src 'none'; style-src 'unsafe-inline'; img-src data:; "
    "base-uri 'none'; form-action 'none'"
)

CSS = """
:root { --ink: #26313b; --muted: #5f6a75; --line: #d9d5cb; --paper: #fbfaf6; --band: #eef2ef;
  --good: #2e6f62; --mid: #8a6216; --bad: #a4473b; --none: #6b7078; }
* { box-sizing: border-box; }
html { background: var(--paper); }
body { margin: 0; color: var(--ink); font: 15px/1.5 "Segoe UI", "Helvetica Neue", Arial,
  "DejaVu Sans", sans-serif; }
header.masthead { background: var(--band); border-bottom: 3px solid var(--good);
  padding: 1.6rem max(1.2rem, calc((100% - 72rem) / 2)) 1rem; }
.kicker { margin: 0; text-transform: uppercase; letter-spacing: .08em; font-size: .78rem;
  color: var(--good); font-weight: 600; }
h1 { margin: .2rem 0 .3rem; font-size: 1.7rem; line-height: 1.25; }
.meta { margin: 0; color: var(--muted); font-size: .9rem; }
nav ol { list-style: none; margin: .9rem 0 0; padding: 0; display: flex; flex-wrap: wrap;
  gap: .3rem 1.1rem; font-size: .88rem; }
nav a { color: var(--ink); text-decoration: none; border-bottom: 1px solid var(--line); }
main { max-width: 72rem; margin: 0 auto; padding: 0 1.2rem 3rem; }
section { margin-top: 2.2rem; }
h2 { font-size: 1.3rem; margin: 0 0 .3rem; padding-bottom: .25rem;
  border-bottom: 1px solid var(--line); }
h3 { font-size: 1.05rem; margin: 1.4rem 0 .3rem; }
p.about { margin: .2rem 0 .9rem; color: var(--muted); font-size: .92rem; max-width: 60rem; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(9.5rem, 1fr));
  gap: .7rem; margin: .6rem 0 1rem; }
.card { background: #fff; border: 1px solid var(--line); border-radius: 6px; padding: .6rem .8rem;
  border-top: 4px solid var(--line); }
.card .n { display: block; font-size: 1.6rem; font-weight: 650; line-height: 1.2; }
.card .what { font-size: .82rem; color: var(--muted); }
.card.reliable { border-top-color: var(--good); } .card.tentative { border-top-color: #b5832a; }
.card.unreliable { border-top-color: var(--bad); }
.card.undefined { border-top-color: var(--none); }
table { border-collapse: collapse; width: 100%; background: #fff; font-size: .88rem;
  margin: .4rem 0 .8rem; }
th, td { text-align: left; vertical-align: top; padding: .35rem .55rem;
  border-bottom: 1px solid var(--line); }
thead th { background: var(--band); font-weight: 600; border-bottom: 2px solid #b9c4bf; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.kv th { width: 11rem; background: transparent; font-weight: 600; }
.scroll { overflow-x: auto; }
.label { display: block; color: var(--muted); font-size: .8rem; }
.notes { font-size: .8rem; color: var(--muted); max-width: 26rem; }
.tag { font-size: .72rem; border: 1px solid var(--line); border-radius: 3px; padding: 0 .3rem;
  color: var(--muted); white-space: nowrap; }
.verdict { display: inline-block; padding: .05rem .45rem; border-radius: 999px; font-size: .8rem;
  font-weight: 600; white-space: nowrap; }
.verdict.reliable { background: #e1efea; color: var(--good); }
.verdict.tentative { background: #f6ecd8; color: var(--mid); }
.verdict.unreliable { background: #f5e1dd; color: var(--bad); }
.verdict.undefined, .verdict.too-few-units { background: #ececee; color: var(--none); }
td.coef { white-space: nowrap; font-variant-numeric: tabular-nums; padding: .3rem .35rem; }
table.coefficients { font-size: .8rem; }
table.coefficients th { padding: .3rem .35rem; }
td.coef .ci, td.coef .se, td.coef .why { display: block; color: var(--muted); font-size: .78rem; }
td.coef .why { white-space: normal; min-width: 7rem; font-size: .72rem; line-height: 1.3; }
figure { margin: .6rem 0 1rem; background: #fff; border: 1px solid var(--line);
  border-radius: 6px; padding: .7rem; }
figcaption { font-size: .82rem; color: var(--muted); margin-top: .4rem; }
svg.chart-svg { display: block; width: 100%; height: auto; margin: 0 auto; }
.panel { min-width: 0; background: #fff; border: 1px solid var(--line); border-radius: 6px;
  padding: .2rem 1rem .6rem; margin-bottom: 1rem; }
.panel-body { display: grid; grid-template-columns: minmax(0, 5fr) minmax(0, 6fr); gap: 1.2rem;
  align-items: start; }
.panel-body > :only-child { grid-column: 1 / -1; }
@media (max-width: 56rem) { .panel-body { grid-template-columns: minmax(0, 1fr); } }
@media (max-width: 40rem) {
  main { padding: 0 .5rem 2rem; }
  table.agreement .extra { display: none; }
  table.agreement th, table.agreement td { padding: .3rem .3rem; }
  table.agreement th[scope="row"] { overflow-wrap: anywhere; min-width: 5.5rem; }
  table.agreement td.notes { min-width: 14rem; }
}
.panel figure { border: 0; padding: 0; }
table.categories { font-size: .84rem; }
table.categories th, table.categories td { padding: .3rem .4rem; }
table.categories thead th { white-space: nowrap; }
.methods-text { background: #fff; border-left: 4px solid var(--good); padding: .8rem 1rem;
  margin: .6rem 0; font-family: Georgia, "Times New Roman", "DejaVu Serif", serif;
  font-size: .98rem; line-height: 1.6; }
.caution { background: #fbf3e4; border: 1px solid #ead6ad; border-radius: 6px;
  padding: .6rem 1rem; }
.caution ul, .ethics ul { margin: .2rem 0; padding-left: 1.2rem; }
ol.refs { font-size: .85rem; padding-left: 1.2rem; }
ol.refs li { margin-bottom: .25rem; }
code, .hash { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: .8rem;
  word-break: break-all; }
footer { max-width: 72rem; margin: 0 auto; padding: 1rem 1.2rem 2rem; color: var(--muted);
  font-size: .8rem; border-top: 1px solid var(--line); }
@media print {
  @page { margin: 14mm 12mm; }
  html, body { background: #fff; font-size: 10.5pt; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  header.masthead { padding: 0 0 .6rem; background: #fff; }
  nav { display: none; }
  main, footer { max-width: none; padding: 0; }
  .scroll { overflow: visible; }
  table { font-size: 8.5pt; }
  h2, h3 { break-after: avoid; }
  tr, figure, .panel, .methods-text, .card { break-inside: avoid; }
  .panel-body { grid-template-columns: minmax(0, 1fr); }
  .panel figure.heat { max-width: 65%; }
  table.coefficients { font-size: 7pt; table-layout: fixed; }
  table.coefficients th, td.coef { padding: .2rem .15rem; white-space: normal;
    overflow-wrap: anywhere; }
  table.coefficients th:first-child { width: 15%; overflow-wrap: normal; word-break: normal; }
  section#methods, section#reproducibility { break-before: page; }
}
"""


def _e(value: object) -> str:
    return escape(str(value), quote=True)


def inline_svg(svg: str) -> str:
    """matplotlib's width/height in points become a CSS maximum width (the viewBox keeps shape)."""
    end = svg.index(">")
    head = svg[:end]
    width = re.search(r'\swidth="([\d.]+)pt"', head)
    head = re.sub(r'\s(width|height)="[^"]*"', "", head)
    if width:
        head += f' style="max-width:{float(width.group(1)) * 4 / 3:.0f}px"'
    return head + svg[end:]


def _table(
    headers: Iterable[str],
    rows: Iterable[Iterable[str]],
    *,
    cls: str = "",
    numeric: Iterable[int] = (),
    row_headers: bool = False,
) -> str:
    num = set(numeric)
    head = "".join(
        f'<th scope="col"{" class=num" if i in num else ""}>{_e(h)}</th>'
        for i, h in enumerate(headers)
    )
    body = []
    for row in rows:
        cells = "".join(
            f'<th scope="row">{_e(c)}</th>'
            if row_headers and i == 0
            else f"<td{' class=num' if i in num else ''}>{_e(c)}</td>"
            for i, c in enumerate(row)
        )
        body.append(f"<tr>{cells}</tr>")
    attr = f' class="{cls}"' if cls else ""
    return f"<table{attr}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _blocks(blocks: Iterable[Block], charts: Mapping[str, str]) -> str:
    """Generic blocks (:mod:`coderel.report.blocks`): heading, chart, table, note."""
    out = []
    for b in blocks:
        out.append(f'<h3 id="{_e(b.block_id)}">{_e(b.title)}</h3>' if b.block_id else "")
        if b.chart and b.chart in charts:
            out.append(
                f"<figure>{inline_svg(charts[b.chart])}<figcaption>{_e(b.caption)}</figcaption>"
                "</figure>"
            )
        if b.headers:
            table = _table(b.headers, b.rows, numeric=b.numeric, row_headers=True)
            out.append(f'<div class="scroll">{table}</div>')
        if b.note:
            out.append(f'<p class="about">{_e(b.note)}</p>')
    return "".join(out)


def _section(section: Section, body: str) -> str:
    return (
        f'<section id="{section.key}" aria-labelledby="h-{section.key}">'
        f'<h2 id="h-{section.key}">{_e(section.title)}</h2>'
        f'<p class="about">{_e(section.about)}</p>{body}</section>\n'
    )


def _summary(content: ReportContent) -> str:
    s = content.summary
    counts = dict(s.verdicts)
    cards = [
        ("units", f"{s.units:,}", "units"),
        ("coders", str(len(s.coders)), "coder" if len(s.coders) == 1 else "coders"),
        ("variables", str(s.variables), "variables"),
    ]
    for verdict in ("reliable", "tentative", "unreliable", "too few units", "undefined"):
        if verdict in ("reliable", "tentative", "unreliable") or counts.get(verdict):
            cards.append((verdict.replace(" ", "-"), str(counts.get(verdict, 0)), verdict))
    cards.append(("completeness", pct(s.completeness), "cells with a value"))
    html = ['<div class="cards">']
    for cls, n, what in cards:
        html.append(
            f'<div class="card {cls}"><span class="n">{_e(n)}</span>'
            f'<span class="what">{_e(what)}</span></div>'
        )
    html.append("</div>")
    rows = "".join(
        f'<tr><th scope="row">{_e(k)}</th><td>{_e(v)}</td></tr>' for k, v in summary_rows(content)
    )
    html.append(f'<table class="kv"><tbody>{rows}</tbody></table>')
    return "".join(html)


def _agreement(content: ReportContent) -> str:
    level = level_text(content)
    rows = agreement_rows(content)
    show_se = any(r["se"] for r in rows)
    head = ["Variable", "Level", "Units", "Coders", "α", f"{level} CI"]
    head += ["SE"] if show_se else []
    head += ["Verdict", "Notes"]
    # On a narrow screen the secondary columns are hidden (CSS), so that variable, alpha,
    # interval and verdict stay on screen; the notes follow and scroll.
    secondary = {1, 2, 3, 6} if show_se else {1, 2, 3}
    out = ['<div class="scroll"><table class="agreement"><thead><tr>']
    for i, h in enumerate(head):
        classes = (["num"] if 2 <= i <= (6 if show_se else 5) else []) + (
            ["extra"] if i in secondary else []
        )
        cls = f' class="{" ".join(classes)}"' if classes else ""
        out.append(f'<th scope="col"{cls}>{_e(h)}</th>')
    out.append("</tr></thead><tbody>")
    for table_row, r in zip(content.table, rows, strict=True):
        tag = ' <span class="tag">applicability</span>' if r["kind"] != "variable" else ""
        label = (
            f'<span class="label">{_e(r["label"])}</span>' if r["label"] != r["variable"] else ""
        )
        notes = r["notes"] or r["reason"]
        cells = [
            f'<th scope="row">{_e(r["variable"])}{tag}{label}</th>',
            f'<td class="extra">{_e(r["level"])}</td>',
            f'<td class="num extra">{_e(r["units"])}</td>',
            f'<td class="num extra">{_e(r["coders"])}</td>',
            f'<td class="num key-alpha"><strong>{_e(r["alpha"])}</strong></td>',
            f'<td class="num key-interval">{_e(r["interval"])}</td>',
        ]
        if show_se:
            cells.append(f'<td class="num extra">{_e(r["se"])}</td>')
        cells += [
            f'<td class="key-verdict"><span class="verdict '
            f'{_e(r["verdict"].replace(" ", "-"))}">{_e(r["verdict"])}</span></td>',
            f'<td class="notes">{_e(notes)}</td>',
        ]
        out.append(f'<tr id="{_e(table_row.row_id)}">{"".join(cells)}</tr>')
    out.append("</tbody></table></div>")
    keys = present_coefficients(content)
    out.append("<h3>All coefficients</h3>")
    out.append(
        '<p class="about">Each cell: estimate, bootstrap interval and, where computed, standard '
        "error. Percent agreement is not corrected for chance. Coefficients a variable's level "
        "does not support are left out (–).</p>"
    )
    out.append('<div class="scroll"><table class="coefficients"><thead><tr>')
    out.append('<th scope="col">Variable</th>')
    out.extend(f'<th scope="col">{_e(COEFFICIENTS.get(k, k))}</th>' for k in keys)
    out.append("</tr></thead><tbody>")
    for r in content.table:
        cells = [f'<th scope="row">{_e(r.variable)}</th>']
        for k in keys:
            value, interval, se, why = coefficient_parts(r, k)
            parts = [f"<span>{_e(value)}</span>"]
            if why:
                parts.append(f'<span class="why">{_e(why)}</span>')
            if interval:
                parts.append(f'<span class="ci">{_e(interval)}</span>')
            if se:
                parts.append(f'<span class="se">SE {_e(se)}</span>')
            cells.append(f'<td class="coef">{"".join(parts)}</td>')
        out.append(f'<tr id="coef-{_e(r.slug)}">{"".join(cells)}</tr>')
    out.append("</tbody></table></div>")
    return "".join(out)


def _intervals(content: ReportContent, charts: Mapping[str, str]) -> str:
    level = level_text(content)
    return (
        f"<figure>{inline_svg(charts['chart-intervals'])}<figcaption>Krippendorff's α per variable "
        f"with its {level} bootstrap interval ({content.reproducibility.replicates:,} "
        "replicates). Colours follow the verdict: green reliable, ochre tentative, red "
        "unreliable. The dashed line (.667) and the solid line (.800) are conventions of the "
        "field (Krippendorff, 2004), not tests. An interval that crosses a line means the data "
        "cannot tell on which side the variable lies.</figcaption></figure>"
    )


def _categories(content: ReportContent, charts: Mapping[str, str]) -> str:
    if not content.categories:
        return "<p>No categorical variable with per-category figures in this project.</p>"
    out = [
        '<p class="about">Fleiss\' κ for a category (Fleiss, 1971) compares agreement on that '
        "category against all others, corrected for chance. Specific agreement is the share of "
        "the coders' uses of a category that another coder matched, pooled over pairs. Low "
        "values point to a category whose definition or examples need work; a rare category "
        "(small share of values) gives unstable figures.</p>"
    ]
    for p in content.categories:
        out.append(f'<div class="panel" id="{_e(p.panel_id)}">')
        out.append(f"<h3>{_e(p.variable)} <span class='label'>{_e(p.label)}</span></h3>")
        out.append('<div class="panel-body">')
        if p.matrix is not None and p.heatmap_id in charts:
            out.append(
                f'<figure class="heat">{inline_svg(charts[p.heatmap_id])}'
                f"<figcaption>{_e(p.matrix_caption)}</figcaption></figure>"
            )
        heads = [CATEGORY_TITLES.get(c, c) for c in p.category_columns]
        rows = [
            [category_cell(c, v) for c, v in zip(p.category_columns, row, strict=True)]
            for row in p.category_rows
        ]
        table = _table(heads, rows, cls="categories", numeric=range(2, len(heads)))
        note = (
            '<p class="about">Multi-select: each category is treated as chosen or not chosen, '
            "and agreement on that choice is shown per category.</p>"
            if p.multiple
            else ""
        )
        out.append(f'<div class="side">{note}<div class="scroll">{table}</div></div>')
        out.append("</div></div>")
    return "".join(out)


def _coders(content: ReportContent) -> str:
    c = content.coders
    out = ["<h3>Pairs of coders</h3>"]
    if len(c.coders) < 2:
        out.append("<p>Only one coder: no pairs to compare.</p>")
    else:
        heads = ["", *c.coders]
        rows = [
            [a, *(pair_text(content, i, j) for j in range(len(c.coders)))]
            for i, a in enumerate(c.coders)
        ]
        out.append(_table(heads, rows, cls="pairs", numeric=range(1, len(heads)), row_headers=True))
        out.append(
            '<p class="about">Percent agreement pooled over the variables (weighted by the '
            "values both coders gave); Krippendorff's α of the two coders at each variable's "
            "level, averaged over the variables; Cohen's κ (Cohen, 1960) averaged over the "
            "categorical variables.</p>"
        )
    if c.final:
        out.append("<h3>Each coder against the final value</h3>")
        rows = [
            [
                f.coder,
                f"{f.units:,}",
                pct(f.percent_agreement),
                fmt_coef(f.mean_kappa),
                str(f.variables),
            ]
            for f in c.final
        ]
        out.append(
            _table(
                [
                    "Coder",
                    "Values compared",
                    "Agreement with final",
                    "Mean Cohen's κ",
                    "Variables in κ",
                ],
                rows,
                cls="final",
                numeric=range(1, 5),
            )
        )
        out.append(
            '<p class="about">Only settled cells count (agreed, majority, adjudicated, single). '
            "The final value partly comes from the coders themselves, so these figures flatter "
            "every coder; compare coders with each other, not with 100%.</p>"
        )
    return "".join(out)


def _adjudication(content: ReportContent, charts: Mapping[str, str]) -> str:
    adj = content.adjudication
    if adj is None:
        return ""
    total = sum(n for _, n in adj.totals)
    out = [
        f"<p><strong>{adj.resolved:,}</strong> of {total:,} cells are settled; "
        f"<strong>{adj.unresolved:,}</strong> remain unresolved"
        + (f" (rule: {_e(adj.rule)})" if adj.rule else "")
        + ".</p>"
    ]
    if "chart-adjudication" in charts:
        out.append(
            f"<figure>{inline_svg(charts['chart-adjudication'])}<figcaption>Status of every cell "
            "of the final dataset, by variable.</figcaption></figure>"
        )
    heads = ["Variable", *(s.replace("_", " ") for s in STATUSES)]
    rows = [[name, *(f"{n:,}" for n in counts)] for name, counts in adj.by_variable]
    out.append(
        _table(heads, rows, cls="adjudication", numeric=range(1, len(heads)), row_headers=True)
    )
    items = "".join(
        f"<li><strong>{_e(s.replace('_', ' '))}</strong>: {_e(STATUS_MEANING[s])}</li>"
        for s in STATUSES
    )
    out.append(f'<ul class="about">{items}</ul>')
    return "".join(out)


def _methods(content: ReportContent) -> str:
    m = content.methods
    cautions = "".join(f"<li>{_e(t)}</li>" for t in m.cautions[:2])
    refs = "".join(f"<li>{_e(t)}</li>" for t in m.references)
    return (
        f'<div class="methods-text" id="methods-paragraph">{_e(m.paragraph)}</div>'
        f'<div class="caution"><strong>Before you paste</strong><ul>{cautions}</ul></div>'
        f'<h3>References</h3><ol class="refs">{refs}</ol>'
    )


def _ethics(content: ReportContent) -> str:
    del content
    items = "".join(f"<li>{_e(t)}</li>" for t in ETHICS_NOTES)
    return f'<div class="caution ethics"><ul>{items}</ul></div>'


def _reproducibility(content: ReportContent) -> str:
    rows = []
    for item, value, digest in reproducibility_rows(content):
        hash_html = f'<br><span class="hash">SHA-256 {_e(digest)}</span>' if digest else ""
        value_html = f"<code>{_e(value)}</code>" if item == "command" else _e(value)
        rows.append(f'<tr><th scope="row">{_e(item)}</th><td>{value_html}{hash_html}</td></tr>')
    return f'<table class="kv"><tbody>{"".join(rows)}</tbody></table>'


def _numeric(content: ReportContent, charts: Mapping[str, str]) -> str:
    """Per numeric variable: the ICC table, Lin's coefficient and limits per pair, the plots."""
    parts = []
    for panel in content.numeric:
        parts.append(f"<h3>{_e(panel.variable)}</h3><p>{_e(icc_caption(panel))}</p>")
        parts.append(_table(ICC_HEADERS, icc_display(panel), numeric=(3, 4, 5, 6, 7)))
        if panel.pairs:
            parts.append(_table(LIMITS_HEADERS, limits_display(panel), numeric=(1, 2, 3, 4, 5, 6)))
        for pair in panel.pairs:
            svg = charts.get(pair.chart_id)
            if svg:
                parts.append(f'<figure class="chart">{inline_svg(svg)}</figure>')
    return "".join(parts)


def _stability(content: ReportContent) -> str:
    """Units recoded and time between occasions per coder, then agreement per variable."""
    lines = "".join(f"<p>{_e(x)}</p>" for x in recoding_lines(content.stability))
    return lines + _table(STABILITY_HEADERS, stability_display(content.stability), numeric=(3,))


def render_html(content: ReportContent, charts: Mapping[str, str] | None = None) -> str:
    """The whole report as one HTML document (text).

    Parameters
    ----------
    content
        The report's content from :func:`coderel.report.build_report`.
    charts
        Charts by id from :func:`coderel.report.charts.report_charts`; drawn here when omitted.
    """
    charts = dict(charts) if charts is not None else report_charts(content)
    r = content.reproducibility
    s = content.summary
    parts = {
        "summary": lambda: _summary(content),
        "agreement": lambda: _agreement(content),
        "intervals": lambda: _intervals(content, charts),
        "categories": lambda: _categories(content, charts),
        "coders": lambda: (
            _coders(content)
            + (_blocks(content.protocol.coders, charts) if content.protocol else "")
        ),
        "training": lambda: _blocks(content.protocol.training, charts),
        "rounds": lambda: _blocks(content.protocol.rounds, charts),
        "adjudication": lambda: _adjudication(content, charts),
        "methods": lambda: _methods(content),
        "ethics": lambda: _ethics(content),
        "reproducibility": lambda: _reproducibility(content),
        "numeric": lambda: _numeric(content, charts),
        "stability": lambda: _stability(content),
    }
    present = sections(content)
    nav = "".join(f'<li><a href="#{x.key}">{_e(x.title)}</a></li>' for x in present)
    body = "".join(_section(x, parts[x.key]()) for x in present)
    meta = (
        f"Codebook version {r.codebook_version} · {s.units:,} units · {len(s.coders)} "
        f"{'coder' if len(s.coders) == 1 else 'coders'} · "
        f"{r.generated_utc} · coderel {r.coderel_version}"
    )
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        f'<meta http-equiv="Content-Security-Policy" content="{CSP}">\n'
        '<meta name="referrer" content="no-referrer">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f'<meta name="generator" content="coderel {_e(r.coderel_version)}">\n'
        f"<title>Reliability report: {_e(s.title)}</title>\n"
        f"<style>{CSS}</style>\n</head>\n<body>\n"
        f'<header class="masthead"><p class="kicker">Reliability report</p>'
        f'<h1>{_e(s.title)}</h1><p class="meta">{_e(meta)}</p>'
        f'<nav aria-label="sections"><ol>{nav}</ol></nav></header>\n'
        f"<main>\n{body}</main>\n"
        f"<footer>Written by coderel {_e(r.coderel_version)}. This file loads nothing from the "
        "network and holds no narrative text. Reliability is not validity.</footer>\n"
        "</body>\n</html>\n"
    )
