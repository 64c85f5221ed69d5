"""``coderel report``: the reliability report as HTML, Markdown or xlsx (a thin layer)."""

from __future__ import annotations

import dataclasses
import datetime as dt
import os
from pathlib import Path
from typing import Annotated

import typer

from coderel.cli.app import app
from coderel.cli.common import (
    DEFAULT_REPLICATES,
    DEFAULT_SEED,
    CodebookOption,
    DataArgument,
    DecisionsOption,
    IntervalOption,
    JsonOption,
    MemoryOption,
    ReplicatesOption,
    RuleOption,
    SeedOption,
    ToleranceOption,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
    read_project,
    say,
)
from coderel.cli.engines import EngineOption, SchedulerOption, use_cluster
from coderel.cli.occasions import IccOrdinalOption, OccasionOption, attach_occasions
from coderel.errors import ExitCode, UsageError

DateOption = Annotated[
    str | None,
    typer.Option(
        "--date",
        help="Date shown in the reproducibility block (YYYY-MM-DD or ISO date-time, UTC); "
        "default: SOURCE_DATE_EPOCH when set, else now.",
    ),
]


def report_time(date: str | None, environ: dict[str, str] | None = None) -> dt.datetime:
    """The report's time stamp: ``--date``, else ``SOURCE_DATE_EPOCH``, else now (UTC)."""
    env = os.environ if environ is None else environ
    if date:
        try:
            when = dt.datetime.fromisoformat(date)
        except ValueError:
            raise UsageError(f"--date {date!r} is not a date like 2026-12-02") from None
        return when.replace(tzinfo=dt.UTC) if when.tzinfo is None else when.astimezone(dt.UTC)
    epoch = env.get("SOURCE_DATE_EPOCH", "").strip()
    if epoch:
        try:
            return dt.datetime.fromtimestamp(int(epoch), dt.UTC)
        except (ValueError, OverflowError, OSError):
            raise UsageError(
                "SOURCE_DATE_EPOCH must be whole seconds since 1970-01-01 UTC"
            ) from None
    return dt.datetime.now(dt.UTC)


def _shown(path: Path) -> str:
    """A path for the reproducibility block: relative to the working folder when inside it."""
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(path)


def _command_line(
    codebook: Path, data: list[Path], decisions: Path | None, options: list[str]
) -> str:
    parts = ["coderel report", "--codebook", _shown(codebook), *map(_shown, data)]
    if decisions is not None:
        parts += ["--decisions", _shown(decisions)]
    return " ".join([*parts, *options])


#: Coder diagnostics (alpha without each coder: one alpha per coder and variable) are left out of
#: the report above this many coders; ``agree --coders`` still gives them.
MAX_DIAGNOSED_CODERS = 30


def _protocol(
    codings, prepared, codebook, key_files, round_specs, replicates, seed, interval_method
):
    """The coder diagnostics and, when asked, training and rounds: the report's protocol parts.

    The diagnostics come from what :func:`coderel.agree.prepare.prepare` kept of the table when
    the caller has it (``prepared``), else from the table itself.
    """
    from coderel.agree.coders import coder_diagnostics
    from coderel.io.rounds import round_names
    from coderel.report.protocol import protocol_parts

    diagnostics = None
    if 2 <= len(codings.coders) <= MAX_DIAGNOSED_CODERS:
        with delayed_progress("comparing each coder with the others"):
            diagnostics = coder_diagnostics(prepared if prepared is not None else codings)
    elif len(codings.coders) > MAX_DIAGNOSED_CODERS:
        say(
            f"{len(codings.coders)} coders: coder diagnostics left out of the report (more than "
            f"{MAX_DIAGNOSED_CODERS}); 'coderel agree --coders' gives them"
        )
    scored = trended = None
    settings = {"replicates": replicates, "seed": seed, "interval_method": interval_method}
    if key_files:
        from coderel.errors import InputRefused
        from coderel.io.versions import read_versioned
        from coderel.protocol.score import key_codebook, score

        with delayed_progress("reading the answer key") as step:
            key_codings = read_versioned(
                key_codebook(codings.codebook), sorted(key_files), progress=step
            )
        if key_codings.problems.refused:
            raise InputRefused("the answer key was refused", problems=key_codings.problems)
        with delayed_progress("scoring trainees against the key") as step:
            scored = score(key_codings, codings, progress=step, **settings)
    if round_specs or round_names(codings):
        from coderel.cli.rounds import read_rounds
        from coderel.protocol.trend import trend

        read = read_rounds(codebook, round_specs, codings)
        with delayed_progress("agreement per round") as step:
            trended = trend(read, progress=step, **settings)
    return protocol_parts(diagnostics, scored, trended)


