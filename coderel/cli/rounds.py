"""Rounds on the command line (``trend``, ``report``): ``--round NAME=PATH`` (a folder or file per
round) or ``--round NAME`` / nothing, the rounds of a ``round`` column in the long data
(:mod:`coderel.io.rounds`)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from coderel.cli.common import read_project, say
from coderel.errors import UsageError

if TYPE_CHECKING:
    from coderel.codings import Codings

RoundOption = Annotated[
    list[str] | None,
    typer.Option(
        "--round",
        "-r",
        help="A round as NAME=PATH (a file or folder of coders' sheets), or NAME alone for a "
        "round of the 'round' column of DATA; repeat in time order.",
    ),
]


def parse_rounds(specs: list[str] | None) -> list[tuple[str, Path | None]]:
    """``NAME=PATH`` or ``NAME`` in the order given; a name twice or an empty part is a usage
    error."""
    from coderel.protocol.trend import check_round_names

    out: list[tuple[str, Path | None]] = []
    for spec in specs or []:
        name, sep, path = spec.partition("=")
        if not name.strip() or (sep and not path.strip()):
            raise UsageError(
                f"--round {spec!r}: give NAME=PATH, for example --round pilot=sheets/, or NAME "
                "for a round of the 'round' column of DATA"
            )
        out.append((name.strip(), Path(path.strip()) if sep else None))
    check_round_names([n for n, _ in out])
    return out


def round_files(parsed: list[tuple[str, Path | None]]) -> list[Path]:
    """Every file the ``NAME=PATH`` rounds read (to refuse writing over them)."""
    from coderel.io.read import collect_files

    return [f for _, p in parsed if p is not None for f in collect_files([p])]


def read_rounds(
    codebook: Path, parsed: list[tuple[str, Path | None]], column: Codings | None
) -> list[tuple[str, Codings]]:
    """The codings of every round, in the order given.

    ``column`` holds codings read from long data with a ``round`` column (or ``None``); a round
    given by name alone comes from it, and with no ``--round`` at all every round of the column
    is taken in natural order (``pilot``, ``training 1``, ``training 2``: name them with
    ``--round`` when that is not their time order).
    """
    from coderel.io.rounds import ROUND_MARK, round_names, split_rounds

    found = round_names(column) if column is not None else []
    if not parsed:
        if not found:
            raise UsageError(
                "give the rounds: --round NAME=PATH (repeatable), or long data with a 'round' "
                "column (unit, coder, variable, value, round)"
            )
        say(
            f"rounds of the 'round' column, in this order: {', '.join(found)} (name them with "
            "--round NAME to set another order)"
        )
        parsed = [(name, None) for name in found]
    wanted = [name for name, path in parsed if path is None]
    for name in wanted:
        if name not in found:
            where = (
                f"the 'round' column holds {', '.join(found)}"
                if found
                else "the data has no 'round' column"
            )
            raise UsageError(f"--round {name}: no such round ({where}); or give NAME=PATH")
    if column is not None:
        loose = int((~column.frame["unit"].str.contains(ROUND_MARK, regex=False)).sum())
        if loose and wanted:
            say(f"{loose:,} value(s) of rows without a round column belong to no round")
    from_column = dict(split_rounds(column, wanted)) if column is not None and wanted else {}
    out = []
    for name, path in parsed:
        if path is None:
            out.append((name, from_column[name]))
        else:
            note = f"of round {name} count as blank"
            out.append((name, read_project(codebook, [path], errors_note=note)))
    return out
