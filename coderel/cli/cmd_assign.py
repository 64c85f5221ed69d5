"""``coderel assign``: who codes which unit (everyone the reliability sample, the rest shared)."""

from __future__ import annotations

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
    inform,
    out_console,
)
from coderel.errors import ExitCode, UsageError


@app.command("assign")
@handle_errors
def assign_command(
    corpus: Annotated[
        Path, typer.Argument(help="Every unit to code: a table (.csv/.xlsx/.parquet) or unit list.")
    ],
    reliability: Annotated[
        Path,
        typer.Option("--reliability", "-r", help="The reliability sample (from 'coderel draw')."),
    ],
    coders: Annotated[str, typer.Option("--coders", help="Coder names, separated by commas.")],
    out_dir: Annotated[
        Path, typer.Option("--out", "-o", help="Folder for the unit lists and the manifest.")
    ],
    seed: Annotated[str, typer.Option("--seed", help="Seed (a whole number).")],
    codebook: Annotated[
        Path | None,
        typer.Option("--codebook", "-c", help="Codebook (unit-ID column; needed for --templates)."),
    ] = None,
    id_column: Annotated[
        str | None, typer.Option("--id", help="The unit-ID column (default: the codebook's).")
    ] = None,
    per_unit: Annotated[
        int,
        typer.Option(
            "--per-unit", help="Coders per non-reliability unit: 1, or 2 for rotating pairs, ..."
        ),
    ] = 1,
    blend: Annotated[
        bool,
        typer.Option("--blend", help="Mix the reliability units into each list in random order."),
    ] = False,
    templates: Annotated[
        Path | None,
        typer.Option("--templates", help="Also write one coding workbook per coder here."),
    ] = None,
    overwrite: Annotated[
        bool, typer.Option("--overwrite", help="Replace existing workbooks that differ.")
    ] = False,
    json_out: JsonOption = False,
) -> ExitCode:
    """Give every coder the reliability units and share the other units out, balanced and
    seeded; write one unit list per coder (and, with --templates, one workbook per coder)."""
    from coderel.codebook.load import load_codebook

    cb = load_codebook(codebook) if codebook is not None else None
    if id_column is None and cb is not None:
        id_column = cb.unit
    if id_column is None and corpus.suffix.lower() != ".txt":
        raise UsageError("name the unit-ID column: --id COLUMN or --codebook CODEBOOK")
    if templates is not None and cb is None:
        raise UsageError("--templates needs the codebook (--codebook)")
    with delayed_progress("assigning units") as step:
        run = assign_to_files(
            corpus,
            reliability,
            coders.split(","),
            out_dir,
            seed=seed,
            id_column=id_column,
            per_unit=per_unit,
            blend=blend,
            codebook=cb,
            templates_dir=templates,
            overwrite=overwrite,
            progress=step,
        )
    a = run.assignment
    if json_out:
        emit_json({**run.manifest, "folder": str(run.folder)})
        return ExitCode.OK
    console = out_console()
    table = Table(title=f"Units per coder (seed {a.seed})")
    for col in (
        "coder",
        "units",
        "reliability (all coders)",
        "own" if a.per_unit == 1 else f"own (each with {a.per_unit - 1} more coder(s))",
        "list",
    ):
        table.add_column(col)
    for c in a.coders:
        table.add_row(
            escape(c),
            f"{a.load(c):,}",
            f"{len(a.reliability):,}",
            f"{a.load(c) - len(a.reliability):,}",
            escape(str(run.files[f"units-{c}.txt"])),
        )
    console.print(table)
    b = a.balance()
    own = b["own_units_per_coder"]
    console.print(
        f"{a.remaining:,} units beyond the reliability sample, "
        + ("each coded once" if a.per_unit == 1 else f"each coded by {a.per_unit} coders")
        + f"; units per coder differ by {own['spread']}"
    )
    if b["units_per_group"] is not None:
        g = b["units_per_group"]
        console.print(
            f"{len(a.groups)} coder groups share {g['min']:,} to {g['max']:,} units each "
            f"(spread {g['spread']})"
        )
    if a.blend:
        console.print("reliability units are blended into each list in random order")
    console.print(f"record of the reliability sample: {run.files['reliability-units.txt']}")
    console.print(f"manifest: {run.files['assignment.manifest.json']}")
    if "templates" in run.manifest:
        inform(
            f"{len(run.manifest['templates'])} coding workbook(s) written to {templates}; give "
            "each coder their own file and do not rename it (the file name is the coder)"
        )
    return ExitCode.OK


def escape(text: object) -> str:
    """Consoles print text as it is (no markup), so nothing needs escaping."""
    return str(text)


def assign_to_files(*args, **kwargs):
    """Imported on use, so that coderel --help stays light."""
    from coderel.protocol.assign import assign_to_files as run

    return run(*args, **kwargs)
