"""Charts of the report as SVG text, drawn with matplotlib (no pyplot state, no display).

Each chart is returned as an ``<svg>`` element ready to be placed inline in HTML or written as a
file. Text stays text (``svg.fonttype = 'none'``), the file fetches nothing, and every drawn
variable carries an ``id`` (matplotlib's ``gid``) so tests can find it.
"""

from __future__ import annotations

import io
import re
import warnings
from collections.abc import Callable, Mapping, Sequence
from functools import partial
from html import escape

import numpy as np
from matplotlib import rc_context
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure

from coderel.report.methods_text import alpha_phrase, common_thresholds, fmt_coef
from coderel.report.model import (
    STATUSES,
    Adjudication,
    CategoryPanel,
    ReportContent,
    VariableRow,
    _slug,
)
from coderel.report.numeric import LimitsRow

#: A calm palette of our own.
INK = "#26313b"
MUTED = "#6b7682"
GRID = "#e3e0d8"
VERDICT_COLOURS: dict[str, str] = {
    "reliable": "#2e6f62",
    "tentative": "#b5832a",
    "unreliable": "#a4473b",
    "undefined": "#8b9098",
    "too few units": "#8b9098",
}
STATUS_COLOURS: dict[str, str] = {
    "agreed": "#2e6f62",
    "within_tolerance": "#4f8a7c",
    "majority": "#6f9f8f",
    "adjudicated": "#4d6f9a",
    "single": "#a9b8c9",
    "unresolved": "#a4473b",
    "not_applicable": "#d8d3c7",
}
HEAT = LinearSegmentedColormap.from_list("coderel_heat", ["#f7f5ef", "#9cc3bb", "#1f5a52"])
#: Off-diagonal cells (confusions) get a warm scale of their own, so that they stand out.
CONFUSION_HEAT = LinearSegmentedColormap.from_list(
    "coderel_confusion", ["#f7f5ef", "#e8b49a", "#a4473b"]
)
_RC = {
    "svg.fonttype": "none",
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 9,
    "axes.edgecolor": MUTED,
    "axes.labelcolor": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "text.color": INK,
}


def _text(value: str, limit: int = 42) -> str:
    """User text for matplotlib: no mathtext (``$`` escaped), shortened to ``limit``."""
    value = str(value)
    if len(value) > limit:
        value = value[: limit - 1] + "…"
    return value.replace("$", r"\$")


#: matplotlib's own group ids (``figure_1``, ``xtick_3``, ``line2d_7``): they would repeat across
#: charts placed in one HTML page, so they are dropped; only our ids and the defs' hashed ids stay.
_AUTO_ID = re.compile(r'\sid="[A-Za-z][\w.]*_\d+"')


def _to_svg(fig: Figure, chart_id: str, titles: Mapping[str, str] | None = None) -> str:
    """The figure as one ``<svg>`` element (no XML prolog, no metadata, no date).

    ``titles`` maps an element id to a tooltip, added as the group's SVG ``<title>`` (escaped).
    The element keeps matplotlib's ``width``/``height`` in points, so a standalone file has its
    size; the HTML renderer replaces them with a CSS width.
    """
    buf = io.StringIO()
    with rc_context({**_RC, "svg.hashsalt": chart_id}), warnings.catch_warnings():
        # Text stays text in the SVG (the viewer's fonts draw it), so a coder name or label in a
        # script DejaVu Sans lacks (CJK, for example) only makes the layout's width estimate rough.
        warnings.filterwarnings(
            "ignore", message=r"Glyph \d+ .* missing from", category=UserWarning
        )
        fig.savefig(buf, format="svg", metadata={"Date": None}, bbox_inches="tight")
    svg = buf.getvalue()
    svg = svg[svg.index("<svg") :]
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.S)
    svg = _AUTO_ID.sub("", svg)
    for gid, title in (titles or {}).items():
        svg = svg.replace(f'<g id="{gid}">', f'<g id="{gid}"><title>{escape(title)}</title>', 1)
    head_end = svg.index(">")
    head = svg[:head_end] + f' id="{chart_id}" role="img" class="chart-svg"'
    return head + svg[head_end:].strip() + "\n"


