"""Report sections of numeric variables (ICC, Lin's coefficient, limits of agreement) and of
stability (each coder against their own second coding), for the HTML, Markdown and xlsx forms.

The panels are frozen dataclasses filled from the agreement result's numeric detail
(:mod:`coderel.agree.numeric`) and from a :class:`coderel.stability.StabilityResult`; the
renderers below read only the panels.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from coderel.report.methods_text import fmt_coef, fmt_interval, number_word
from coderel.report.model import _slug

#: Columns of the ICC table: the Shrout & Fleiss name, McGraw & Wong's, the model.
ICC_HEADERS = (
    "Shrout & Fleiss",
    "McGraw & Wong",
    "model",
    "ICC",
    "F-test CI",
    "bootstrap CI",
    "F",
    "p",
)


def _n(value: Any) -> float | None:
    if value is None:
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if out == out and abs(out) != float("inf") else None


def _num(value: float | None, digits: int = 2) -> str:
    """A number that is not a coefficient (differences, limits): plain, with a minus sign."""
    if value is None:
        return "–"
    text = f"{value:.{digits}f}"
    return text.replace("-", "\u2212")


def _ci(ci: Sequence[float] | None, digits: int = 2) -> str:
    if not ci:
        return "–"
    return f"[{_num(ci[0], digits)}, {_num(ci[1], digits)}]"


def _p(p: float | None) -> str:
    if p is None:
        return "–"
    return "< .001" if p < 0.001 else fmt_coef(p, 3)


@dataclass(frozen=True, slots=True)
class IccRow:
    shrout_fleiss: str
    mcgraw_wong: str
    model: str
    estimate: float | None
    ci_f: tuple[float, float] | None
    ci_boot: tuple[float, float] | None
    f: float | None
    p_value: float | None


@dataclass(frozen=True, slots=True)
class LimitsRow:
    """One coder pair on one numeric variable: Lin's rho_c and Bland-Altman limits."""

    variable: str
    coder_a: str
    coder_b: str
    units: int
    ccc: float | None
    ccc_ci: tuple[float, float] | None
    bias: float | None
    bias_ci: tuple[float, float] | None
    sd: float | None
    lower: float | None
    lower_ci: tuple[float, float] | None
    upper: float | None
    upper_ci: tuple[float, float] | None
    slope: float | None
    slope_p: float | None
    proportional: bool
    means: tuple[float, ...]
    differences: tuple[float, ...]

    @property
    def chart_id(self) -> str:
        return f"ba-{_slug(self.variable)}-{_slug(self.coder_a)}-{_slug(self.coder_b)}"


@dataclass(frozen=True, slots=True)
class NumericPanel:
    """A numeric variable's ICC table and its coder pairs."""

    variable: str
    label: str
    level: str
    units_used: int
    units_left_out: int
    coders: int
    values: str
    icc: tuple[IccRow, ...]
    pairs: tuple[LimitsRow, ...]


@dataclass(frozen=True, slots=True)
class StabilityCoder:
    coder: str
    first_occasion: str
    second_occasion: str
    units_recoded: int
    common_units: int
    days: int | None


@dataclass(frozen=True, slots=True)
class StabilityRow:
    coder: str
    variable: str
    kind: str
    level: str
    units: int
    alpha: float | None
    alpha_ci: tuple[float, float] | None
    kappa: float | None
    kappa_ci: tuple[float, float] | None
    icc: float | None
    icc_ci: tuple[float, float] | None
    verdict: str


@dataclass(frozen=True, slots=True)
class StabilityPanel:
    coders: tuple[StabilityCoder, ...]
    rows: tuple[StabilityRow, ...]


def _tuple(ci: Any) -> tuple[float, float] | None:
    if not ci:
        return None
    lo, hi = _n(ci[0]), _n(ci[1])
    return (lo, hi) if lo is not None and hi is not None else None


