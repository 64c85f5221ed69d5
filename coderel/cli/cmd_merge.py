"""``coderel merge``: the reconciled dataset, with a status per cell and an audit log."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    CodebookOption,
    DataArgument,
    DecisionsOption,
    JsonOption,
    RuleOption,
    ToleranceOption,
    delayed_progress,
    emit_json,
    err_console,
    handle_errors,
    inform,
    out_console,
    print_problems,
    read_project,
    say,
)
from coderel.cli.engines import EngineOption, SchedulerOption, use_cluster
from coderel.errors import ExitCode, UsageError
from coderel.problems import Problems

if TYPE_CHECKING:
    from coderel.merge import MergeResult


#: At most this many unresolved cells are listed on the terminal (--json lists every one).
SHOWN_UNRESOLVED = 40


@app.command("merge")
@handle_errors
def merge_command(
    data: DataArgument,
    codebook: CodebookOption,
    out: Annotated[Path, typer.Option("--out", "-o", help="The dataset: .csv, .xlsx or .parquet.")],
    decisions: DecisionsOption = None,
    rule: RuleOption = "unanimous",
    tolerance: ToleranceOption = None,
    strict: Annotated[
        bool,
        typer.Option("--strict", help="Any unresolved cell is an error: exit 1, nothing written."),
    ] = False,
    spread: Annotated[
        bool, typer.Option("--spread", help="Add a 0/1 column per category of multi-select.")
    ] = False,
    json_out: JsonOption = False,
    engine: EngineOption = "local",
    scheduler: SchedulerOption = None,
) -> ExitCode:
    """One row per unit, a final value and a status per variable; an audit line per merge."""
    from coderel.adjudicate import read_decisions
    from coderel.adjudicate.rules import Settling, parse_tolerances
    from coderel.audit import audit_path, write_audited
    from coderel.io.atomic import refuse_overwriting_inputs
    from coderel.io.read import collect_files
    from coderel.io.tables import table_format
    from coderel.memory import release_freed
    from coderel.merge import STATUSES, merge, write_merged

    table_format(out)
    inputs = [*collect_files(data), codebook]
    if decisions is not None:
        if not decisions.is_file():
            raise UsageError(f"no such decisions file: {decisions.name!r}")
        inputs.append(decisions)
    refuse_overwriting_inputs([out, audit_path(out)], inputs)
    errors_note = "count as blank (a blank against a value is a disagreement to adjudicate)"
    if use_cluster(engine, scheduler):
        from coderel.cli.engines import merge_on_cluster
        from coderel.codebook.load import load_codebook

        cb = load_codebook(codebook)
        tolerances = parse_tolerances(tolerance or [], cb)
        result = merge_on_cluster(
            cb,
            data,
            scheduler,
            decisions=decisions,
            rule=rule,
            tolerance=tolerances,
            errors_note=errors_note,
        ).result
    else:
        codings = read_project(codebook, data, errors_note=errors_note)
        cb = codings.codebook
        loaded = None
        if decisions is not None:
            with delayed_progress(f"reading {decisions.name}"):
                loaded = read_decisions(decisions, cb, codings.coders)
        tolerances = parse_tolerances(tolerance or [], cb)
        with delayed_progress("settling cells"):
            result = merge(codings, loaded, rule=rule, tolerance=tolerances)
        # the dataset is written from the result alone: the long table goes first
        del codings, loaded
        release_freed()
    bad = Problems(result.problems.errors)
    written = False
    reason = None
    if bad:
        reason = "decisions that are not valid codes (listed above)"
    elif strict and result.unresolved:
        reason = f"--strict and {len(result.unresolved)} unresolved cell(s)"
    log = None
    was_out_of_step = False
    if reason is None:
        with delayed_progress(f"writing {out.name}"):
            log, was_out_of_step = write_audited(
                result,
                out,
                lambda: write_merged(result, out, cb, spread=spread),
                codebook_path=codebook,
                spread=spread,
            )
        written = True
        if was_out_of_step:
            say(
                f"note: the dataset {out} found before this merge did not match the last line "
                "of its audit log (an earlier merge was cut off, or the file was edited); it "
                "was replaced and this merge logged"
            )
    if json_out:
        emit_json(
            {
                "output": str(out) if written else None,
                "audit_log": str(log) if log is not None else None,
                "written": written,
                "was_out_of_step": was_out_of_step,
                "not_written_because": reason,
                **result.to_dict(),
            }
        )
    else:
        _print_statuses(result)
    print_problems(result.problems)
    _print_unresolved(result.unresolved_records(SHOWN_UNRESOLVED), len(result.unresolved))
    totals = result.totals()
    counts = ", ".join(f"{totals[s]} {s}" for s in STATUSES if totals[s])
    inform(
        f"{result.units} unit(s) x {len(cb.variables)} variable(s) = {result.cells} cell(s): "
        f"{counts} (rule: {Settling(rule, tolerances).describe()})."
    )
    if not written:
        say(f"nothing written: {reason}", style="red")
        return ExitCode.DATA_PROBLEMS
    inform(f"dataset written to {out}; audit line appended to {log}")
    if result.unresolved:
        say(
            "unresolved cells are empty in the dataset; decide them with 'coderel adjudicate' "
            "and merge again with --decisions"
        )
    return ExitCode.OK


def _print_statuses(result: MergeResult) -> None:
    from coderel.merge import STATUSES

    table = Table(title=f"Status of every cell (rule: {result.rule})")
    table.add_column("variable")
    for s in STATUSES:
        table.add_column(s, justify="right")
    for name, counts in result.status_counts.items():
        table.add_row(name, *(str(counts[s]) for s in STATUSES))
    out_console().print(table)


def _print_unresolved(unresolved: list[dict], total: int) -> None:
    """The first of ``total`` unresolved cells (``unresolved``), and how many more there are."""
    if not unresolved:
        return
    table = Table(title=f"{total} unresolved cell(s)")
    for col in ("unit", "variable", "coders' values"):
        table.add_column(col, overflow="fold")
    for cell in unresolved[:SHOWN_UNRESOLVED]:
        shown = "; ".join(f"{c}: {v}" for c, v in cell["coders"].items()) or "no coder"
        table.add_row(cell["unit"], cell["variable"], shown)
    console = err_console()
    console.print(table)
    if total > SHOWN_UNRESOLVED:
        console.print(f"... and {total - SHOWN_UNRESOLVED} more (--json lists all)")
