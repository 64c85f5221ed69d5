"""``agree`` on a Dask cluster: read and summarise groups of units on the workers, join the
per-unit summaries, and make the bootstrap sums partition-wise; the same
:func:`coderel.agree.driver.agreement_of_targets` as the in-process engine does the rest."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from coderel.codebook import Codebook
from coderel.problems import Problems
from coderel.stats.bootstrap import DEFAULT_MEMORY

if TYPE_CHECKING:
    from distributed import Client

    from coderel.agree import AgreementResult


@dataclass(frozen=True)
class ClusterRun:
    """What the cluster read and computed."""

    result: AgreementResult
    problems: Problems
    single_coded_units: int
    files: int
    partitions: int
    labels: int


def agreement_on_cluster(
    client: Client,
    codebook: Codebook,
    paths: Sequence[Path],
    *,
    replicates: int,
    seed: int,
    ci_level: float = 0.95,
    interval_method: str = "bca",
    icc_ordinal: bool = False,
    memory: int = DEFAULT_MEMORY,
    reading: Callable[[int, int], None] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> ClusterRun:
    """Agreement on the dataset at ``paths`` (long Parquet tables), computed on ``client``'s
    cluster; the numbers are those of :func:`coderel.agree.agreement` on the same files."""
    from distributed import as_completed

    from coderel.agree.driver import agreement_of_targets, check_settings
    from coderel.engine.assemble import assemble
    from coderel.engine.bootstrap import cluster_evaluator
    from coderel.engine.partitions import summarise
    from coderel.engine.reading import dataset_groups, partition_tasks
    from coderel.engine.shuffle import summarise_bucket

    check_settings(replicates, seed, ci_level, interval_method)
    files, groups = dataset_groups(client, paths)
    cb = client.scatter(codebook, broadcast=True)
    tasks = partition_tasks(client, cb, files, groups, summarise, summarise_bucket).tasks
    futures = {fut: n for n, fut in enumerate(tasks)}
    summaries = [None] * len(tasks)
    for done, fut in enumerate(as_completed(futures), 1):
        summaries[futures[fut]] = fut.result()
        fut.release()
        if reading is not None:
            reading(done, len(tasks))
    problems = Problems()
    for s in summaries:
        problems.extend(s.problems)  # type: ignore[union-attr]
    targets, units, coders = assemble(codebook, summaries)  # type: ignore[arg-type]
    single = sum(s.single_coded_units for s in summaries)  # type: ignore[union-attr]
    labels = sum(s.labels for s in summaries)  # type: ignore[union-attr]
    del summaries
    result = agreement_of_targets(
        codebook,
        targets,
        units,
        coders,
        replicates=replicates,
        seed=seed,
        ci_level=ci_level,
        interval_method=interval_method,
        icc_ordinal=icc_ordinal,
        progress=progress,
        memory=memory,
        evaluate=cluster_evaluator(client),
    )
    return ClusterRun(result, problems, single, len(files), len(tasks), labels)