def standalone_svg(svg: str) -> str:
    """An inline chart as a file of its own (XML prolog added)."""
    return '<?xml version="1.0" encoding="utf-8" standalone="no"?>\n' + svg


def _figure(width: float, height: float) -> Figure:
    with rc_context(_RC):
        return Figure(figsize=(width, height), dpi=72, layout="constrained")


def interval_chart(
    rows: Sequence[VariableRow], *, reliable: float = 0.800, tentative: float = 0.667
) -> str:
    """Krippendorff's alpha per variable with its bootstrap interval and the two conventions.

    The threshold lines (``reliable``, ``tentative``) are labelled as conventions of the field
    (Krippendorff, 2004, p. 241).
    """
    n = max(len(rows), 1)
    with rc_context(_RC):
        fig = _figure(7.5, 0.9 + 0.34 * n)
        ax = fig.add_subplot()
        lows = [0.0]
        titles: dict[str, str] = {}
        for i, row in enumerate(rows):
            y = n - 1 - i
            a = row.alpha
            colour = VERDICT_COLOURS.get(row.verdict, MUTED)
            if a is None or a.estimate is None:
                t = ax.text(0.0, y, "  undefined", va="center", color=MUTED, fontsize=8)
                t.set_gid(row.chart_id)
                titles[row.chart_id] = f"{row.variable}: alpha undefined"
                continue
            lows.append(a.estimate)
            if a.ci_low is not None and a.ci_high is not None:
                lows.append(a.ci_low)
                (line,) = ax.plot(
                    [a.ci_low, a.ci_high], [y, y], color=colour, linewidth=2.2, alpha=0.55
                )
                line.set_gid(f"ci-{row.slug}")
            (dot,) = ax.plot([a.estimate], [y], "o", color=colour, markersize=6)
            dot.set_gid(row.chart_id)
            phrase = alpha_phrase(a.estimate, a.ci_low, a.ci_high, 95).replace(", 95% CI", "")
            titles[row.chart_id] = f"{row.variable}: {phrase} ({row.verdict})"
        xmin = max(-1.0, min(-0.05, float(np.floor(min(lows) * 10) / 10)))
        ax.set_xlim(xmin, 1.02)
        ax.set_ylim(-0.7, n - 0.3 + 0.6)
        for value, style, name, side in (
            (tentative, (0, (4, 3)), f"{fmt_coef(tentative, 3)} tentative ", "right"),
            (reliable, "-", f" {fmt_coef(reliable, 3)} reliable", "left"),
        ):
            ax.axvline(value, color=MUTED, linestyle=style, linewidth=1)
            ax.text(
                value,
                1.005,
                name,
                ha=side,
                va="bottom",
                fontsize=7.5,
                color=MUTED,
                transform=ax.get_xaxis_transform(),
            )
        ax.axvline(0, color=GRID, linewidth=1)
        labels = [_text(r.variable) for r in rows]
        ax.set_yticks(range(n - 1, n - 1 - len(rows), -1), labels)
        ax.set_xlabel(
            "Krippendorff's alpha with bootstrap interval; lines at conventions of the field "
            "(Krippendorff, 2004)"
        )
        ax.grid(axis="x", color=GRID, linewidth=0.6)
        ax.set_axisbelow(True)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        return _to_svg(fig, "chart-intervals", titles)


def _code_label(code: str, label: str) -> str:
    """``1 Black bear`` for numeric codes; the label alone for text codes (``Daytime``)."""
    if label == code:
        return code
    return f"{code} {label}" if code.lstrip("-").isdigit() else label