@app.command("report")
@handle_errors
def report_command(
    data: DataArgument,
    codebook: CodebookOption,
    out: Annotated[
        Path | None,
        typer.Option(
            "--out", "-o", help="Report file: .html, .md or .xlsx (the extension names the form)."
        ),
    ] = None,
    formats: Annotated[
        str | None,
        typer.Option(
            "--format",
            help="Several forms at once, comma-separated (html,md,xlsx), written beside --out "
            "with its stem.",
        ),
    ] = None,
    decisions: DecisionsOption = None,
    rule: RuleOption = "unanimous",
    tolerance: ToleranceOption = None,
    replicates: ReplicatesOption = DEFAULT_REPLICATES,
    seed: SeedOption = DEFAULT_SEED,
    interval_method: IntervalOption = "bca",
    memory: MemoryOption = None,
    date: DateOption = None,
    key: Annotated[
        Path | None,
        typer.Option(
            "--key",
            help="An answer key: adds 'Training against the key' (DATA's coders scored "
            "against it).",
        ),
    ] = None,
    rounds: Annotated[
        list[str] | None,
        typer.Option(
            "--round",
            help="NAME=PATH of a round, or NAME of a round of DATA's 'round' column (repeat in "
            "time order): adds 'Reliability across rounds' (DATA with a 'round' column adds it "
            "by itself).",
        ),
    ] = None,
    occasion: OccasionOption = None,
    icc_ordinal: IccOrdinalOption = False,
    json_out: JsonOption = False,
    engine: EngineOption = "local",
    scheduler: SchedulerOption = None,
) -> ExitCode:
    """The reliability report: summary, agreement table, charts, coders, methods paragraph."""
    from coderel.adjudicate.rules import parse_tolerances
    from coderel.agree import agreement
    from coderel.agree.prepare import prepare
    from coderel.cli.rounds import parse_rounds, round_files
    from coderel.codings import SourceFile
    from coderel.io.atomic import refuse_overwriting_inputs, sha256_file
    from coderel.io.read import collect_files
    from coderel.memory import parse_memory, release_freed
    from coderel.progress import report
    from coderel.report import build_report, report_paths, write_report
    from coderel.report.facts import table_facts

    if out is None and not json_out:
        raise UsageError("name the report file with -o report.html (or .md, .xlsx), or use --json")
    forms = [f.strip() for f in formats.split(",") if f.strip()] if formats else None
    targets = report_paths(out, forms) if out is not None else []
    if decisions is not None and not decisions.is_file():
        raise UsageError(f"the decisions file {decisions.name!r} does not exist")
    round_specs = []
    if rounds:
        round_specs = parse_rounds(rounds)
    if key is not None and not key.exists():
        raise UsageError(f"the answer key {key.name!r} does not exist")
    key_files = set(collect_files([key])) if key is not None else set()
    inputs = [*collect_files(data), codebook, *([decisions] if decisions else [])]
    inputs += [*key_files, *round_files(round_specs)]
    refuse_overwriting_inputs(targets, inputs)
    when = report_time(date)
    on_cluster = use_cluster(engine, scheduler, occasion=occasion)
    if on_cluster:  # refuse other files before anything is read
        from coderel.engine.partitions import dataset_files

        dataset_files(data)

    codings = read_project(codebook, data, errors_note="were left out")
    codings = attach_occasions(codings, occasion, codebook)
    cb = codings.codebook
    tolerances = parse_tolerances(tolerance or [], cb)
    settings = {
        "replicates": replicates,
        "seed": seed,
        "interval_method": interval_method,
        "icc_ordinal": icc_ordinal,
        "memory": parse_memory(memory),
    }
    prepared = None
    if not on_cluster:
        with delayed_progress("summarising units") as step:
            report(step, 0, 1, "summarising units")
            prepared = prepare(codings)
    stable = None
    if not codings.occasions.empty:
        from coderel.stability import stability

        with delayed_progress("each coder against themselves (stability)") as step:
            stable = stability(
                codings,
                replicates=replicates,
                seed=seed,
                interval_method=interval_method,
                icc_ordinal=icc_ordinal,
                progress=step,
            )
    merged = None
    decisions_source = None
    if decisions is not None:
        from coderel.adjudicate import read_decisions
        from coderel.merge import merge

        with delayed_progress(f"reading {decisions.name}"):
            read = read_decisions(decisions, cb)
        if read.problems:
            say(
                f"{len(read.problems)} problem(s) in the decisions file; those decisions were "
                "left out; correct them in the adjudication list"
            )
        with delayed_progress("settling cells with the decisions"):
            merged = merge(codings, read, rule=rule, tolerance=tolerances)
        decisions_source = read.source or SourceFile(
            str(decisions), sha256_file(decisions), decisions.stat().st_size
        )
    protocol = _protocol(
        codings, prepared, codebook, key_files, round_specs, replicates, seed, interval_method
    )
    with delayed_progress("counting cells and coders"):
        facts = table_facts(
            codings,
            merged,
            units=prepared.units if prepared is not None else None,
            coders=prepared.coders if prepared is not None else None,
        )
    # Everything that needs the long table (and the merged one) is done: drop them so that the
    # bootstrap holds the per-unit summaries only, as agree does (issue 14;
    # tests/test_report_memory.py).
    del codings, merged
    release_freed()
    if on_cluster:  # the agreement on the cluster, the rest of the report in this process
        from coderel.cli.engines import agree_on_cluster

        result = agree_on_cluster(codebook, data, scheduler, errors_note=None, **settings).result
    else:
        with delayed_progress("agreement per variable") as step:
            result = agreement(prepared, progress=step, **settings)
        del prepared
    options = [f"--replicates {replicates}", f"--seed {seed}", f"--interval {interval_method}"]
    if decisions is not None:
        options.append(f"--rule {rule}")
        options.extend(f"--tolerance {n}={v:g}" for n, v in tolerances.items())
    options += [f"--occasion {spec}" for spec in occasion or []]
    if icc_ordinal:
        options.append("--icc-ordinal")
    with delayed_progress("assembling the report"):
        content = build_report(
            facts,
            result,
            command=_command_line(codebook, data, decisions, options),
            decisions_source=decisions_source,
            codebook_source=SourceFile(
                str(codebook), sha256_file(codebook), codebook.stat().st_size
            ),
            generated=when,
            stability=stable,
        )
    content = dataclasses.replace(content, protocol=protocol)
    written = []
    if out is not None:
        with delayed_progress(f"writing {out.name}") as step:
            written = write_report(content, out, forms, progress=step)
    reports = [p for p in written if p in targets]
    charts = len(written) - len(reports)
    if json_out:
        emit_json(content.to_dict())
        for path in reports:
            inform(f"written: {path}")
    else:
        for path in reports:
            typer.echo(str(path))
    if charts:
        folder = next(p for p in written if p not in targets).parent
        inform(f"{charts} chart(s) of the Markdown report in {folder}")
    return ExitCode.OK
