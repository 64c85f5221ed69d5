"""``merge`` on a Dask cluster: each partition of units read and settled on a worker by
:func:`coderel.merge.merge`, the in-process function, and the partitions' results joined on the
client into the one result the in-process merge gives.

A partition holds every row of its units (:mod:`coderel.engine.reading`), and settling a cell
needs only the rows of its unit and variable, so a partition's cells are settled exactly as in one
process; the worker also checks the merged row's skip logic (a unit's own variables). A decision
of the adjudication list goes to the partition that holds its unit, without its adjudicator and
note (the workers see codes, never narrative text); decisions for units in no partition, or for
variables the codebook lacks, are answered on the client by the same function on no codings.

Joining restores the in-process order of everything: rows in natural unit order, unresolved cells
by row, adjudicated cells and skip-logic problems by variable then row, decision problems and
stale decisions in the order of the list. Each value column is made again over all rows by
:func:`coderel.merge.value_column`, so its type is the one of the whole dataset (a partition of
whole numbers and one with a fraction give a float column, as in one process). The dataset file
written from the joined result is byte for byte the in-process one.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from coderel.codebook import Codebook
from coderel.problems import Problems

if TYPE_CHECKING:
    import pandas as pd
    from distributed import Client

    from coderel.adjudicate import Decisions
    from coderel.codings import SourceFile
    from coderel.merge import MergeResult

#: Codes of the problems :func:`coderel.merge.merge` adds for a decision of the list.
DECISION_CODES = ("bad-decision", "stale-decision")


@dataclass(frozen=True)
class PartFacts:
    """What the client needs of a partition before settling it (small: no rows)."""

    units: list[str]
    coders: list[str]
    problems: Problems
    sources: tuple[SourceFile, ...]
    labels: int


@dataclass(frozen=True)
class ClusterMerge:
    """The merge computed on the cluster, and what was read."""

    result: MergeResult
    problems: Problems
    files: int
    partitions: int
    labels: int


def part_facts(codings) -> PartFacts:
    """Units, coders, reading problems and provenance of a partition's codings (a task)."""
    return PartFacts(
        list(codings.units),
        list(codings.coders),
        codings.problems,
        tuple(codings.sources),
        len(codings.frame),
    )


def merge_part(codings, decisions, rule: str, tolerance: Mapping[str, float]):
    """The in-process merge of one partition (a task)."""
    from coderel.merge import merge

    return merge(codings, decisions, rule=rule, tolerance=tolerance)  # type: ignore[arg-type]


def _plain_values(series: pd.Series) -> list[Any]:
    """A value column back to the Python values it was made from (None where empty)."""
    import pandas as pd

    out: list[Any] = []
    for v in series.astype(object):
        if v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)):
            out.append(None)
        elif hasattr(v, "item") and not isinstance(v, str):
            out.append(v.item())
        else:
            out.append(v)
    return out


def _without_narrative(decisions: Decisions, keys: Sequence[tuple[str, str]]) -> Decisions:
    """The decisions of ``keys`` as a worker gets them: no adjudicator, no note, no problems."""
    from coderel.adjudicate import Decisions

    return Decisions(
        {k: dataclasses.replace(decisions.decisions[k], adjudicator=None, note=None) for k in keys},
        Problems(),
        decisions.source,
    )