def numeric_panels(result: Any) -> tuple[NumericPanel, ...]:
    """One panel per variable of ``result`` that has a numeric detail."""
    out = []
    for va in result.variables:
        detail = getattr(va, "numeric", None)
        if detail is None or detail.icc is None:
            continue
        icc = detail.icc
        rows = []
        for form in icc.forms:
            boot = va.coefficients.get(form.key)
            d = form.to_dict()
            rows.append(
                IccRow(
                    d["shrout_fleiss"],
                    d["mcgraw_wong"],
                    d["model"],
                    _n(form.estimate),
                    _tuple(form.ci_f),
                    _tuple(boot.ci) if boot is not None else None,
                    _n(form.f),
                    _n(form.p_value),
                )
            )
        pairs = []
        for p in detail.pairs:
            lo, c = p.limits, p.ccc
            pb = lo.proportional_bias
            pairs.append(
                LimitsRow(
                    variable=va.variable,
                    coder_a=p.coder_a,
                    coder_b=p.coder_b,
                    units=lo.n,
                    ccc=_n(c.estimate),
                    ccc_ci=_tuple(c.ci_z),
                    bias=_n(lo.mean_difference),
                    bias_ci=_tuple(lo.mean_difference_ci),
                    sd=_n(lo.sd),
                    lower=_n(lo.lower),
                    lower_ci=_tuple(lo.lower_ci),
                    upper=_n(lo.upper),
                    upper_ci=_tuple(lo.upper_ci),
                    slope=_n(pb.slope) if pb else None,
                    slope_p=_n(pb.p_value) if pb else None,
                    proportional=bool(pb and pb.significant),
                    means=tuple(float(v) for v in lo.means),
                    differences=tuple(float(v) for v in lo.differences),
                )
            )
        out.append(
            NumericPanel(
                variable=va.variable,
                label=str(va.label or va.variable),
                level=va.level,
                units_used=icc.units_used,
                units_left_out=icc.units_left_out,
                coders=icc.coders,
                values=icc.values,
                icc=tuple(rows),
                pairs=tuple(pairs),
            )
        )
    return tuple(out)


def _est(va: Any, key: str) -> tuple[float | None, tuple[float, float] | None]:
    est = va.coefficients.get(key)
    if est is None:
        return None, None
    return _n(est.estimate), _tuple(est.ci)


def stability_panel(result: Any) -> StabilityPanel | None:
    """The stability panel of a :class:`coderel.stability.StabilityResult` (``None`` for none)."""
    if result is None:
        return None
    coders, rows = [], []
    for c in result.coders:
        coders.append(
            StabilityCoder(
                c.coder,
                c.first_occasion,
                c.second_occasion,
                c.units_recoded,
                c.common_units,
                c.days,
            )
        )
        if c.agreement is None:
            continue
        for va in c.agreement.variables:
            a, a_ci = _est(va, "krippendorff_alpha")
            k, k_ci = _est(va, "cohen_kappa")
            i, i_ci = _est(va, "icc_2_1")
            rows.append(
                StabilityRow(
                    c.coder,
                    va.variable,
                    va.kind,
                    va.level,
                    va.units,
                    a,
                    a_ci,
                    k,
                    k_ci,
                    i,
                    i_ci,
                    va.verdict,
                )
            )
    return StabilityPanel(tuple(coders), tuple(rows))


# ---- tables shared by the renderers --------------------------------------------------------
def icc_display(panel: NumericPanel) -> list[list[str]]:
    return [
        [
            r.shrout_fleiss,
            r.mcgraw_wong,
            r.model,
            fmt_coef(r.estimate),
            fmt_interval(*(r.ci_f or (None, None))),
            fmt_interval(*(r.ci_boot or (None, None))),
            _num(r.f),
            _p(r.p_value),
        ]
        for r in panel.icc
    ]


LIMITS_HEADERS = (
    "coders",
    "units",
    "Lin's ρc [CI]",
    "mean difference [CI]",
    "SD",
    "lower limit [CI]",
    "upper limit [CI]",
    "proportional bias",
)


