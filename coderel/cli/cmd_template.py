"""``coderel template``: one blank coding workbook per coder, made from the codebook."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from coderel.cli.app import app
from coderel.cli.common import (
    CodebookOption,
    JsonOption,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
)
from coderel.errors import ExitCode


@app.command("template")
@handle_errors
def template_command(
    codebook: CodebookOption,
    coders: Annotated[
        str,
        typer.Option("--coders", help="Coder names, separated by commas; each gets <coder>.xlsx."),
    ],
    out_dir: Annotated[
        Path, typer.Option("--out", "-o", help="Folder for the workbooks (created if missing).")
    ],
    units: Annotated[
        Path | None,
        typer.Option("--units", help="Text file of unit IDs, one per line, to pre-fill."),
    ] = None,
    overwrite: Annotated[
        bool,
        typer.Option(
            "--overwrite", help="Replace existing workbooks that differ (they may be filled in)."
        ),
    ] = False,
    json_out: JsonOption = False,
) -> ExitCode:
    """Write a blank coding workbook per coder: dropdowns, number limits, the codebook sheet."""
    from coderel.codebook.load import load_codebook
    from coderel.template import read_unit_list, write_templates

    cb = load_codebook(codebook)
    unit_list = read_unit_list(units) if units is not None else []
    inputs = [codebook, *([units] if units is not None else [])]
    with delayed_progress("making the coding workbooks") as step:
        written = write_templates(
            cb,
            coders.split(","),
            out_dir,
            unit_list,
            overwrite=overwrite,
            inputs=inputs,
            progress=step,
        )
    if json_out:
        emit_json({"files": [str(p) for p in written], "units": len(unit_list)})
    else:
        for path in written:
            typer.echo(str(path))
        inform(
            f"{len(written)} coding workbook(s) written to {out_dir}"
            + (f", {len(unit_list)} unit(s) pre-filled" if unit_list else "")
            + "; give each coder their own file and do not rename it (the file name is the coder)."
        )
    return ExitCode.OK
