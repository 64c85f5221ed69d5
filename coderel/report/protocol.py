"""The protocol's parts of the report, built from their results: coder diagnostics (in the Coders
section), training against the answer key, and reliability across rounds with its chart.

Numbers are copied from the results (:mod:`coderel.agree.coders`, :mod:`coderel.protocol.score`,
:mod:`coderel.protocol.trend`); nothing is computed here but the layout.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from matplotlib import rc_context

from coderel.report.blocks import Block, ProtocolParts
from coderel.report.charts import _RC, GRID, INK, MUTED, VERDICT_COLOURS, _figure, _text, _to_svg
from coderel.report.fmt import pct
from coderel.report.methods_text import fmt_coef
from coderel.report.model import _slug

if TYPE_CHECKING:
    from coderel.agree.coders import CoderDiagnostics
    from coderel.protocol.score import ScoreResult
    from coderel.protocol.trend import TrendResult

TREND_CHART = "chart-trend"
_SHORT = {
    "cohen_kappa": "Cohen's κ",
    "weighted_kappa_quadratic": "weighted κ (quadratic)",
    "krippendorff_alpha": "α",
}


def _ci(ci: tuple[float, float] | None) -> str:
    return f" [{fmt_coef(ci[0], 3)}, {fmt_coef(ci[1], 3)}]" if ci else ""


def _p_text(p: float | None) -> str:
    """``, p = .012`` (APA style, no leading zero), ``, p < .001``, or nothing."""
    if p is None:
        return ""
    return ", p < .001" if p < 0.001 else f", p = {p:.3f}".replace("0.", ".", 1)


def _signed(x: float | None, ci: tuple[float, float] | None = None) -> str:
    if x is None:
        return "–"
    text = f"{x:+.3f}".replace("-", "−")
    if ci:
        lo, hi = (f"{v:+.3f}".replace("-", "−") for v in ci)
        text += f" [{lo}, {hi}]"
    return text


def _p(p: float | None) -> str:
    if p is None:
        return "–"
    return "< .001" if p < 0.001 else fmt_coef(p, 3)


def _test(t: Any) -> str:
    if t is None:
        return ""
    if t.statistic is None:
        return "–"
    p = t.exact_p_value if t.exact_p_value is not None else t.p_value
    return f"χ²({t.df}) = {t.statistic:.2f}, p {_p(p)}"


def coder_blocks(diag: CoderDiagnostics) -> tuple[Block, ...]:
    """Drop-one alpha, homogeneity tests per pair, each coder's category shares."""
    from coderel.agree.coders import CAUTION

    coders = list(diag.coders)
    blocks = []
    if len(coders) >= 3:
        rows = []
        for v in diag.variables:
            cells = {d.coder: d for d in v.drop_one}
            low = v.lowers_most
            rows.append(
                (
                    v.variable,
                    fmt_coef(v.alpha, 3),
                    *(
                        "–"
                        if cells.get(c) is None or cells[c].alpha_without is None
                        else f"{fmt_coef(cells[c].alpha_without, 3)} ({_signed(cells[c].change)})"
                        for c in coders
                    ),
                    low.coder if low else "",
                )
            )
        blocks.append(
            Block(
                "Alpha without each coder",
                ("Variable", "α, every coder", *(f"without {c}" for c in coders), "rises most"),
                tuple(rows),
                numeric=tuple(range(1, len(coders) + 2)),
                note="Krippendorff's α of the variable computed without each coder in turn "
                "(change from α with every coder in brackets). A rise without a coder shows whose "
                "codings pull the variable down: a reason to go through the codebook's "
                "definitions with that coder, not a judgement of who is right.",
                block_id="coders-drop-one",
            )
        )
    rows = [
        (
            v.variable,
            f"{h.coder_a} / {h.coder_b}",
            f"{h.units:,}",
            *(_test(h.tests.get(k)) for k in ("stuart_maxwell", "bhapkar", "bowker", "mcnemar")),
        )
        for v in diag.variables
        for h in v.homogeneity
    ]
    if rows:
        blocks.append(
            Block(
                "Marginal homogeneity per pair of coders",
                ("Variable", "Coders", "Units", "Stuart–Maxwell", "Bhapkar", "Bowker", "McNemar"),
                tuple(rows),
                numeric=(2,),
                note="Do two coders use the categories equally often? Stuart–Maxwell (Stuart, "
                "1955; Maxwell, 1970) and Bhapkar (1966) test the two coders' category shares, "
                "Bowker (1948) the symmetry of their table, McNemar (1947; exact p) a two-category "
                f"variable. Read with care: {CAUTION}.",
                block_id="coders-homogeneity",
            )
        )
    rows = [
        (
            v.variable,
            f"{s.code} = {s.label}",
            pct(s.pooled),
            *(pct(s.by_coder.get(c)) for c in coders),
        )
        for v in diag.variables
        for s in v.shares
    ]
    if rows:
        blocks.append(
            Block(
                "Each coder's share of each category",
                ("Variable", "Category", "Pooled", *coders),
                tuple(rows),
                numeric=tuple(range(2, len(coders) + 3)),
                note="A coder whose share of a category stands far from the pooled share uses "
                "that category more (or less) than the others.",
                block_id="coders-shares",
            )
        )
    return tuple(blocks)


