"""``coderel draw``: draw the reliability subsample from the population of units."""

from __future__ import annotations

import secrets
from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    JsonOption,
    delayed_progress,
    emit_json,
    handle_errors,
    out_console,
    say,
)
from coderel.errors import ExitCode, UsageError


@app.command("draw")
@handle_errors
def draw_command(
    population: Annotated[
        Path, typer.Argument(help="The population: a table (.csv/.xlsx/.parquet) or unit list.")
    ],
    out: Annotated[
        Path, typer.Option("--out", "-o", help="The unit list to write (one ID a line, .txt).")
    ],
    codebook: Annotated[
        Path | None,
        typer.Option("--codebook", "-c", help="Codebook whose unit column names the IDs."),
    ] = None,
    id_column: Annotated[
        str | None, typer.Option("--id", help="The unit-ID column (default: the codebook's).")
    ] = None,
    size: Annotated[int | None, typer.Option("--size", help="Units to draw.")] = None,
    share: Annotated[
        float | None, typer.Option("--share", help="Share of the population to draw (0-1).")
    ] = None,
    plan: Annotated[
        Path | None,
        typer.Option("--plan", help="Draw the recommendation of 'coderel plan --json' output."),
    ] = None,
    seed: Annotated[
        str | None,
        typer.Option("--seed", help="Seed (a whole number); printed when not given."),
    ] = None,
    strata: Annotated[
        str | None,
        typer.Option("--strata", help="Columns to stratify by, separated by commas."),
    ] = None,
    min_per_stratum: Annotated[
        int, typer.Option("--min-per-stratum", min=0, help="At least this many per stratum.")
    ] = 0,
    exclude: Annotated[
        list[Path] | None,
        typer.Option(
            "--exclude", help="Units to leave out (drawn or coded before); unit list or table."
        ),
    ] = None,
    json_out: JsonOption = False,
) -> ExitCode:
    """Draw the reliability subsample: simple random, or stratified with proportional
    allocation; the result depends only on the seed and the set of unit IDs."""
    from coderel.codebook.load import load_codebook
    from coderel.protocol.draw import draw_to_files

    if id_column is None:
        if codebook is None and population.suffix.lower() != ".txt":
            raise UsageError("name the unit-ID column: --id COLUMN or --codebook CODEBOOK")
        id_column = load_codebook(codebook).unit if codebook is not None else None
    chosen = seed
    if seed is None:
        chosen = str(secrets.randbelow(2**31))
        say(f"no --seed given: drawing with seed {chosen}; pass --seed {chosen} to repeat")
    columns = tuple(c.strip() for c in strata.split(",")) if strata else ()
    if any(not c for c in columns):
        raise UsageError("a stratum column name is empty (check the commas in --strata)")
    with delayed_progress(f"reading {population.name} and drawing"):
        run = draw_to_files(
            population,
            out,
            id_column=id_column or "",
            seed=chosen,
            size=size,
            share=share,
            plan=plan,
            strata_columns=columns,
            min_per_stratum=min_per_stratum,
            exclude=list(exclude or []),
        )
    d = run.draw
    if json_out:
        emit_json(
            {
                **run.manifest,
                "files": {"units": str(run.units_file), "manifest": str(run.manifest_file)},
            }
        )
        return ExitCode.OK
    console = out_console()
    if d.strata:
        table = Table(title=f"Drawn per stratum ({d.method})")
        for c in (*d.strata_columns, "population", "exact share", "drawn"):
            table.add_column(c)
        for s in d.strata:
            table.add_row(
                *(v for v in s.values),
                f"{s.population:,}",
                f"{s.exact_share:.2f}",
                f"{s.drawn:,}",
            )
        console.print(table)
    excluded = run.manifest["excluded"]["units_left_out"]
    console.print(
        f"drew {d.size:,} of {d.population:,} units ({d.method}; seed {d.seed})"
        + (f", after leaving out {excluded:,} excluded" if excluded else "")
    )
    console.print(f"unit list: {run.units_file}")
    console.print(f"manifest:  {run.manifest_file}")
    return ExitCode.OK
