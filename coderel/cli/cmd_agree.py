"""``coderel agree``: agreement per variable with bootstrap intervals."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer
from rich.table import Table

from coderel.cli.app import app
from coderel.cli.common import (
    DEFAULT_REPLICATES,
    DEFAULT_SEED,
    CodebookOption,
    DataArgument,
    IntervalOption,
    JsonOption,
    MemoryOption,
    ReplicatesOption,
    SeedOption,
    TableOutOption,
    check_table_output,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
    out_console,
    read_project,
    say,
)
from coderel.cli.engines import EngineOption, SchedulerOption, agree_on_cluster, use_cluster
from coderel.cli.occasions import IccOrdinalOption
from coderel.errors import ExitCode
from coderel.memory import parse_memory, release_freed
from coderel.progress import report

if TYPE_CHECKING:
    from coderel.agree import AgreementResult, Estimate
    from coderel.agree.collapse import WhatIf


SHOWN = ("krippendorff_alpha", "percent_agreement", "fleiss_kappa", "cohen_kappa", "gwet_ac1")


def _fmt(est: Estimate | None) -> str:
    if est is None:
        return "-"
    if est.estimate is None:
        return f"undefined ({est.reason})" if est.reason else "undefined"
    text = f"{est.estimate:.3f}"
    if est.ci:
        text += f" [{est.ci[0]:.3f}, {est.ci[1]:.3f}]"
    return text


def _num(value: float | None) -> str:
    return "-" if value is None else f"{value:.3f}"


def _pairs_tables(result: AgreementResult) -> list[Table]:
    """One coder-by-coder matrix per variable: alpha above the diagonal, percent below."""
    coders = list(result.coders)
    tables = []
    for v in result.variables:
        if not v.pairs:
            continue
        cell = {(p.coder_a, p.coder_b): p for p in v.pairs}
        table = Table(
            title=f"{v.variable}: pairwise alpha (upper right) and percent agreement (lower left)"
        )
        table.add_column("coder")
        for c in coders:
            table.add_column(c, justify="right")
        for i, a in enumerate(coders):
            row = [a]
            for j, b in enumerate(coders):
                if i == j:
                    row.append("")
                    continue
                p = cell.get((a, b)) or cell.get((b, a))
                if p is None:
                    row.append("-")
                else:
                    row.append(_num(p.krippendorff_alpha if j > i else p.percent_agreement))
            table.add_row(*row)
        tables.append(table)
    return tables


def _what_if_table(what_if: WhatIf) -> Table:
    table = Table(title="What-if: alpha with categories merged (not a result to report)")
    for col in ("variable", "merged", "alpha as coded", "alpha merged", "change", "verdict"):
        table.add_column(col)
    for r in what_if.rows:
        change = "-" if r.change is None else f"{r.change:+.3f}"
        table.add_row(
            r.variable,
            r.spec,
            _fmt(r.original),
            _fmt(r.collapsed),
            change,
            f"{r.original_verdict} -> {r.collapsed_verdict}",
        )
    return table


@app.command("agree")
@handle_errors
def agree_command(
    data: DataArgument,
    codebook: CodebookOption,
    replicates: ReplicatesOption = DEFAULT_REPLICATES,
    seed: SeedOption = DEFAULT_SEED,
    interval_method: IntervalOption = "bca",
    memory: MemoryOption = None,
    pairs: Annotated[
        bool, typer.Option("--pairs", help="Add the coder-by-coder agreement per variable.")
    ] = False,
    coders: Annotated[
        bool,
        typer.Option(
            "--coders",
            help="Add coder diagnostics: alpha without each coder, marginal homogeneity per pair "
            "of coders, each coder's share of each category.",
        ),
    ] = False,
    icc_ordinal: IccOrdinalOption = False,
    json_out: JsonOption = False,
    out: TableOutOption = None,
    units: Annotated[
        Path | None,
        typer.Option(
            "--units",
            help="Only these units: a unit list, e.g. reliability-units.txt of 'coderel assign'.",
        ),
    ] = None,
    collapse: Annotated[
        list[str] | None,
        typer.Option(
            "--collapse",
            help="What-if: alpha with categories merged, beside the original, e.g. "
            "behaviour=4+5 (the first code is kept; repeatable).",
        ),
    ] = None,
    engine: EngineOption = "local",
    scheduler: SchedulerOption = None,
) -> ExitCode:
    """Every agreement coefficient per variable, with seeded bootstrap intervals."""
    from coderel.agree import agreement
    from coderel.agree.prepare import prepare
    from coderel.cli.numeric_tables import numeric_tables
    from coderel.io.tables import table_format, write_table

    check_table_output(out, data, codebook)
    if out is not None and pairs and table_format(out) != "xlsx":
        check_table_output(out.with_name(f"{out.stem}-pairs{out.suffix}"), data, codebook)
    errors_note = "were left out (exit code 1: data problems)"
    settings = {
        "replicates": replicates,
        "seed": seed,
        "interval_method": interval_method,
        "memory": parse_memory(memory),
    }
    if use_cluster(engine, scheduler, units=units, coders=coders, collapse=collapse):
        with delayed_progress("agreement on the cluster"):
            run = agree_on_cluster(
                codebook,
                data,
                scheduler,
                icc_ordinal=icc_ordinal,
                errors_note=errors_note,
                **settings,
            )
        status = ExitCode.DATA_PROBLEMS if run.problems.errors else ExitCode.OK
        result, single = run.result, run.single_coded_units
        what_if = diagnostics = None
    else:
        codings = read_project(codebook, data, errors_note=errors_note)
        # Cells with errors are left out and the numbers computed without them, but the run is not
        # clean: exit 1 (data problems), as validate does.
        status = ExitCode.DATA_PROBLEMS if codings.problems.errors else ExitCode.OK
        if units is not None:
            from coderel.template import read_unit_list

            listed = read_unit_list(units)
            found = set(codings.units)
            codings = codings.restricted_to(listed)
            absent = sum(1 for u in listed if u not in found)
            inform(
                f"agreement on the {len(listed):,} unit(s) of {units.name}"
                + (f"; {absent:,} of them are in no sheet" if absent else "")
            )
        collapses = ()
        if collapse:
            from coderel.agree.collapse import parse_collapses

            collapses = parse_collapses(collapse, codings.codebook)
        with delayed_progress("summarising units") as progress:
            report(progress, 0, 1, "summarising units")
            prepared = prepare(codings)
            recoded = None
            if collapses:
                from coderel.agree.collapse import collapsed

                recoded = collapsed(codings, collapses)
        # Everything that needs the long table is done: drop it (and its problems) so that the
        # bootstrap holds the per-unit summaries only (issue 14, item 3;
        # tests/test_agree_memory.py).
        del codings
        release_freed()
        diagnostics = None
        if coders:
            from coderel.agree.coders import coder_diagnostics

            with delayed_progress("comparing each coder with the others"):
                diagnostics = coder_diagnostics(prepared)
        single = prepared.single_coded_units
        with delayed_progress("agreement per variable") as progress:
            result = agreement(prepared, icc_ordinal=icc_ordinal, progress=progress, **settings)
        del prepared
        what_if = None
        if recoded is not None:
            from coderel.agree.collapse import what_if_prepared

            with delayed_progress("resampling units with categories merged"):
                what_if = what_if_prepared(recoded, collapses, result, **settings)
    if out is not None:
        extra = {"pairs": result.pairs_frame()} if pairs else {}
        if diagnostics is not None:
            extra.update(
                drop_one=diagnostics.to_frame(),
                homogeneity=diagnostics.homogeneity_frame(),
                shares=diagnostics.shares_frame(),
            )
        if what_if is not None:
            extra["collapse"] = what_if.to_frame()
        with delayed_progress(f"writing {out.name}"):
            write_table(result.to_frame(), out, sheet="agreement", extra_sheets=extra)
        if pairs and table_format(out) != "xlsx":
            pairs_path = out.with_name(f"{out.stem}-pairs{out.suffix}")
            write_table(result.pairs_frame(), pairs_path, sheet="pairs")
            inform(f"pairs written to {pairs_path}")
        inform(f"table written to {out}")
    if len(result.coders) < 2:
        say(
            f"only {len(result.coders)} coder(s) ({', '.join(result.coders) or 'none'}): agreement "
            "needs at least two coders coding the same units, so every coefficient is undefined"
        )
    if single:
        say(
            f"{single:,} unit(s) coded by one coder only were left out: agreement needs two or "
            "more coders per unit"
        )
    if json_out:
        payload = {**result.to_dict(pairs=pairs), "single_coded_units": single}
        if diagnostics is not None:
            payload["coder_diagnostics"] = diagnostics.to_dict()
        if what_if is not None:
            payload["collapse"] = what_if.to_dict()
        emit_json(payload)
        return status
    # Two coders: Cohen's kappa; more: Light's mean pairwise kappa (Cohen's is then undefined).
    kappa = "cohen_kappa" if len(result.coders) == 2 else "light_kappa"
    shown = tuple(kappa if k == "cohen_kappa" else k for k in SHOWN)
    table = Table(title=f"Agreement ({replicates} bootstrap replicates, seed {seed})")
    for col in ("variable", "level", "units", "pairable", *shown, "verdict"):
        table.add_column(col)
    for v in result.variables:
        table.add_row(
            v.variable,
            v.level,
            str(v.units),
            str(v.pairable_values),
            *(_fmt(v.coefficients.get(k)) for k in shown),
            v.verdict,
        )
    console = out_console()
    console.print(table)
    for v in result.variables:
        for note in v.notes:
            console.print(f"{v.variable}: {note}")
    for t in numeric_tables(result):
        console.print(t)
    if pairs:
        for t in _pairs_tables(result):
            console.print(t)
    if diagnostics is not None:
        from coderel.cli.coders_view import coder_tables

        for t in coder_tables(diagnostics):
            console.print(t)
        for note in diagnostics.notes:
            console.print(note)
    if what_if is not None:
        console.print(_what_if_table(what_if))
        console.print(what_if.note)
    say(
        "Verdicts compare alpha with the codebook's thresholds (conventions: Krippendorff 2004). "
        "Reliability is not validity: agreeing coders can still share a wrong reading."
    )
    return status