def training_blocks(result: ScoreResult) -> tuple[Block, ...]:
    """Per trainee a summary, then per trainee and variable the scores against the key."""
    summary = tuple(
        (
            s.trainee,
            f"{s.units:,}",
            f"{s.passed} of {s.variables}",
            ", ".join(s.below) or "none",
            f"{s.differences:,}",
        )
        for s in result.summaries
    )
    rows = []
    for v in result.scores:
        judged = v.coefficients.get(v.judged_by)
        kappa = v.coefficients.get("cohen_kappa")
        pa = v.coefficients.get("percent_agreement")
        rows.append(
            (
                v.trainee,
                v.variable,
                f"{v.units:,}",
                pct(pa.estimate) if pa else "–",
                "–"
                if kappa is None or kappa.estimate is None
                else fmt_coef(kappa.estimate, 3)
                + _ci(kappa.ci)
                + (f", SE {fmt_coef(kappa.se, 3)}" if kappa.se is not None else ""),
                _SHORT.get(v.judged_by, v.judged_by)
                + (
                    f" {fmt_coef(judged.estimate, 3)}{_ci(judged.ci)}"
                    if judged is not None and judged.estimate is not None
                    else " undefined"
                ),
                fmt_coef(v.threshold, 3),
                v.verdict,
            )
        )
    return (
        Block(
            f"Trainees against the key ({result.key_coder}, {result.key_units:,} units)",
            ("Trainee", "Units coded", "Variables passing", "Below the threshold", "Differences"),
            summary,
            numeric=(1, 4),
            note="The feedback workbook of each trainee (coderel score -o) lists every "
            "difference with the key's value and note.",
            block_id="training-summary",
        ),
        Block(
            "Each trainee and variable",
            (
                "Trainee",
                "Variable",
                "Units",
                "Agreement",
                "Cohen's κ [CI], SE",
                "Judged by",
                "Threshold",
                "Verdict",
            ),
            tuple(rows),
            numeric=(2, 3, 6),
            note=" ".join(result.notes)
            + f". Intervals: {result.replicates:,} bootstrap replicates over the key's units, "
            f"seed {result.seed}; SE: Fleiss, Cohen & Everitt (1969).",
            block_id="training-scores",
        ),
    )


