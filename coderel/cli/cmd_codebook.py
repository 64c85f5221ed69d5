"""``coderel codebook``: check a codebook, convert it to or from a Table Schema, print its schema.

* ``coderel codebook check CB`` lists every problem of the file with its line (exit 1 when any is
  an error) and otherwise a summary of the variables;
* ``coderel codebook convert IN -o OUT`` converts between coderel's YAML (``.yaml``/``.yml``) and
  the Frictionless Table Schema (``.json``), chosen by the extensions;
* ``coderel codebook schema`` prints the JSON Schema of the YAML file, for editors.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    JsonOption,
    emit_json,
    handle_errors,
    inform,
    out_console,
    print_problems,
    say,
)
from coderel.errors import ExitCode, UsageError

if TYPE_CHECKING:
    from coderel.codebook import Codebook


codebook_app = typer.Typer(
    name="codebook",
    help="Check a codebook, convert it to or from a Frictionless Table Schema, print its schema.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)
app.add_typer(codebook_app, name="codebook")

CodebookArgument = Annotated[
    Path, typer.Argument(help="Codebook file (.yaml, .yml, or Frictionless .json).")
]


def _variables(cb: Codebook) -> list[dict[str, Any]]:
    rows = []
    for v in cb.variables:
        rows.append(
            {
                "name": v.name,
                "level": v.level,
                "categories": len(v.categories),
                "missing": list(v.missing_codes),
                "range": list(v.range) if v.range is not None else None,
                "multiple": v.multiple,
                "applies_when": (
                    {"variable": v.applies_when.variable, "includes": list(v.applies_when.includes)}
                    if v.applies_when is not None
                    else None
                ),
            }
        )
    return rows


def _variables_table(cb: Codebook) -> Table:
    table = Table(title=f"{cb.title} (version {cb.version}; unit column {cb.unit!r})")
    for name in ("variable", "level", "codes", "missing", "applies when"):
        table.add_column(name, overflow="fold")
    for v in cb.variables:
        if v.is_numeric:
            codes = "whole numbers" if v.integer else "numbers"
            if v.range is not None:
                codes += f" {v.range[0]:g} to {v.range[1]:g}"
        else:
            codes = f"{len(v.categories)} categories" + (", several per unit" if v.multiple else "")
        cond = v.applies_when
        table.add_row(
            v.name,
            v.level,
            codes,
            ", ".join(str(m) for m in v.missing_codes),
            f"{cond.variable} in {', '.join(str(c) for c in cond.includes)}" if cond else "",
        )
    return table


@codebook_app.command("check")
@handle_errors
def check_command(path: CodebookArgument, json_out: JsonOption = False) -> ExitCode:
    """List every problem of a codebook with its line; exit 1 when any is an error."""
    from coderel.codebook.load import codebook_problems, load_codebook

    problems = codebook_problems(path)
    codebook = None if problems.errors else load_codebook(path)
    if json_out:
        summary: dict[str, Any] = {
            "file": path.name,
            "errors": len(problems.errors),
            "warnings": len(problems.warnings),
        }
        if codebook is not None:
            summary["variables"] = _variables(codebook)
        emit_json({**problems.to_dict(), "summary": summary})
    else:
        print_problems(problems, to_stderr=False)  # the problems are this command's data
        if codebook is not None:
            out_console().print(_variables_table(codebook))
            say(
                f"{path.name}: {len(codebook.variables)} variable(s), "
                f"{len(problems.warnings)} warning(s), no error."
            )
        else:
            say(f"{path.name}: {len(problems.errors)} error(s); the codebook cannot be used.")
    return ExitCode.DATA_PROBLEMS if problems.errors else ExitCode.OK


def _form(path: Path) -> str:
    from coderel.codebook.load import JSON_SUFFIXES, YAML_SUFFIXES

    suffix = path.suffix.lower()
    if suffix in YAML_SUFFIXES:
        return "yaml"
    if suffix in JSON_SUFFIXES:
        return "table-schema"
    raise UsageError(
        f"cannot tell the form of {path.name!r}: use .yaml or .yml (coderel's codebook) or "
        ".json (Frictionless Table Schema)"
    )


@codebook_app.command("convert")
@handle_errors
def convert_command(
    source: CodebookArgument,
    out: Annotated[
        Path,
        typer.Option(
            "--out", "-o", help="Output: .json for a Table Schema, .yaml/.yml for coderel's form."
        ),
    ],
    json_out: JsonOption = False,
) -> ExitCode:
    """Convert a codebook between YAML and a Frictionless Table Schema (JSON), by extension."""
    from coderel.codebook.frictionless import write_codebook_yaml, write_table_schema
    from coderel.codebook.load import load_codebook
    from coderel.io.atomic import refuse_overwriting_inputs

    target_form = _form(out)
    _form(source)
    refuse_overwriting_inputs([out], [source])
    cb = load_codebook(source)
    if target_form == "table-schema":
        write_table_schema(cb, out)
    else:
        write_codebook_yaml(cb, out)
    if json_out:
        emit_json(
            {
                "input": str(source),
                "output": str(out),
                "form": target_form,
                "variables": len(cb.variables),
            }
        )
    else:
        inform(f"{len(cb.variables)} variable(s) written to {out} ({target_form}).")
    return ExitCode.OK


@codebook_app.command("schema")
@handle_errors
def schema_command(
    out: Annotated[
        Path | None,
        typer.Option("--out", "-o", help="Write the schema to this .json file instead."),
    ] = None,
) -> ExitCode:
    """Print the JSON Schema of the YAML codebook (for editors that check YAML files)."""
    from coderel.codebook.load import JSON_SUFFIXES, codebook_json_schema
    from coderel.io.atomic import write_text

    if out is not None and out.suffix.lower() not in JSON_SUFFIXES:
        # The schema is JSON; a .yaml name is most likely a codebook about to be overwritten.
        raise UsageError(
            f"cannot write the schema to {out.name!r}: name a .json file, for example "
            "-o codebook.schema.json"
        )
    text = json.dumps(codebook_json_schema(), indent=2, ensure_ascii=False) + "\n"
    if out is None:
        typer.echo(text, nl=False)
    else:
        write_text(out, text)
        inform(f"JSON Schema written to {out}")
    return ExitCode.OK
