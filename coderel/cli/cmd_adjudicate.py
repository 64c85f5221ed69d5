"""``coderel adjudicate``: the list of disagreements to decide, kept across regenerations."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    CodebookOption,
    DataArgument,
    JsonOption,
    RuleOption,
    ToleranceOption,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
    out_console,
    print_problems,
    read_project,
    say,
)
from coderel.errors import ExitCode, UsageError
from coderel.problems import Problems

LIST_SUFFIXES = (".xlsx", ".csv")


@app.command("adjudicate")
@handle_errors
def adjudicate_command(
    data: DataArgument,
    codebook: CodebookOption,
    out: Annotated[
        Path,
        typer.Option(
            "--out",
            "-o",
            help="The adjudication list (.xlsx or .csv). When it exists, its decisions are kept.",
        ),
    ],
    rule: RuleOption = "unanimous",
    tolerance: ToleranceOption = None,
    json_out: JsonOption = False,
) -> ExitCode:
    """Write one row per cell where coders disagree; keep decisions already made in OUT.

    With --rule majority or --tolerance, only the cells the rule leaves open are listed; use the
    same options with merge.
    """
    from coderel.adjudicate import (
        MAIN_SHEET,
        build_adjudication,
        check_decisions,
        write_adjudication,
    )
    from coderel.adjudicate.rules import Settling, parse_tolerances
    from coderel.io.atomic import refuse_overwriting_inputs
    from coderel.io.read import collect_files

    if out.suffix.lower() not in LIST_SUFFIXES:
        raise UsageError(f"cannot write {out.name!r}: the adjudication list is .xlsx or .csv")
    refuse_overwriting_inputs([out], [*collect_files(data), codebook])
    codings = read_project(
        codebook,
        data,
        errors_note="count as blank here; fix the sheets, then run adjudicate again (decisions "
        "are kept)",
    )
    settling = Settling(rule, parse_tolerances(tolerance or [], codings.codebook))
    previous = out if out.exists() else None
    with delayed_progress("finding disagreements"):
        adjudication = build_adjudication(codings, previous, settling)
    with delayed_progress(f"writing {out.name}"):
        write_adjudication(adjudication, out)
    sheet = None if out.suffix.lower() == ".csv" else MAIN_SHEET
    problems = Problems(
        replace(p, file=out.name, sheet=sheet if p.sheet == MAIN_SHEET else p.sheet)
        for p in adjudication.problems
        if p.code != "bad-decision"
    )
    problems.extend(check_decisions(adjudication, file=out.name))
    summary = adjudication.summary()
    decided = int(summary["decided"].sum())
    if json_out:
        emit_json(
            {
                "output": str(out),
                "updated": previous is not None,
                **adjudication.to_dict(),
                **problems.to_dict(),
            }
        )
    else:
        table = Table(title=f"Adjudication list {out.name}")
        for col in summary.columns:
            table.add_column(str(col))
        for row in summary.itertuples(index=False):
            table.add_row(*(str(v) for v in row))
        out_console().print(table)
    print_problems(problems)
    verb = "updated" if previous is not None else "written"
    inform(
        f"{out} {verb}: {len(adjudication.rows)} disagreement(s) to decide "
        f"({adjudication.added} new, {adjudication.kept} kept from the earlier list), "
        f"{decided} decided, {len(adjudication.rows) - decided} open; "
        f"{adjudication.moved} moved to 'no longer needed' "
        f"({len(adjudication.retired)} there in all); rule: {settling.describe()}."
    )
    if problems.errors:
        say("some decisions are not valid codes; fix the cells listed above", style="red")
        return ExitCode.DATA_PROBLEMS
    return ExitCode.OK
