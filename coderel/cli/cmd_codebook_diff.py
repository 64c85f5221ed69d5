"""``coderel codebook diff OLD NEW``: what changed between two versions of a codebook."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from coderel.cli.cmd_codebook import codebook_app
from coderel.cli.common import JsonOption, emit_json, handle_errors, out_console
from coderel.errors import ExitCode


@codebook_app.command("diff")
@handle_errors
def diff_command(
    old: Annotated[Path, typer.Argument(help="The earlier codebook (.yaml, .yml or .json).")],
    new: Annotated[Path, typer.Argument(help="The revised codebook.")],
    json_out: JsonOption = False,
) -> ExitCode:
    """Variables added, removed, renamed; levels, categories and thresholds changed."""
    from coderel.codebook.load import load_codebook
    from coderel.codebook.revisions import diff_codebooks

    result = diff_codebooks(load_codebook(old), load_codebook(new))
    if json_out:
        emit_json(result.to_dict())
        return ExitCode.OK
    console = out_console()
    console.print(f"codebook {escape(result.old_version)} -> {escape(result.new_version)}")
    if result.empty:
        console.print("no change in variables, categories or thresholds")
    for name in result.added:
        console.print(f"  added variable    {escape(name)}")
    for name in result.removed:
        console.print(f"  removed variable  {escape(name)}")
    for a, b in result.renamed:
        console.print(f"  renamed variable  {escape(a)} -> {escape(b)}")
    for c in result.changed:
        title = c.variable if c.old_name == c.variable else f"{c.old_name} -> {c.variable}"
        console.print(f"  changed {escape(title)}:")
        for text in c.changes:
            console.print(f"    {escape(text)}")
        for label, items in (
            ("category added", c.categories_added),
            ("category removed", c.categories_removed),
            ("relabelled", c.categories_relabelled),
            ("merged (recode)", c.categories_merged),
        ):
            for item in items:
                console.print(f"    {label}: {escape(item)}")
    for text in result.thresholds:
        console.print(f"  thresholds: {escape(text)}")
    if result.recode_from_old:
        console.print(
            f"  sheets made from version {escape(result.old_version)} are recoded when read"
        )
    for note in result.notes:
        console.print(f"note: {escape(note)}")
    return ExitCode.OK


def escape(text: object) -> str:
    """Consoles print text as it is (no markup), so nothing needs escaping."""
    return str(text)
