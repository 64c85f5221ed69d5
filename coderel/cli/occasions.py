"""Options of numeric variables and stability shared by ``agree``, ``stability`` and ``report``:
``--icc-ordinal`` and ``--occasion CODER=PATH`` (a coder's second coding occasion)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from coderel.errors import UsageError

if TYPE_CHECKING:
    from coderel.codings import Codings

IccOrdinalOption = Annotated[
    bool,
    typer.Option(
        "--icc-ordinal",
        help="Also give ordinal variables the intraclass correlations and Lin's coefficient, on "
        "their category positions 1, 2, ... in codebook order.",
    ),
]
OccasionOption = Annotated[
    list[str] | None,
    typer.Option(
        "--occasion",
        help="CODER=PATH: PATH holds CODER's second coding of some units (test-retest). "
        "Repeat for more coders.",
    ),
]


def parse_occasion(spec: str) -> tuple[str, Path]:
    """``'ana=retest/ana.xlsx'`` -> ``('ana', Path('retest/ana.xlsx'))``; a usage error else."""
    coder, sep, path = spec.partition("=")
    coder, path = coder.strip(), path.strip()
    if not sep or not coder or not path:
        raise UsageError(
            f"--occasion takes CODER=PATH (for example ana=retest/ana.xlsx), not {spec!r}"
        )
    return coder, Path(path)


def attach_occasions(codings: Codings, specs: list[str] | None, codebook: Path) -> Codings:
    """Read each ``--occasion CODER=PATH`` and attach it as CODER's second occasion."""
    from coderel.cli.common import read_project
    from coderel.stability import add_occasion

    for spec in specs or []:
        coder, path = parse_occasion(spec)
        if coder not in codings.coders:
            known = ", ".join(codings.coders) or "none"
            raise UsageError(
                f"--occasion names the coder {coder!r}, who is not in the data (coders: {known})"
            )
        note = f"in {coder}'s second occasion count as blank"
        second = read_project(codebook, [path], errors_note=note)
        codings = add_occasion(codings, coder, second)
    return codings
