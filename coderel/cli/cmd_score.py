"""``coderel score``: each trainee against an answer key, with a feedback workbook per trainee."""

from __future__ import annotations

import re
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
    ReplicatesOption,
    SeedOption,
    delayed_progress,
    emit_json,
    handle_errors,
    inform,
    out_console,
    read_project,
    say,
)
from coderel.errors import ExitCode, InputRefused, UsageError

if TYPE_CHECKING:
    from coderel.agree import Estimate


_COLUMNS = ("percent_agreement", "cohen_kappa", "weighted_kappa_quadratic", "krippendorff_alpha")
_SHORT = {
    "percent_agreement": "agreement",
    "cohen_kappa": "kappa",
    "weighted_kappa_quadratic": "weighted kappa (quadratic)",
    "krippendorff_alpha": "alpha",
}


def _fmt(est: Estimate | None, *, se: bool = False) -> str:
    if est is None:
        return "-"
    if est.estimate is None:
        return f"undefined ({est.reason})" if est.reason else "undefined"
    text = f"{est.estimate:.3f}"
    if est.ci:
        text += f" [{est.ci[0]:.3f}, {est.ci[1]:.3f}]"
    if se and est.se is not None:
        text += f" SE {est.se:.3f}"
    return text


def feedback_name(trainee: str) -> str:
    """A file name for a trainee's workbook: letters, digits, ``._-`` kept, others ``_``."""
    stem = re.sub(r"[^A-Za-z0-9._-]", "_", trainee).strip("._") or "trainee"
    return f"feedback_{stem}.xlsx"


@app.command("score")
@handle_errors
def score_command(
    data: DataArgument,
    codebook: CodebookOption,
    key: Annotated[
        Path,
        typer.Option(
            "--key",
            help="The answer key: one coding of the training units (any sheet coderel reads), "
            "optionally with 'note' or '<variable>_note' columns.",
        ),
    ],
    out: Annotated[
        Path | None,
        typer.Option("--out", "-o", help="Folder for one feedback workbook per trainee."),
    ] = None,
    replicates: ReplicatesOption = DEFAULT_REPLICATES,
    seed: SeedOption = DEFAULT_SEED,
    interval_method: IntervalOption = "bca",
    json_out: JsonOption = False,
) -> ExitCode:
    """Score each trainee against the answer key: agreement, kappa, pass or fail per variable."""
    from coderel.io.atomic import refuse_overwriting_inputs
    from coderel.io.read import collect_files
    from coderel.io.tables import write_xlsx
    from coderel.io.versions import read_versioned
    from coderel.protocol.score import key_codebook, score

    key_files = set(collect_files([key]))
    data_files = [f for f in collect_files(data) if f not in key_files]
    if not data_files:
        raise UsageError("no trainee's sheet left once the key is set apart: give DATA")
    trainees = read_project(codebook, data_files, errors_note="count as blank")
    with delayed_progress("reading the answer key") as step:
        key_codings = read_versioned(
            key_codebook(trainees.codebook), sorted(key_files), progress=step
        )
    if key_codings.problems.refused:
        raise InputRefused("the answer key was refused", problems=key_codings.problems)
    key_errors = key_codings.problems.errors
    if key_errors:
        say(f"{len(key_errors)} cell(s) of the key with errors count as blank; validate the key")
    with delayed_progress("scoring trainees: resampling units") as progress:
        result = score(
            key_codings,
            trainees,
            replicates=replicates,
            seed=seed,
            interval_method=interval_method,
            progress=progress,
        )
    if out is not None:
        paths = [out / feedback_name(t) for t in result.trainees]
        refuse_overwriting_inputs(paths, [*data_files, *key_files, codebook])
        out.mkdir(parents=True, exist_ok=True)
        with delayed_progress("writing feedback workbooks") as step:
            for done, (trainee, path) in enumerate(zip(result.trainees, paths, strict=True)):
                step(done, len(paths), f"writing {path.name}")
                frame = result.to_frame()
                mine = frame[frame["trainee"] == trainee].drop(columns=["trainee"])
                write_xlsx({"differences": result.feedback[trainee], "scores": mine}, path)
        inform(f"{len(paths)} feedback workbook(s) written to {out}")
    if json_out:
        emit_json(result.to_dict())
        return ExitCode.OK
    console = out_console()
    for trainee in result.trainees:
        s = result.summary(trainee)
        table = Table(
            title=f"{trainee} against the key ({result.key_coder}, {result.key_units} "
            f"units; {replicates} bootstrap replicates, seed {seed})"
        )
        for col in ("variable", "level", "units", *(_SHORT[c] for c in _COLUMNS)):
            table.add_column(col)
        table.add_column("judged by")
        table.add_column("threshold")
        table.add_column("verdict")
        for v in (x for x in result.scores if x.trainee == trainee):
            table.add_row(
                v.variable,
                v.level,
                str(v.units),
                *(_fmt(v.coefficients.get(c), se=c != "percent_agreement") for c in _COLUMNS),
                _SHORT[v.judged_by],
                f"{v.threshold:.3f}",
                v.verdict,
            )
        console.print(table)
        if s.below:
            console.print(
                f"{trainee}: {s.passed} of {s.variables} variables pass; below the "
                f"training threshold: {', '.join(s.below)}; {s.differences} difference(s) "
                "from the key to go through"
            )
        else:
            console.print(
                f"{trainee}: {s.passed} of {s.variables} variables pass; none below the "
                f"training threshold; {s.differences} difference(s) from the key"
            )
    for note in result.notes:
        say(note)
    return ExitCode.OK
