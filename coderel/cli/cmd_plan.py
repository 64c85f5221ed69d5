"""``coderel plan``: how many units to code by two coders (minimum sample and precision plan)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    DEFAULT_SEED,
    CodebookOption,
    JsonOption,
    SeedOption,
    TableOutOption,
    check_table_output,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
    out_console,
    read_project,
)
from coderel.errors import ExitCode

if TYPE_CHECKING:
    from coderel.protocol.sample_size import SamplePlan


def _n(value: int | None) -> str:
    return "-" if value is None else f"{value:,}"


def _f(value: float | None, digits: int = 3) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def _print(result: SamplePlan) -> None:
    console = out_console()
    table = Table(title=f"Reliability sample size (one-tailed p = {result.significance:g})")
    for col in ("variable", "level", "k", "p_c", "p_c from", "alpha_min", "N minimum"):
        table.add_column(col)
    pilot = result.pilot_units is not None
    if pilot:
        for col in ("pilot units", "pilot alpha", f"N for +/-{result.half_width:g}"):
            table.add_column(col)
    table.add_column("N")
    for v in result.variables:
        row = [
            v.variable,
            v.level,
            str(v.categories) if v.categories else "-",
            _f(v.smallest_share),
            v.share_source or "-",
            _f(v.alpha_min),
            _n(v.n_minimum),
        ]
        if pilot:
            row += [_n(v.pilot_units), _f(v.pilot_alpha), _n(v.n_precision)]
        table.add_row(*row, _n(v.n))
    console.print(table)
    curve = result.curve_frame()
    if len(curve):
        ct = Table(title="Expected half-width of alpha's 95% interval at n units (pilot bootstrap)")
        for col in curve.columns:
            ct.add_column(str(col), justify="right")
        for row in curve.itertuples(index=False):
            ct.add_row(str(row[0]), *(_f(w) if w == w else "-" for w in row[1:]))
        console.print(ct)
    for v in result.variables:
        for note in v.notes:
            console.print(f"{v.variable}: {note}")
    for note in result.notes:
        console.print(f"note: {note}")
    b = result.binding
    if b is None:
        console.print("no variable could be planned (see the notes)")
    else:
        console.print(
            f"recommendation: {b.n:,} units coded by two coders (binding variable: {b.variable})"
        )


@app.command("plan")
@handle_errors
def plan_command(
    codebook: CodebookOption,
    pilot: Annotated[
        list[Path] | None,
        typer.Option(
            "--pilot",
            help="A pilot's coding sheets (files or a folder; repeat for several): category "
            "shares for p_c and the precision plan.",
        ),
    ] = None,
    smallest_share: Annotated[
        float | None,
        typer.Option(
            "--smallest-share",
            help="p_c: share of the least frequent category that must be represented (0-0.5).",
        ),
    ] = None,
    alpha_min: Annotated[
        float | None,
        typer.Option("--alpha-min", help="Smallest acceptable alpha (default: the codebook's)."),
    ] = None,
    significance: Annotated[
        float,
        typer.Option("--significance", help="One-tailed significance: 0.10, 0.05, 0.01, 0.005."),
    ] = 0.05,
    half_width: Annotated[
        float,
        typer.Option(
            "--half-width", help="Precision plan: wanted half-width of alpha's 95% interval."
        ),
    ] = 0.05,
    replicates: Annotated[
        int, typer.Option("--replicates", min=100, help="Precision plan: bootstrap replicates.")
    ] = 1000,
    seed: SeedOption = DEFAULT_SEED,
    json_out: JsonOption = False,
    out: TableOutOption = None,
) -> ExitCode:
    """How many units to code by two coders: Bloch & Kraemer's minimum per categorical variable
    (as in Krippendorff 2004, ch. 11) and, with a pilot, the size for a wanted interval width."""
    from coderel.codebook.load import load_codebook
    from coderel.io.tables import write_table
    from coderel.protocol.pilot import pilot_from_codings
    from coderel.protocol.sample_size import plan_sample

    check_table_output(out, list(pilot or []), codebook)
    cb = load_codebook(codebook)
    pilot_data = None
    if pilot:
        codings = read_project(codebook, list(pilot), errors_note="were left out of the pilot")
        pilot_data = pilot_from_codings(codings)
    with delayed_progress("precision of alpha at each sample size") as progress:
        result = plan_sample(
            cb,
            pilot=pilot_data,
            smallest_share=smallest_share,
            alpha_min=alpha_min,
            significance=significance,
            half_width=half_width,
            replicates=replicates,
            seed=seed,
            progress=progress,
        )
    if out is not None:
        curve = result.curve_frame()
        write_table(
            result.to_frame(),
            out,
            sheet="plan",
            extra_sheets={"precision curve": curve} if len(curve) else None,
        )
        inform(f"plan written to {out}")
    if json_out:
        emit_json(result.to_dict())
    else:
        _print(result)
    return ExitCode.OK