def join_parts(
    codebook: Codebook,
    parts: Sequence[MergeResult],
    orphans: MergeResult,
    orphan_keys: Sequence[tuple[str, str]],
    decisions: Decisions | None,
    coders: Sequence[str],
    sources: Sequence[SourceFile],
) -> MergeResult:
    """The partitions' merges (disjoint units) and the merge of the decisions no partition holds,
    joined into the in-process :func:`coderel.merge.merge` result (see the module docstring)."""
    import pandas as pd

    from coderel.adjudicate import sorted_units
    from coderel.merge import (
        STATUSES,
        MergeResult,
        output_columns,
        status_column,
        value_column,
    )
    from coderel.merge.columns import has_missing_column, missing_codes_column, missing_column

    cb = codebook
    unit_col = cb.unit
    units = sorted_units(u for p in parts for u in p.frame[unit_col])
    position = {u: i for i, u in enumerate(units)}
    var_index = {v.name: i for i, v in enumerate(cb.variables)}
    frames = [p.frame for p in parts if len(p.frame)]
    data: dict[str, Any] = {unit_col: pd.Series(units, dtype=object)}
    if frames:
        joined = pd.concat(frames, ignore_index=True)
        rows = joined[unit_col].map(position).to_numpy()
        joined = joined.iloc[rows.argsort(kind="stable")].reset_index(drop=True)
    for var in cb.variables:
        status = status_column(var.name)
        if not frames:  # no unit at all: the in-process columns of no rows
            data[var.name] = value_column(var, [])
            data[status] = pd.Series([], dtype=object)
            if has_missing_column(var):
                data[missing_column(var.name)] = missing_codes_column(var, [])
            continue
        data[var.name] = value_column(var, _plain_values(joined[var.name]))
        data[status] = pd.Series(list(joined[status].astype(object)), dtype=object)
        if has_missing_column(var):
            data[missing_column(var.name)] = joined[missing_column(var.name)]
    frame = pd.DataFrame(data, columns=output_columns(cb))

    status_counts = {
        var.name: {s: sum(p.status_counts[var.name][s] for p in parts) for s in STATUSES}
        for var in cb.variables
    }
    unresolved = sorted(
        (
            (cell, shown)
            for p in parts
            for cell, shown in zip(
                p.unresolved, p.unresolved_values or [{}] * len(p.unresolved), strict=True
            )
        ),
        key=lambda item: position[item[0][0]],
    )
    full = decisions.decisions if decisions is not None else {}
    adjudicated = sorted(
        (
            dataclasses.replace(
                a,
                adjudicator=full[(a.unit, a.variable)].adjudicator,
                note=full[(a.unit, a.variable)].note,
            )
            for p in parts
            for a in p.adjudicated
        ),
        key=lambda a: (var_index[a.variable], position[a.unit]),
    )
    decision_index = {k: i for i, k in enumerate(full)}
    results = [orphans, *parts]
    # Each decision no partition holds gives one problem (a variable the codebook lacks, or a
    # unit not in the data), in the order of those decisions; a partition's are stale decisions.
    assert len(orphans.problems) == len(orphan_keys)
    decided = [
        (decision_index[key], p) for key, p in zip(orphan_keys, orphans.problems, strict=True)
    ]
    decided += [
        (decision_index[(p.unit, p.variable)], p)
        for r in parts
        for p in r.problems
        if p.code in DECISION_CODES
    ]
    checked = [
        ((var_index.get(p.variable or "", -1), position.get(p.unit or "", -1)), p)
        for r in parts
        for p in r.problems
        if p.code not in DECISION_CODES
    ]
    problems = Problems(decisions.problems if decisions is not None else [])
    problems.extend(p for _, p in sorted(decided, key=lambda item: item[0]))
    problems.extend(p for _, p in sorted(checked, key=lambda item: item[0]))
    stale = sorted(
        (s for r in results for s in r.stale),
        key=lambda s: decision_index.get((s["unit"], s["variable"]), -1),
    )
    return MergeResult(
        frame=frame,
        rule=orphans.rule,
        tolerance=dict(orphans.tolerance),
        stale=tuple(stale),
        codebook=cb,
        coders=tuple(coders),
        status_counts=status_counts,
        unresolved=tuple(cell for cell, _ in unresolved),
        unresolved_values=tuple(shown for _, shown in unresolved),
        adjudicated=tuple(adjudicated),
        problems=problems,
        sources=tuple(sources),
        decisions_source=decisions.source if decisions is not None else None,
    )


