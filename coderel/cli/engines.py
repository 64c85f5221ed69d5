"""``--engine`` and ``--scheduler``: where a command computes (this process, or a Dask cluster)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Literal

import typer

from coderel.cli.common import delayed_progress, say, tell_read_problems
from coderel.errors import UsageError

if TYPE_CHECKING:
    from coderel.engine.agree import ClusterRun

EngineOption = Annotated[
    Literal["local", "dask"],
    typer.Option(
        "--engine",
        help="local: compute in this process; dask: read and sum partition-wise on a Dask "
        "cluster (a folder of long Parquet tables; needs coderel[dask]).",
    ),
]
SchedulerOption = Annotated[
    str | None,
    typer.Option(
        "--scheduler",
        help="With --engine dask: the scheduler's address, e.g. tcp://10.0.0.5:8786 (default: "
        "a local cluster of 2 worker processes on 127.0.0.1).",
    ),
]


def use_cluster(engine: str, scheduler: str | None, **unsupported: object) -> bool:
    """Is the command to run on a cluster? Refuse a scheduler without ``--engine dask`` and the
    options the dask engine does not offer yet (named in ``unsupported`` with their values)."""
    if scheduler and engine != "dask":
        raise UsageError("--scheduler goes with --engine dask")
    if engine != "dask":
        return False
    given = [f"--{name}" for name, value in unsupported.items() if value]
    if given:
        raise UsageError(
            f"{', '.join(given)} cannot be used with --engine dask yet; use --engine local"
        )
    from coderel.engine.cluster import require_dask

    require_dask()
    return True


def agree_on_cluster(
    codebook: Path,
    data: list[Path],
    scheduler: str | None,
    *,
    icc_ordinal: bool,
    replicates: int,
    seed: int,
    interval_method: str,
    memory: int,
    errors_note: str,
) -> ClusterRun:
    """``agree``'s numbers computed on the cluster, with the same messages about the input as
    :func:`coderel.cli.common.read_project`."""
    from coderel.codebook.load import load_codebook
    from coderel.engine.agree import agreement_on_cluster
    from coderel.engine.cluster import connect
    from coderel.engine.partitions import dataset_files

    dataset_files(data)  # refuse other files before a cluster is started
    cb = load_codebook(codebook)
    where = scheduler or "a local cluster (2 worker processes on 127.0.0.1)"
    say(f"computing on {where}")
    with (
        connect(scheduler) as client,
        delayed_progress("reading and summarising on the workers") as reading,
        delayed_progress("bootstrap on the workers") as progress,
    ):
        run = agreement_on_cluster(
            client,
            cb,
            data,
            replicates=replicates,
            seed=seed,
            interval_method=interval_method,
            icc_ordinal=icc_ordinal,
            memory=memory,
            reading=reading,
            progress=progress,
        )
    tell_read_problems(run.problems, errors_note=errors_note)
    say(
        f"read {run.labels:,} label(s) from {run.files:,} file(s) in {run.partitions:,} "
        "partition(s) by unit on the workers"
    )
    return run
