"""``coderel trend``: reliability across rounds, with the change between rounds and coder drift."""

from __future__ import annotations

from itertools import pairwise
from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    DEFAULT_REPLICATES,
    DEFAULT_SEED,
    CodebookOption,
    IntervalOption,
    JsonOption,
    ReplicatesOption,
    SeedOption,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
    out_console,
    say,
)
from coderel.cli.rounds import RoundOption
from coderel.errors import ExitCode


def _interval(ci: tuple[float, float] | None) -> str:
    return f" [{ci[0]:.3f}, {ci[1]:.3f}]" if ci else ""


def _p(p: float | None) -> str:
    if p is None:
        return ""
    return " p <.001" if p < 0.001 else f" p {p:.3f}".replace("0.", ".", 1)


def _signed(x: float | None, ci: tuple[float, float] | None = None) -> str:
    if x is None:
        return "-"
    return f"{x:+.3f}" + (f" [{ci[0]:+.3f}, {ci[1]:+.3f}]" if ci else "")


@app.command("trend")
@handle_errors
def trend_command(
    codebook: CodebookOption,
    data: Annotated[
        list[Path] | None,
        typer.Argument(
            help="Long data with a 'round' column (unit, coder, variable, value, round); "
            "instead of, or beside, --round NAME=PATH.",
        ),
    ] = None,
    rounds: RoundOption = None,
    replicates: ReplicatesOption = DEFAULT_REPLICATES,
    seed: SeedOption = DEFAULT_SEED,
    interval_method: IntervalOption = "bca",
    json_out: JsonOption = False,
    out: Annotated[
        Path | None,
        typer.Option("--out", "-o", help="Write alpha per round and variable (.csv/.xlsx)."),
    ] = None,
) -> ExitCode:
    """Alpha per variable per round, its change between rounds, and each coder's drift."""
    from coderel.cli.common import check_table_output, read_project
    from coderel.cli.rounds import parse_rounds, read_rounds
    from coderel.io.tables import write_table
    from coderel.protocol.trend import trend

    parsed = parse_rounds(rounds)
    check_table_output(out, [*(data or []), *(p for _, p in parsed if p is not None)], codebook)
    column = None
    if data:
        column = read_project(codebook, data, errors_note="count as blank")
    read = read_rounds(codebook, parsed, column)
    with delayed_progress("agreement per round: resampling units") as progress:
        result = trend(
            read,
            replicates=replicates,
            seed=seed,
            interval_method=interval_method,
            progress=progress,
        )
    if out is not None:
        write_table(
            result.to_frame(), out, sheet="alpha", extra_sheets={"coders": result.coders_frame()}
        )
        inform(f"table written to {out}")
    if json_out:
        emit_json(result.to_dict())
        return ExitCode.OK
    console = out_console()
    table = Table(
        title=f"Alpha by round ({replicates} bootstrap replicates per round, seed {seed})"
    )
    table.add_column("variable")
    for r in result.rounds:
        table.add_column(r)
    for r0, r1 in pairwise(result.rounds):
        table.add_column(f"change {r0} -> {r1}")
    for var in result.variables:
        cells = []
        for r in result.rounds:
            a = result.alpha(r, var).alpha
            cells.append("-" if a.estimate is None else f"{a.estimate:.3f}{_interval(a.ci)}")
        for c in (c for c in result.changes if c.variable == var):
            cells.append(_signed(c.change, c.ci) + _p(c.p_value))
        table.add_row(var, *cells)
    console.print(table)
    drift = Table(title="Coders: mean pairwise agreement with the others, by round")
    for col in ("coder", "round", "agreement", "change", "others' change", "flag"):
        drift.add_column(col)
    for c in result.coders:
        drift.add_row(
            c.coder,
            c.round,
            "-" if c.agreement is None else f"{c.agreement:.3f}{_interval(c.ci)}",
            _signed(c.change, c.change_ci),
            _signed(c.others_change),
            "drift" if c.drift else "",
        )
    console.print(drift)
    for c in result.drifting:
        console.print(
            f"{c.coder} in {c.round}: agreement with the others fell by "
            f"{-c.change:.3f} (interval {_signed(c.change, c.change_ci)}) while the others "
            f"changed by {_signed(c.others_change)}"
        )
    for note in result.notes:
        say(note)
    return ExitCode.OK