def merge_on_cluster(
    client: Client,
    codebook: Codebook,
    paths: Sequence[Path],
    *,
    decisions_path: Path | None = None,
    rule: str = "unanimous",
    tolerance: Mapping[str, float] | None = None,
    reading: Callable[[int, int], None] | None = None,
    settling: Callable[[int, int], None] | None = None,
) -> ClusterMerge:
    """:func:`coderel.merge.merge` of the dataset at ``paths`` (long Parquet tables) with the
    decisions at ``decisions_path``, computed partition by partition on ``client``'s cluster;
    the result is the in-process one."""
    from distributed import as_completed

    from coderel.adjudicate import read_decisions
    from coderel.codings import natural_order
    from coderel.engine.reading import (
        dataset_groups,
        partition_tasks,
        read_bucket,
        read_group,
        source_of,
    )
    from coderel.merge import merge

    files, groups = dataset_groups(client, paths)
    cb_future = client.scatter(codebook, broadcast=True)
    parts = partition_tasks(client, cb_future, files, groups, read_group, read_bucket)
    shuffled = parts.shuffled
    codings = parts.tasks
    n_parts = len(codings)
    tol = dict(tolerance or {})
    # Settling runs before the next partition is read (priority), so that a worker holds the
    # codings of few partitions at a time; with a decisions file they wait on the workers until
    # the decisions are read, which needs every partition's coders.
    facts_futures = [client.submit(part_facts, c, pure=False, priority=1) for c in codings]
    merges = []
    if decisions_path is None:
        merges = [
            client.submit(merge_part, c, None, rule, tol, pure=False, priority=1) for c in codings
        ]
        codings = []
    del parts
    sources_futures = [client.submit(source_of, files[i], pure=False) for i in shuffled]
    index = {f: n for n, f in enumerate(facts_futures)}
    facts: list[PartFacts | None] = [None] * n_parts
    for done, fut in enumerate(as_completed(facts_futures), 1):
        facts[index[fut]] = fut.result()
        fut.release()
        if reading is not None:
            reading(done, n_parts)
    problems = Problems()
    for f in facts:
        problems.extend(f.problems)  # type: ignore[union-attr]
    if problems.refused:  # the command stops; nothing is settled
        return ClusterMerge(merge(_no_codings(codebook)), problems, len(files), n_parts, 0)
    coders = natural_order(c for f in facts for c in f.coders)  # type: ignore[union-attr]
    position = {path: i for i, path in enumerate(files)}
    found = [s for f in facts for s in f.sources]  # type: ignore[union-attr]
    found += client.gather(sources_futures)
    sources = sorted({s.path: s for s in found}.values(), key=lambda s: position.get(s.path, -1))

    decisions = None
    if decisions_path is not None:
        decisions = read_decisions(decisions_path, codebook, coders)
    owner = {u: n for n, f in enumerate(facts) for u in f.units}  # type: ignore[union-attr]
    mine: list[list[tuple[str, str]]] = [[] for _ in range(n_parts)]
    orphan_keys = []
    for key in decisions.decisions if decisions is not None else {}:
        n = owner.get(key[0])
        if n is None or key[1] not in codebook:
            orphan_keys.append(key)
        else:
            mine[n].append(key)
    if decisions is not None:
        merges = [
            client.submit(merge_part, c, _without_narrative(decisions, keys), rule, tol, pure=False)
            for c, keys in zip(codings, mine, strict=True)
        ]
    del codings
    index = {f: n for n, f in enumerate(merges)}
    results: list[MergeResult | None] = [None] * len(merges)
    for done, fut in enumerate(as_completed(merges), 1):
        results[index[fut]] = fut.result()
        fut.release()
        if settling is not None:
            settling(done, len(merges))
    orphans = merge(
        _no_codings(codebook),
        _without_narrative(decisions, orphan_keys) if decisions is not None else None,
        rule=rule,  # type: ignore[arg-type]
        tolerance=tol,
    )
    result = join_parts(codebook, results, orphans, orphan_keys, decisions, coders, sources)  # type: ignore[arg-type]
    labels = sum(f.labels for f in facts)  # type: ignore[union-attr]
    return ClusterMerge(result, problems, len(files), len(merges), labels)


def _no_codings(codebook: Codebook):
    """Codings of no unit (to answer the decisions no partition holds)."""
    import pandas as pd

    from coderel.codings import Codings

    empty = pd.DataFrame(
        {c: pd.Series([], dtype=object) for c in ("unit", "coder", "variable", "value")}
    )
    return Codings.from_records(codebook, empty)
