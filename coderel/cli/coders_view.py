"""Terminal tables of the coder diagnostics (``agree --coders``): drop-one alpha, marginal
homogeneity per pair of coders, and each coder's share of each category."""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.table import Table

if TYPE_CHECKING:
    from coderel.stats.homogeneity import ChiSquareTest


if TYPE_CHECKING:
    from coderel.agree.coders import CoderDiagnostics


def _num(x: float | None, spec: str = ".3f") -> str:
    return "-" if x is None else format(x, spec)


def _test(t: ChiSquareTest | None) -> str:
    if t is None:
        return ""
    if t.statistic is None:
        return f"- ({t.reason})"
    p = t.exact_p_value if t.exact_p_value is not None else t.p_value
    return f"{t.statistic:.2f} ({t.df} df) p {_p(p)}"


def _p(p: float | None) -> str:
    if p is None:
        return "-"
    return "<.001" if p < 0.001 else f"{p:.3f}".lstrip("0")


def coder_tables(diag: CoderDiagnostics) -> list[Table]:
    """Drop-one alpha, homogeneity tests and category shares as rich tables."""
    tables = []
    coders = list(diag.coders)
    if len(coders) >= 3:
        drop = Table(title="Alpha without each coder (change from alpha with every coder)")
        drop.add_column("variable")
        drop.add_column("alpha")
        for c in coders:
            drop.add_column(f"without {c}")
        drop.add_column("alpha rises most without")
        for v in diag.variables:
            cells = {d.coder: d for d in v.drop_one}
            row = [v.variable, _num(v.alpha)]
            for c in coders:
                d = cells.get(c)
                row.append(
                    "-"
                    if d is None or d.alpha_without is None
                    else f"{d.alpha_without:.3f} ({d.change:+.3f})"
                )
            low = v.lowers_most
            row.append(low.coder if low else "")
            drop.add_row(*row)
        tables.append(drop)
    homo = Table(
        title="Marginal homogeneity per pair of coders (chi-square, df, p; McNemar p exact)"
    )
    for col in ("variable", "coders", "units", "Stuart-Maxwell", "Bhapkar", "Bowker", "McNemar"):
        homo.add_column(col)
    for v in diag.variables:
        for h in v.homogeneity:
            homo.add_row(
                v.variable,
                f"{h.coder_a} / {h.coder_b}",
                str(h.units),
                *(
                    _test(h.tests.get(k))
                    for k in ("stuart_maxwell", "bhapkar", "bowker", "mcnemar")
                ),
            )
    if homo.row_count:
        tables.append(homo)
    shares = Table(title="Share of each category: pooled and per coder")
    shares.add_column("variable")
    shares.add_column("category")
    shares.add_column("pooled")
    for c in coders:
        shares.add_column(c)
    for v in diag.variables:
        for s in v.shares:
            shares.add_row(
                v.variable,
                f"{s.code} = {s.label}",
                _num(s.pooled, ".1%"),
                *(_num(s.by_coder.get(c), ".1%") for c in coders),
            )
    if shares.row_count:
        tables.append(shares)
    return tables