def trend_chart(result: TrendResult) -> str:
    """Small multiples: alpha by round with its interval, one panel per variable, with the
    reliable and tentative thresholds (conventions of the field, Krippendorff 2004)."""
    variables = list(result.variables)
    n = max(len(variables), 1)
    cols = min(4, n)
    rows = math.ceil(n / cols)
    rounds = list(result.rounds)
    with rc_context(_RC):
        fig = _figure(2.1 * cols + 0.4, 1.8 * rows + 0.5)
        axes = fig.subplots(rows, cols, squeeze=False)
        titles = {}
        for idx, var in enumerate(variables):
            ax = axes[idx // cols][idx % cols]
            reliable, tentative = result.thresholds[var]
            ax.axhline(reliable, color=MUTED, linewidth=0.8)
            ax.axhline(tentative, color=MUTED, linewidth=0.8, linestyle=(0, (4, 3)))
            xs, ys = [], []
            for x, r in enumerate(rounds):
                a = result.alpha(r, var).alpha
                if a.estimate is None:
                    continue
                xs.append(x)
                ys.append(a.estimate)
                colour = VERDICT_COLOURS[
                    "reliable"
                    if a.estimate >= reliable
                    else "tentative"
                    if a.estimate >= tentative
                    else "unreliable"
                ]
                if a.ci:
                    ax.plot([x, x], list(a.ci), color=colour, linewidth=2, alpha=0.55)
                (dot,) = ax.plot([x], [a.estimate], "o", color=colour, markersize=4.5)
                gid = f"trend-{_slug(var)}-{x}"
                dot.set_gid(gid)
                titles[gid] = f"{var}, {r}: alpha {fmt_coef(a.estimate, 3)}{_ci(a.ci)}"
            if xs:
                ax.plot(xs, ys, color=INK, linewidth=0.8, alpha=0.6)
            ax.set_title(_text(var, 28), fontsize=8.5)
            ax.set_ylim(min(-0.05, min(ys, default=0) - 0.05), 1.05)
            ax.set_xticks(range(len(rounds)), [_text(r, 12) for r in rounds], rotation=30)
            ax.set_xlim(-0.4, len(rounds) - 0.6)
            ax.grid(axis="y", color=GRID, linewidth=0.5)
            for side in ("top", "right"):
                ax.spines[side].set_visible(False)
        for idx in range(len(variables), rows * cols):
            axes[idx // cols][idx % cols].set_visible(False)
        fig.supylabel("Krippendorff's alpha", fontsize=8.5)
        return _to_svg(fig, TREND_CHART, titles)


def rounds_blocks(result: TrendResult) -> tuple[Block, ...]:
    """The alpha-by-round chart and table, then the coder drift table."""
    pairs = list(zip(result.rounds, result.rounds[1:], strict=False))
    rows = []
    for var in result.variables:
        cells = []
        for r in result.rounds:
            a = result.alpha(r, var).alpha
            cells.append("–" if a.estimate is None else fmt_coef(a.estimate, 3) + _ci(a.ci))
        for c in (c for c in result.changes if c.variable == var):
            cells.append(_signed(c.change, c.ci) + _p_text(c.p_value))
        rows.append((var, *cells))
    drift = tuple(
        (
            c.coder,
            c.round,
            "–"
            if c.agreement is None
            else pct(c.agreement) + (f" [{pct(c.ci[0])}, {pct(c.ci[1])}]" if c.ci else ""),
            _signed(c.change, c.change_ci),
            _signed(c.others_change),
            "drift" if c.drift else "",
        )
        for c in result.coders
    )
    from coderel.protocol.trend import DRIFT_WORDS

    return (
        Block(
            "Alpha by round",
            ("Variable", *result.rounds, *(f"change {a} → {b}" for a, b in pairs)),
            tuple(rows),
            numeric=tuple(range(1, 1 + len(result.rounds) + len(pairs))),
            chart=TREND_CHART,
            caption="Krippendorff's α by round with bootstrap intervals, one panel per variable; "
            "solid line: reliable (.800), dashed: tentative (.667), conventions of the field "
            "(Krippendorff, 2004).",
            note=f"Each round resampled on its own ({result.replicates:,} replicates, seeds "
            f"derived from {result.seed}); the interval of a change is the percentile interval of "
            "the difference of the two rounds' replicates; p: permutation test of no change (the "
            "two rounds' units shuffled between them).",
            block_id="rounds-alpha",
        ),
        Block(
            "Coders by round",
            ("Coder", "Round", "Agreement with the others", "Change", "Others' change", "Flag"),
            drift,
            numeric=(2, 3, 4),
            note="Agreement: share of identical values with each other coder over every "
            f"variable, averaged over the coder's partners. {DRIFT_WORDS}.",
            block_id="rounds-coders",
        ),
    )


def protocol_parts(
    diagnostics: CoderDiagnostics | None = None,
    scored: ScoreResult | None = None,
    trended: TrendResult | None = None,
) -> ProtocolParts:
    """Blocks, xlsx sheets, charts and JSON of the protocol's results given."""
    frames: dict[str, Any] = {}
    charts: dict[str, str] = {}
    data: dict[str, Any] = {}
    coders = training = rounds = ()
    if diagnostics is not None:
        coders = coder_blocks(diagnostics)
        frames.update(
            coders_drop_one=diagnostics.to_frame(),
            coders_homogeneity=diagnostics.homogeneity_frame(),
            coders_shares=diagnostics.shares_frame(),
        )
        data["coder_diagnostics"] = diagnostics.to_dict()
    if scored is not None:
        training = training_blocks(scored)
        frames["training"] = scored.to_frame()
        data["training"] = scored.to_dict()
    if trended is not None:
        rounds = rounds_blocks(trended)
        frames["rounds"] = trended.to_frame()
        frames["rounds_coders"] = trended.coders_frame()
        charts[TREND_CHART] = trend_chart(trended)
        data["rounds"] = trended.to_dict()
    return ProtocolParts(coders, training, rounds, frames, charts, data)