def heat_shades(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Colour (hex) and shade (0-1) of every cell of a confusion table.

    The diagonal (agreement) is scaled by its own largest count on a green scale; the off-diagonal
    cells (confusions) by the largest off-diagonal count on a warm scale, so that 14 confusions
    stand out even beside a diagonal of 200 (one scale for both would shade them alike).
    """
    matrix = np.asarray(matrix, dtype=float)
    k = matrix.shape[0]
    diagonal = np.eye(k, dtype=bool)
    shade = np.zeros_like(matrix)
    top_diag = matrix[diagonal].max() if k else 0.0
    top_off = matrix[~diagonal].max() if k > 1 else 0.0
    if top_diag > 0:
        shade[diagonal] = matrix[diagonal] / top_diag
    if top_off > 0:
        shade[~diagonal] = matrix[~diagonal] / top_off
    colours = np.empty(matrix.shape, dtype=object)
    for i in range(k):
        for j in range(k):
            cmap = HEAT if i == j else CONFUSION_HEAT
            r, g, b, _ = cmap(float(shade[i, j]))
            colours[i, j] = f"#{round(r * 255):02x}{round(g * 255):02x}{round(b * 255):02x}"
    return colours, shade


def confusion_chart(panel: CategoryPanel) -> str:
    """Heat map of one variable's coder-by-coder table (counts in the cells).

    Agreement (the diagonal) and confusions (off the diagonal) are shaded on separate scales
    (:func:`heat_shades`); every cell is a rectangle with the id ``<heat map id>-<row>-<column>``.
    """
    from matplotlib.patches import Rectangle

    if panel.matrix is None:
        raise ValueError(f"{panel.variable} has no confusion table")
    matrix = np.asarray(panel.matrix, dtype=float)
    k = len(panel.codes)
    size = min(6.0, 1.6 + 0.45 * k)
    colours, shade = heat_shades(matrix)
    with rc_context(_RC):
        fig = _figure(size + 0.8, size)
        ax = fig.add_subplot()
        for i in range(k):
            for j in range(k):
                cell = Rectangle(
                    (j - 0.5, i - 0.5), 1, 1, facecolor=colours[i, j], edgecolor="white"
                )
                cell.set_gid(f"{panel.heatmap_id}-{i}-{j}")
                ax.add_patch(cell)
                value = int(matrix[i, j])
                colour = "white" if shade[i, j] > 0.6 else INK
                ax.text(j, i, str(value), ha="center", va="center", color=colour, fontsize=8)
        ax.set_xlim(-0.5, k - 0.5)
        ax.set_ylim(k - 0.5, -0.5)
        ax.set_aspect("equal")
        ax.set_title(
            "agreement (diagonal, green) and confusions (off it, red) on separate scales",
            fontsize=7.5,
            color=MUTED,
        )
        labels = [
            _text(_code_label(c, lab), 18) for c, lab in zip(panel.codes, panel.labels, strict=True)
        ]
        ax.set_xticks(range(k), labels, rotation=40, ha="right")
        ax.set_yticks(range(k), labels)
        ax.set_xlabel(_text(panel.column_title, 40))
        ax.set_ylabel(_text(panel.row_title, 40))
        ax.tick_params(length=0)
        for spine in ax.spines.values():
            spine.set_visible(False)
        return _to_svg(fig, panel.heatmap_id)


def adjudication_chart(adjudication: Adjudication) -> str:
    """Stacked bars: the status of every final cell, by variable."""
    rows = adjudication.by_variable
    n = max(len(rows), 1)
    with rc_context(_RC):
        fig = _figure(7.5, 1.2 + 0.3 * n)
        ax = fig.add_subplot()
        left = np.zeros(len(rows))
        ys = np.arange(len(rows))[::-1]
        for s_index, status in enumerate(STATUSES):
            widths = np.array([counts[s_index] for _, counts in rows], dtype=float)
            if not widths.any():
                continue
            bars = ax.barh(
                ys,
                widths,
                left=left,
                color=STATUS_COLOURS[status],
                label=status.replace("_", " "),
                height=0.6,
            )
            for patch, (name, _) in zip(bars.patches, rows, strict=True):
                patch.set_gid(f"status-{status}-{_slug(name)}")
            left += widths
        ax.set_yticks(ys, [_text(name) for name, _ in rows])
        ax.set_xlabel("cells of the final dataset (units)")
        fig.legend(loc="outside lower center", ncol=6, frameon=False, fontsize=7.5)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        return _to_svg(fig, "chart-adjudication")


LIMIT_COLOUR = "#a4473b"
BIAS_COLOUR = "#2e6f62"


def bland_altman_chart(row: LimitsRow) -> str:
    """One Bland-Altman plot; the SVG's id is ``row.chart_id``.

    Difference (coder a minus coder b) against the mean of the two values, one point per unit,
    with the mean difference and the limits of agreement as lines and their confidence intervals
    as shaded bands (Bland & Altman 1986, Lancet 327, 307-310, Figure 2); with a proportional
    bias, the regression line of differences on means is drawn too (Bland & Altman 1999).
    """
    fig = _figure(5.6, 3.4)
    ax = fig.add_subplot()
    means = np.asarray(row.means, dtype=float)
    diffs = np.asarray(row.differences, dtype=float)
    ax.scatter(
        means, diffs, s=12, color=INK, alpha=0.55, linewidths=0, gid=f"{row.chart_id}-points"
    )
    lines = (
        ("mean difference", row.bias, row.bias_ci, BIAS_COLOUR, "-"),
        ("lower limit", row.lower, row.lower_ci, LIMIT_COLOUR, "--"),
        ("upper limit", row.upper, row.upper_ci, LIMIT_COLOUR, "--"),
    )
    for (name, value, ci, colour, style), part in zip(
        lines, ("bias", "lower", "upper"), strict=True
    ):
        if value is None:
            continue
        ax.axhline(
            value, color=colour, linestyle=style, linewidth=1.1, gid=f"{row.chart_id}-{part}"
        )
        if ci is not None:
            ax.axhspan(ci[0], ci[1], color=colour, alpha=0.10, linewidth=0)
        ax.text(
            1.01,
            value,
            f"{name} {value:.1f}".replace("-", "\u2212"),
            transform=ax.get_yaxis_transform(),
            va="center",
            fontsize=7.5,
            color=colour,
        )
    ax.axhline(0, color=GRID, linewidth=0.8)
    ax.set_xlabel(_text(f"mean of {row.coder_a} and {row.coder_b} ({row.variable})", 70))
    ax.set_ylabel(_text(f"{row.coder_a} − {row.coder_b}", 40))
    if row.proportional and row.slope is not None and len(means) > 1:
        xs = np.array([means.min(), means.max()])
        intercept = float(np.mean(diffs) - row.slope * np.mean(means))
        ax.plot(xs, intercept + row.slope * xs, color=MUTED, linewidth=0.9, linestyle=":")
        ax.set_title(
            "differences change with the size of the values (proportional bias)",
            fontsize=8,
            color=MUTED,
        )
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.grid(color=GRID, linewidth=0.5)
    ax.set_axisbelow(True)
    return _to_svg(fig, row.chart_id)


def chart_makers(content: ReportContent) -> dict[str, Callable[[], str]]:
    """Every chart of a report by chart id, each as a call that draws it (SVG text).

    The ids are known without drawing, so a writer can draw each chart when it places it and
    let go of it after (:func:`coderel.report.write.write_report`): a Bland-Altman plot holds one
    point per unit, tens of megabytes of SVG at a hundred thousand units.
    """
    main = [r for r in content.table if r.kind == "variable"] or list(content.table)
    base = common_thresholds(main)
    thresholds = {"reliable": base[0], "tentative": base[1]} if main else {}
    out: dict[str, Callable[[], str]] = {
        "chart-intervals": partial(interval_chart, content.table, **thresholds)
    }
    for panel in content.categories:
        if panel.matrix is not None:
            out[panel.heatmap_id] = partial(confusion_chart, panel)
    if content.adjudication is not None and content.adjudication.by_variable:
        out["chart-adjudication"] = partial(adjudication_chart, content.adjudication)
    if content.protocol is not None:
        out.update({k: partial(str, svg) for k, svg in content.protocol.charts.items()})
    if content.numeric:
        for panel in content.numeric:
            for pair in panel.pairs:
                if pair.units >= 2:
                    out[pair.chart_id] = partial(bland_altman_chart, pair)
    return out


def report_charts(content: ReportContent) -> dict[str, str]:
    """Every chart of a report as SVG text, by chart id (drawn once, used by HTML and Markdown)."""
    return {chart_id: draw() for chart_id, draw in chart_makers(content).items()}
