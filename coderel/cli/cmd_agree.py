"""``coderel agree``: agreement per variable with bootstrap intervals."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from coderel.agree import agreement
from coderel.cli.app import app
from coderel.cli.common import (
    CodebookOption,
    DataArgument,
    JsonOption,
    check_table_output,
    emit_json,
    handle_errors,
    out_console,
    say,
)
from coderel.codebook.load import load_codebook
from coderel.errors import ExitCode
from coderel.io.read import read_codings
from coderel.io.tables import write_table

SHOWN = ("krippendorff_alpha", "percent_agreement", "fleiss_kappa", "cohen_kappa", "gwet_ac1")


def _fmt(est) -> str:
    if est is None:
        return "-"
    if est.estimate is None:
        return "undefined"
    text = f"{est.estimate:.3f}"
    if est.ci:
        text += f" [{est.ci[0]:.3f}, {est.ci[1]:.3f}]"
    return text


@app.command("agree")
@handle_errors
def agree_command(
    data: DataArgument,
    codebook: CodebookOption,
    replicates: Annotated[int, typer.Option("--replicates", min=0)] = 2000,
    seed: Annotated[int, typer.Option("--seed")] = 20261202,
    interval_method: Annotated[str, typer.Option("--interval", help="bca or percentile")] = "bca",
    json_out: JsonOption = False,
    out: Annotated[Path | None, typer.Option("--out", help="Write the table (.csv/.xlsx).")] = None,
) -> ExitCode:
    """Every agreement coefficient per variable, with seeded bootstrap intervals."""
    if interval_method not in ("bca", "percentile"):
        raise typer.BadParameter("--interval must be bca or percentile")
    check_table_output(out, data, codebook)
    codings = read_codings(load_codebook(codebook), data)
    errors = len(codings.problems.errors)
    if errors:
        say(f"{errors} cell(s) with errors were left out; run 'coderel validate' to see them")
    result = agreement(codings, replicates=replicates, seed=seed, interval_method=interval_method)
    if out is not None:
        write_table(result.to_frame(), out, sheet="agreement")
        say(f"table written to {out}")
    if json_out:
        emit_json(result.to_dict())
        return ExitCode.OK
    table = Table(title=f"Agreement ({replicates} bootstrap replicates, seed {seed})")
    for col in ("variable", "level", "units", "pairable", *SHOWN, "verdict"):
        table.add_column(col)
    for v in result.variables:
        table.add_row(
            v.variable,
            v.level,
            str(v.units),
            str(v.pairable_values),
            *(_fmt(v.coefficients.get(k)) for k in SHOWN),
            v.verdict,
        )
    console = out_console()
    console.print(table)
    for v in result.variables:
        for note in v.notes:
            console.print(f"{v.variable}: {note}")
    say("Verdicts compare alpha with the codebook's thresholds (convention: Krippendorff 2004).")
    return ExitCode.OK
