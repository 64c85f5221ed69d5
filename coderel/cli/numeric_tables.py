"""Terminal tables of numeric variables for ``coderel agree``: the six ICC forms with their
F-test intervals, and per coder pair Lin's coefficient and the limits of agreement."""

from __future__ import annotations

from typing import Any

from rich.table import Table


def _ci(value: float | None, ci: Any) -> str:
    if value is None:
        return "-"
    return f"{value:.3f} [{ci[0]:.3f}, {ci[1]:.3f}]" if ci else f"{value:.3f}"


def _n(value: float | None) -> str:
    return "-" if value is None else f"{value:.2f}"


def numeric_tables(result: Any) -> list[Table]:
    """The ICC table and the pairs table, each only when it has a row."""
    from coderel.stats.icc import ICC_FORMS

    rows = [v for v in result.variables if getattr(v, "numeric", None) is not None]
    if not rows:
        return []
    icc = Table(title="Intraclass correlations (Shrout & Fleiss 1979), F-test 95% intervals")
    for col in ("variable", "complete units", "left out", *ICC_FORMS):
        icc.add_column(col)
    pairs = Table(title="Per pair: Lin's concordance and Bland-Altman limits of agreement")
    for col in (
        "variable",
        "coders",
        "units",
        "ccc",
        "mean difference",
        "limits of agreement",
        "proportional bias",
    ):
        pairs.add_column(col)
    for v in rows:
        d = v.numeric
        if d.icc is not None:
            icc.add_row(
                v.variable,
                str(d.icc.units_used),
                str(d.icc.units_left_out),
                *(_ci(f.estimate, f.ci_f) for f in d.icc.forms),
            )
        for p in d.pairs:
            lo = p.limits
            pb = lo.proportional_bias
            pairs.add_row(
                v.variable,
                f"{p.coder_a} - {p.coder_b}",
                str(lo.n),
                _ci(p.ccc.estimate, p.ccc.ci_z),
                _n(lo.mean_difference),
                f"{_n(lo.lower)} to {_n(lo.upper)}",
                "-" if pb is None else (f"yes (p = {pb.p_value:.3g})" if pb.significant else "no"),
            )
    return [t for t in (icc, pairs) if t.row_count]
