"""``--engine`` and ``--scheduler``: where a command computes (this process, or a Dask cluster)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Literal

import typer

from coderel.cli.common import delayed_progress, say, tell_read_problems
from coderel.errors import UsageError

if TYPE_CHECKING:
    from coderel.engine.agree import ClusterRun
    from coderel.engine.merge import ClusterMerge

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
    errors_note: str | None,
) -> ClusterRun:
    """``agree``'s numbers computed on the cluster, with the same messages about the input as
    :func:`coderel.cli.common.read_project` (none when ``errors_note`` is None: a command that
    read the data in this process too, ``report``, has told them already)."""
    from coderel.codebook.load import load_codebook
    from coderel.engine.agree import agreement_on_cluster
    from coderel.engine.cluster import connect
    from coderel.engine.partitions import dataset_files

    dataset_files(data)  # refuse other files before a cluster is started
    cb = load_codebook(codebook)
    _say_where(scheduler)
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
    if errors_note is not None:
        tell_read_problems(run.problems, errors_note=errors_note)
    _say_read(run.files, run.partitions, run.labels)
    return run


def _say_where(scheduler: str | None) -> None:
    say(f"computing on {scheduler or 'a local cluster (2 worker processes on 127.0.0.1)'}")


def _say_read(files: int, partitions: int, labels: int) -> None:
    say(
        f"read {labels:,} label(s) from {files:,} file(s) in {partitions:,} "
        "partition(s) by unit on the workers"
    )


def merge_on_cluster(
    codebook,
    data: list[Path],
    scheduler: str | None,
    *,
    decisions: Path | None,
    rule: str,
    tolerance,
    errors_note: str,
) -> ClusterMerge:
    """``merge``'s result computed on the cluster (``codebook`` loaded, ``tolerance`` parsed),
    with the same messages about the input as :func:`coderel.cli.common.read_project`."""
    from coderel.engine import merge as engine_merge
    from coderel.engine.cluster import connect
    from coderel.engine.partitions import dataset_files

    dataset_files(data)  # refuse other files before a cluster is started
    _say_where(scheduler)
    with (
        connect(scheduler) as client,
        delayed_progress("reading the sheets on the workers") as reading,
        delayed_progress("settling cells on the workers") as settling,
    ):
        run = engine_merge.merge_on_cluster(
            client,
            codebook,
            data,
            decisions_path=decisions,
            rule=rule,
            tolerance=tolerance,
            reading=reading,
            settling=settling,
        )
    tell_read_problems(run.problems, errors_note=errors_note)
    _say_read(run.files, run.partitions, run.labels)
    return run