def limits_display(panel: NumericPanel) -> list[list[str]]:
    rows = []
    for p in panel.pairs:
        bias = "–"
        if p.slope is not None:
            bias = f"slope {_num(p.slope, 3)}, p {_p(p.slope_p)}" + (
                " (yes)" if p.proportional else ""
            )
        rows.append(
            [
                f"{p.coder_a} − {p.coder_b}",
                str(p.units),
                f"{fmt_coef(p.ccc)} {fmt_interval(*(p.ccc_ci or (None, None)))}".strip(),
                f"{_num(p.bias)} {_ci(p.bias_ci)}",
                _num(p.sd),
                f"{_num(p.lower)} {_ci(p.lower_ci)}",
                f"{_num(p.upper)} {_ci(p.upper_ci)}",
                bias,
            ]
        )
    return rows


def icc_caption(panel: NumericPanel) -> str:
    left = (
        f"; {panel.units_left_out} unit(s) with a missing value left out"
        if panel.units_left_out
        else ""
    )
    what = "category positions 1, 2, ..." if panel.values == "positions" else "the coded numbers"
    return (
        f"{panel.variable}: ANOVA on the {panel.units_used} units coded by all {panel.coders} "
        f"coders ({what}){left}. F-test intervals: Shrout & Fleiss (1979), McGraw & Wong (1996)."
    )


STABILITY_HEADERS = (
    "coder",
    "variable",
    "level",
    "units",
    "Krippendorff's α [CI]",
    "Cohen's κ [CI]",
    "ICC(A,1) [CI]",
    "verdict",
)


def _coef_ci(value: float | None, ci: tuple[float, float] | None) -> str:
    if value is None:
        return "–"
    return f"{fmt_coef(value)} {fmt_interval(*ci)}" if ci else fmt_coef(value)


def stability_display(panel: StabilityPanel) -> list[list[str]]:
    return [
        [
            r.coder,
            r.variable,
            r.level,
            str(r.units),
            _coef_ci(r.alpha, r.alpha_ci),
            _coef_ci(r.kappa, r.kappa_ci),
            _coef_ci(r.icc, r.icc_ci),
            r.verdict,
        ]
        for r in panel.rows
    ]


def recoding_lines(panel: StabilityPanel) -> list[str]:
    lines = []
    for c in panel.coders:
        when = ""
        if c.days is not None:
            span = f"{c.first_occasion} to {c.second_occasion}"
            when = f" {c.days} days after the first coding ({span})"
        lines.append(
            f"{c.coder} recoded {c.units_recoded} unit(s){when}; {c.common_units} were coded on "
            "both occasions."
        )
    return lines


