"""``coderel validate``: check coders' sheets against the codebook."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from coderel.cli.app import app
from coderel.cli.common import (
    CodebookOption,
    DataArgument,
    JsonOption,
    check_table_output,
    delayed_progress,
    emit_json,
    folded_note,
    handle_errors,
    inform,
    out_console,
    problems_table,
    say,
)
from coderel.errors import ExitCode


@app.command("validate")
@handle_errors
def validate_command(
    data: DataArgument,
    codebook: CodebookOption,
    json_out: JsonOption = False,
    out: Annotated[
        Path | None,
        typer.Option("--out", "-o", help="Also write the problem list (.csv or .xlsx)."),
    ] = None,
) -> ExitCode:
    """Check every coder's sheet against the codebook and list every problem with its cell."""
    from coderel.codebook.load import load_codebook
    from coderel.io.tables import write_table
    from coderel.validate import validate

    check_table_output(out, data, codebook)
    cb = load_codebook(codebook)
    with delayed_progress("reading the sheets") as step:
        result = validate(cb, data, progress=step)
    if out is not None:
        with delayed_progress(f"writing {out.name}"):
            write_table(result.to_frame(), out, sheet="problems")
    if json_out:
        emit_json(result.to_dict())
    else:
        if result.problems:
            out_console().print(problems_table(result.problems))
            note = folded_note(result.problems)
            if note:
                say(note)
        s = result.summary()
        say(
            f"{len(s['files'])} file(s), {len(s['coders'])} coder(s), {s['units']} unit(s): "
            f"{s['errors']} error(s), {s['warnings']} warning(s)."
        )
        if out is not None:
            inform(f"problem list written to {out}")
    if result.refused:
        return ExitCode.INPUT_REFUSED
    return ExitCode.OK if result.ok else ExitCode.DATA_PROBLEMS
