"""``coderel stability``: test-retest (intra-coder) agreement of each coder with their recoding."""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.table import Table

from coderel.cli.app import app
from coderel.cli.cmd_agree import _fmt
from coderel.cli.common import (
    DEFAULT_REPLICATES,
    DEFAULT_SEED,
    CodebookOption,
    DataArgument,
    IntervalOption,
    JsonOption,
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
from coderel.cli.occasions import IccOrdinalOption, OccasionOption, attach_occasions
from coderel.errors import ExitCode

if TYPE_CHECKING:
    from coderel.stability import StabilityResult


#: Columns of the terminal table: alpha, Cohen's kappa (categorical) and ICC(A,1) (numeric).
SHOWN = ("krippendorff_alpha", "cohen_kappa", "icc_2_1")


def recoding_sentence(result: StabilityResult) -> list[str]:
    """One line per coder: units recoded, units compared, time between the occasions."""
    lines = []
    for c in result.coders:
        when = f", {c.days} days after the first" if c.days is not None else ""
        lines.append(
            f"{c.coder}: {c.units_recoded} unit(s) recoded{when}; {c.common_units} coded on both "
            "occasions"
        )
    return lines


@app.command("stability")
@handle_errors
def stability_command(
    data: DataArgument,
    codebook: CodebookOption,
    occasion: OccasionOption = None,
    replicates: ReplicatesOption = DEFAULT_REPLICATES,
    seed: SeedOption = DEFAULT_SEED,
    interval_method: IntervalOption = "bca",
    icc_ordinal: IccOrdinalOption = False,
    json_out: JsonOption = False,
    out: TableOutOption = None,
) -> ExitCode:
    """Each coder against their own second coding (test-retest, Krippendorff's stability)."""
    from coderel.io.tables import write_table
    from coderel.stability import stability

    check_table_output(out, data, codebook)
    codings = read_project(codebook, data, errors_note="were left out")
    codings = attach_occasions(codings, occasion, codebook)
    with delayed_progress("each coder against themselves: resampling units") as progress:
        result = stability(
            codings,
            replicates=replicates,
            seed=seed,
            interval_method=interval_method,
            icc_ordinal=icc_ordinal,
            progress=progress,
        )
    if out is not None:
        write_table(result.to_frame(), out, sheet="stability")
        inform(f"table written to {out}")
    if json_out:
        emit_json(result.to_dict())
        return ExitCode.OK
    table = Table(title=f"Stability ({replicates} bootstrap replicates, seed {seed})")
    for col in ("coder", "variable", "level", "units", *SHOWN, "verdict"):
        table.add_column(col)
    for c in result.coders:
        if c.agreement is None:
            continue
        for v in c.agreement.variables:
            table.add_row(
                c.coder,
                v.variable,
                v.level,
                str(v.units),
                *(_fmt(v.coefficients.get(k)) for k in SHOWN),
                v.verdict,
            )
    console = out_console()
    console.print(table)
    for line in recoding_sentence(result):
        console.print(line)
    say(
        "Stability is one coder agreeing with themselves over time (Krippendorff 2004, 11.1); it "
        "does not show that different coders agree. Verdicts use the codebook's thresholds."
    )
    return ExitCode.OK