# ---- methods paragraph ---------------------------------------------------------------------
def methods_sentences(
    numeric: Sequence[NumericPanel], stability: StabilityPanel | None, level: int
) -> tuple[list[str], list[str]]:
    """Sentences and reference keys for numeric variables and stability."""
    s: list[str] = []
    refs: list[str] = []
    if numeric:
        names = ", ".join(p.variable for p in numeric)
        s.append(
            f"For the numeric variable{'s' if len(numeric) > 1 else ''} ({names}) we also report "
            "the six intraclass correlations of Shrout and Fleiss (1979), named after McGraw and "
            f"Wong (1996), from a units-by-coders analysis of variance on the units coded by "
            f"every coder, with their F-test based {level}% intervals; Lin's (1989) concordance "
            "correlation coefficient for each pair of coders; and Bland and Altman's (1986) "
            "limits of agreement (mean difference ± 1.96 SD) with their confidence intervals."
        )
        refs += ["shrout1979", "mcgraw1996", "lin1989", "blandaltman1986"]
        prop = [
            f"{p.variable} ({p.coder_a}, {p.coder_b})"
            for n in numeric
            for p in n.pairs
            if p.proportional
        ]
        if prop:
            s.append(
                "The differences grew or shrank with the size of the values (a proportional "
                f"bias; regression of differences on means, p < .05) for {', '.join(prop)}; for "
                "these the limits of agreement do not hold as one band (Bland & Altman, 1999)."
            )
            refs.append("blandaltman1999")
    if stability is not None and stability.coders:
        parts = []
        for c in stability.coders:
            after = f" after {c.days} days" if c.days is not None else ""
            parts.append(f"{c.coder} recoded {c.common_units} units{after}")
        judged = [
            r
            for r in stability.rows
            if r.kind == "variable" and r.verdict not in ("too few units", "undefined")
        ]
        alphas = [r.alpha for r in judged if r.alpha is not None]
        rng = (
            f"; test-retest alpha ranged from {fmt_coef(min(alphas))} to {fmt_coef(max(alphas))} "
            "across coders and variables with enough units"
            if len(alphas) > 1
            else ""
        )
        s.append(
            "Stability (intra-coder, test-retest reliability; Krippendorff, 2004) was assessed "
            f"by having {number_word(len(stability.coders))} coder"
            f"{'s' if len(stability.coders) != 1 else ''} code units a second time: "
            f"{'; '.join(parts)}. Agreement between each coder's two occasions was computed with "
            f"the same coefficients{rng}. Stability shows consistency over time, not agreement "
            "between coders."
        )
        refs.append("krippendorff2004")
    return s, refs


# ---- xlsx frames ---------------------------------------------------------------------------
def _bounds(name: str, ci: tuple[float, float] | None) -> dict[str, float | None]:
    """An interval as two columns, ``<name>_low`` and ``<name>_high`` (empty without one)."""
    low, high = ci if ci else (None, None)
    return {f"{name}_low": low, f"{name}_high": high}


def icc_frame(panels: Sequence[NumericPanel]) -> pd.DataFrame:
    rows = []
    for panel in panels:
        for r in panel.icc:
            rows.append(
                {
                    "variable": panel.variable,
                    "units_used": panel.units_used,
                    "units_left_out": panel.units_left_out,
                    "shrout_fleiss": r.shrout_fleiss,
                    "mcgraw_wong": r.mcgraw_wong,
                    "model": r.model,
                    "icc": r.estimate,
                    **_bounds("ci_f", r.ci_f),
                    **_bounds("ci_boot", r.ci_boot),
                    "f": r.f,
                    "p_value": r.p_value,
                }
            )
    return pd.DataFrame(rows)


def limits_frame(panels: Sequence[NumericPanel]) -> pd.DataFrame:
    rows = []
    for panel in panels:
        for p in panel.pairs:
            rows.append(
                {
                    "variable": p.variable,
                    "coder_a": p.coder_a,
                    "coder_b": p.coder_b,
                    "units": p.units,
                    "ccc": p.ccc,
                    **_bounds("ccc_ci", p.ccc_ci),
                    "mean_difference": p.bias,
                    "sd_difference": p.sd,
                    "lower_limit": p.lower,
                    **_bounds("lower_limit_ci", p.lower_ci),
                    "upper_limit": p.upper,
                    **_bounds("upper_limit_ci", p.upper_ci),
                    "proportional_bias_slope": p.slope,
                    "proportional_bias_p": p.slope_p,
                }
            )
    return pd.DataFrame(rows)


def stability_frame(panel: StabilityPanel | None) -> pd.DataFrame:
    if panel is None:
        return pd.DataFrame()
    days = {c.coder: c.days for c in panel.coders}
    return pd.DataFrame(
        [
            {
                "coder": r.coder,
                "days_between": days.get(r.coder),
                "variable": r.variable,
                "level": r.level,
                "units": r.units,
                "krippendorff_alpha": r.alpha,
                **_bounds("alpha_ci", r.alpha_ci),
                "cohen_kappa": r.kappa,
                "icc_2_1": r.icc,
                "verdict": r.verdict,
            }
            for r in panel.rows
        ]
    )
