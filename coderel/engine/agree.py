"""``agree`` on a Dask cluster: read and summarise partitions of units on the workers, build and
sum every partition's plans where it is (:mod:`coderel.engine.plans`), and make each row of the
result by the in-process function from the added sums."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from coderel.codebook import Codebook
from coderel.problems import Problems
from coderel.progress import report
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


def _wait(futures: list, done: Callable[[int, int], None]) -> None:
    """Report each future as it completes, and drop it (the list is emptied): its result stays
    on its worker only until the additions that need it have run, so a worker does not keep
    every partition's R x M sums."""
    from distributed import as_completed

    total = len(futures)
    pending = as_completed(futures)
    futures.clear()
    for count, fut in enumerate(pending, 1):
        fut.release()
        done(count, total)


def _in_order(futures: list, done: Callable[[int, int], None] | None = None) -> list:
    """The futures' results in their order, reporting each as it completes."""
    from distributed import as_completed

    index = {fut: n for n, fut in enumerate(futures)}
    out: list[Any] = [None] * len(futures)
    for count, fut in enumerate(as_completed(futures), 1):
        out[index[fut]] = fut.result()
        if done is not None:
            done(count, len(futures))
    return out


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
    cluster; the numbers are those of :func:`coderel.agree.agreement` on the same files (to
    rounding: the partitions' sums are added in partition order, not in one process's blocks)."""
    from coderel.agree.driver import check_settings
    from coderel.engine.partitions import summarise
    from coderel.engine.plans import facts_of
    from coderel.engine.reading import dataset_groups, partition_tasks
    from coderel.engine.shuffle import summarise_bucket

    check_settings(replicates, seed, ci_level, interval_method)
    files, groups = dataset_groups(client, paths)
    cb = client.scatter(codebook, broadcast=True)
    summaries = partition_tasks(client, cb, files, groups, summarise, summarise_bucket).tasks
    facts = _in_order([client.submit(facts_of, s, pure=False) for s in summaries], reading)
    problems = Problems()
    for f in facts:
        problems.extend(f.problems)
    single = sum(f.single_coded_units for f in facts)
    labels = sum(f.labels for f in facts)
    n_partitions = len(summaries)
    result = _agreement(
        client,
        codebook,
        summaries,
        facts,
        replicates=replicates,
        seed=seed,
        ci_level=ci_level,
        interval_method=interval_method,
        icc_ordinal=icc_ordinal,
        memory=memory,
        progress=progress,
    )
    return ClusterRun(result, problems, single, len(files), n_partitions, labels)


def _agreement(
    client: Client,
    cb: Codebook,
    summaries: list,
    facts: list,
    *,
    replicates: int,
    seed: int,
    ci_level: float,
    interval_method: str,
    icc_ordinal: bool,
    memory: int,
    progress: Callable[[int, int], None] | None,
) -> AgreementResult:
    import pandas as pd

    from coderel.agree.driver import agreement_row, result_of
    from coderel.agree.matrices import targets_of
    from coderel.engine.assemble import project_index, project_scale
    from coderel.engine.plans import (
        RowLayout,
        add_in_order,
        blas_threads,
        part_jackknife,
        part_sums,
        part_targets,
        project_facts,
        row_of,
        target_facts,
    )
    from coderel.stats.bootstrap import Evaluated
    from coderel.stats.intervals import JackknifeSums
    from coderel.stats.plan import build_plan

    units, coders = project_index(facts)
    coder_pos = {c: i for i, c in enumerate(coders)}
    index = pd.Index(units)
    positions = [index.get_indexer(f.units) for f in facts]
    part_coders = [np.array([coder_pos[c] for c in f.coders], dtype=np.int64) for f in facts]
    # The rows (variables, applicabilities) with the project's scales; their matrices come later.
    scales, maps, empty = {}, {}, {}
    for var in cb.variables:
        scales[var.name], maps[var.name] = project_scale(var, [f.scales[var.name] for f in facts])
        xa = np.zeros((0, len(coders))) if var.applies_when is not None else None
        empty[var.name] = (np.zeros((0, len(coders)), dtype=np.int64), scales[var.name], xa)
    meta = targets_of(cb, coders, empty)
    # Each row's own coders: those who gave it a value in some partition (Target.own).
    own: list[np.ndarray] = []
    for t in meta:
        coded = np.zeros(len(coders), dtype=bool)
        for f, pc in zip(facts, part_coders, strict=True):
            x_coded, a_coded = f.coded[t.var.name]
            coded[pc[x_coded if t.kind == "variable" else a_coded]] = True
        own.append(np.flatnonzero(coded))
    layouts = []
    for p, pc in enumerate(part_coders):
        lay = []
        for t, keep in zip(meta, own, strict=True):
            column = np.full(len(coders), -1, dtype=np.int64)
            column[keep] = np.arange(len(keep))
            applic = t.kind != "variable"
            domain_map = None if applic else maps[t.var.name][p]
            lay.append(RowLayout(t.var.name, applic, domain_map, column[pc], len(keep)))
        layouts.append(lay)
    parts = [
        client.submit(part_targets, s, lay, pure=False)
        for s, lay in zip(summaries, layouts, strict=True)
    ]
    del summaries[:]  # each partition's summary is dropped on its worker once its rows are made
    n_parts = len(parts)
    specs = [(t.scale, icc_ordinal) for t in meta]
    specs_f = client.scatter(specs, broadcast=True)
    # 1. what every plan needs of all units
    row_facts = client.gather(
        add_in_order(client, [client.submit(target_facts, p, specs_f, pure=False) for p in parts])
    )
    plan_facts = [project_facts(f, len(units)) for f in row_facts]
    facts_f = client.scatter(plan_facts, broadcast=True)
    templates = [
        build_plan(np.full((0, len(k)), -1), t.scale, icc_ordinal=icc_ordinal, facts=f)
        for t, k, f in zip(meta, own, plan_facts, strict=True)
    ]
    steps = 2 * n_parts + len(meta)
    # 2. column sums and bootstrap sums, added in partition order
    threads = blas_threads()
    part_futures = [
        client.submit(part_sums, p, specs_f, facts_f, replicates, seed, memory, threads, pure=False)
        for p in parts
    ]
    total_future = add_in_order(client, part_futures)
    _wait(part_futures, lambda d, _: report(progress, d, steps, "resampling units"))
    del part_futures
    sums = total_future.result()
    del total_future
    points = [
        {name: float(f(total[None, :])[0]) for name, f in plan.formulas.items()}
        for plan, total in zip(templates, sums.totals, strict=True)
    ]
    # 3. the jackknife (BCa only), reduced on the workers to what the acceleration needs
    jack: list[dict[str, Any]] = [
        {name: np.empty(0) for name in plan.formulas} for plan in templates
    ]
    if replicates and interval_method == "bca":
        centres = [{n: (v if np.isfinite(v) else 0.0) for n, v in p.items()} for p in points]
        totals_f = client.scatter(sums.totals, broadcast=True)
        centres_f = client.scatter(centres, broadcast=True)
        jack_parts = _in_order(
            [
                client.submit(
                    part_jackknife, p, specs_f, facts_f, totals_f, centres_f, memory, pure=False
                )
                for p in parts
            ],
            lambda d, _: report(progress, n_parts + d, steps, "resampling units"),
        )
        jack = [
            {name: JackknifeSums(0, 0.0, 0.0, 0.0) for name in plan.formulas} for plan in templates
        ]
        for part in jack_parts:  # partition order
            for row, values in zip(jack, part, strict=True):
                for name, value in values.items():
                    row[name] = row[name] + value
    # 4. each row from its sums, with its matrix over all units (one row at a time)
    rows = []
    for i, (t, keep) in enumerate(zip(meta, own, strict=True)):
        plan = templates[i]
        evaluated = {
            name: Evaluated(
                points[i][name],
                np.asarray(f(sums.replicates[i]), float) if replicates else np.empty(0),
                jack[i][name],
            )
            for name, f in plan.formulas.items()
        }
        x = np.full((len(units), len(keep)), -1, dtype=np.int64)
        pieces = client.gather([client.submit(row_of, p, i, pure=False) for p in parts])
        for rows_of_part, xp in zip(positions, pieces, strict=True):
            x[rows_of_part] = xp
        del pieces
        target = replace(t, x=x, coders=tuple(coders[j] for j in keep))
        rows.append(agreement_row(target, evaluated, ci_level, interval_method, icc_ordinal, units))
        del x, target
        report(progress, 2 * n_parts + len(rows), steps, "intervals per variable")
    return result_of(cb, rows, coders, replicates, seed, interval_method, ci_level, "poisson")
