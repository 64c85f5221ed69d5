"""Each partition's plans built and summed on the worker that holds its units.

The client never holds a per-unit contribution: after reading, each partition's summary stays on
its worker and only small facts travel (unit IDs, coder names, each variable's distinct numbers or
code sets, which coders gave it a value). The client joins them into the project's facts (coders
and domains in the in-process order, :mod:`coderel.engine.assemble`) and sends each partition its
layout, from which the worker makes the partition's units x coders matrices over the project's
domains and own coders (:func:`part_targets`). Four passes over the partitions follow, each task
on the worker where the partition is:

1. :func:`target_facts`: what a plan needs of all units (:class:`coderel.stats.plan.ProjectFacts`:
   Fleiss' m, complete units, coder pairs with units in common, the mean of the numbers); added
   on the client.
2. :func:`part_sums`: the partition's plans (:func:`coderel.stats.plan.build_plan` with the
   project's facts, so that columns and formulas are those of the whole project's plan), their
   column sums and the bootstrap's R x M sums, with the Poisson weights made from the
   partition's own unit IDs (a pure function of seed, unit ID and replicate). The partitions'
   sums are added in partition order, in a binary tree of a fixed shape (on the workers).
3. :func:`part_jackknife`: the BCa jackknife of the partition's units from the project's column
   sums (leave-one-out sums = total - the unit's own), returned as the power sums the
   acceleration needs (:class:`coderel.stats.intervals.JackknifeSums`), added in partition order.
4. Per row, the partitions' matrices of that row only are gathered to make the row's
   descriptive results (pairs, categories, ICC table) by the in-process function; one row's
   matrix at a time.

The plans are built again in pass 3 rather than kept (at 100M labels they would take about 10 GB
on the workers).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from coderel.engine.partitions import Summary, _compact
from coderel.problems import Problems
from coderel.stats.intervals import JackknifeSums
from coderel.stats.numeric_plan import MAX_PAIR_CODERS, NumericFacts, numeric_values
from coderel.stats.plan import ProjectFacts, Scale, build_plan, column_sums


@dataclass(frozen=True)
class PartFacts:
    """What the client learns of one partition after reading: its unit IDs and coders, each
    variable's scale (distinct numbers or code sets of this partition) and which of its coders
    gave the variable (and its applicability) a value."""

    units: list[str]
    coders: list[str]
    scales: dict[str, Scale]
    coded: dict[str, tuple[np.ndarray, np.ndarray | None]]
    problems: Problems
    single_coded_units: int
    labels: int


def facts_of(summary: Summary) -> PartFacts:
    """The small facts of a partition's summary (a task)."""
    coded = {
        name: ((x >= 0).any(axis=0), None if xa is None else (xa >= 0).any(axis=0))
        for name, (x, _, xa) in summary.matrices.items()
    }
    scales = {name: scale for name, (_, scale, _) in summary.matrices.items()}
    return PartFacts(
        summary.units,
        summary.coders,
        scales,
        coded,
        summary.problems,
        summary.single_coded_units,
        summary.labels,
    )


@dataclass(frozen=True)
class RowLayout:
    """How a partition's matrix of one row becomes the row's matrix over the project: the
    variable, whether it is its applicability, the map of the partition's value indices onto
    the project's domain (None for applicability) and each partition coder's column among the
    row's own coders (-1: not one of them)."""

    variable: str
    applicability: bool
    domain_map: np.ndarray | None
    columns: np.ndarray
    width: int


@dataclass(frozen=True)
class PartTargets:
    """A partition's units and one units x own-coders matrix per row (project value indices)."""

    units: list[str]
    xs: list[np.ndarray]


def row_matrix(summary: Summary, lay: RowLayout) -> np.ndarray:
    """The partition's matrix of one row over the project's domain and the row's own coders."""
    x, _, xa = summary.matrices[lay.variable]
    local = np.asarray(xa if lay.applicability else x, dtype=np.int64)
    if lay.domain_map is not None:
        m = lay.domain_map
        local = np.where(local >= 0, m[np.maximum(local, 0)] if len(m) else -1, -1)
    out = np.full((local.shape[0], lay.width), -1, dtype=np.int64)
    keep = lay.columns >= 0
    out[:, lay.columns[keep]] = local[:, keep]
    return out


def part_targets(summary: Summary, layout: Sequence[RowLayout]) -> PartTargets:
    """Every row's matrix of one partition, kept compact on the worker (a task)."""
    return PartTargets(summary.units, [_compact(row_matrix(summary, lay)) for lay in layout])


def row_of(part: PartTargets, i: int) -> np.ndarray:
    """One row's matrix of a partition (a task)."""
    return part.xs[i]


@dataclass(frozen=True)
class RowFacts:
    """Sums over a partition's units of what a plan needs of all units (added over partitions):
    units by their number of values, and for numbers the complete units and the sum of their
    values, units in common per coder pair, and the count and sum of the numbers."""

    per_unit: np.ndarray
    complete: int = 0
    complete_total: float = 0.0
    common: np.ndarray | None = None
    count: int = 0
    total: float = 0.0

    def __add__(self, other: RowFacts) -> RowFacts:
        return RowFacts(
            self.per_unit + other.per_unit,
            self.complete + other.complete,
            self.complete_total + other.complete_total,
            None if self.common is None else self.common + other.common,
            self.count + other.count,
            self.total + other.total,
        )


def numbers_of(spec: tuple[Scale, bool]) -> np.ndarray | None:
    """The numbers a row's value indices stand for when its plan has the ICC and Lin's columns
    (numeric scale, or ordinal categories with ``icc_ordinal``: positions 1, 2, ...)."""
    scale, icc_ordinal = spec
    if scale.kind == "numeric":
        return np.asarray(scale.values, dtype=float)
    if scale.kind == "categorical" and icc_ordinal and scale.ordinal:
        return np.arange(1.0, scale.size + 1.0)
    return None


def target_facts(part: PartTargets, specs: Sequence[tuple[Scale, bool]]) -> list[RowFacts]:
    """Each row's :class:`RowFacts` over the partition's units (a task)."""
    from coderel.stats.icc import complete_rows

    out = []
    for x, spec in zip(part.xs, specs, strict=True):
        per_unit = np.bincount((x >= 0).sum(axis=1), minlength=x.shape[1] + 1)
        values = numbers_of(spec)
        if values is None:
            out.append(RowFacts(per_unit))
            continue
        numbers = numeric_values(x, values, keep_all=True)
        ok = np.isfinite(numbers)
        okn = ok.astype(np.int64)
        finite = numbers[ok]
        complete = complete_rows(numbers)
        out.append(
            RowFacts(
                per_unit,
                int(complete.sum()),
                float(numbers[complete].sum()),
                okn.T @ okn,
                int(finite.size),
                float(finite.sum()),
            )
        )
    return out


def project_facts(facts: RowFacts, n_units: int) -> ProjectFacts:
    """The project's facts of one row from its :class:`RowFacts` added over all partitions, as
    :func:`coderel.stats.counts.fleiss_units` and :func:`coderel.stats.numeric_plan.add_numeric`
    find them over all units."""
    from itertools import combinations

    sizes = np.arange(len(facts.per_unit))
    rated = (sizes >= 2) & (facts.per_unit > 0)
    m = 0
    if rated.any():
        freq = facts.per_unit[rated]
        m = int(sizes[rated][freq == freq.max()].max())
    numeric = None
    if facts.common is not None:
        k = facts.common.shape[0]
        pairs: tuple[tuple[int, int], ...] = ()
        if 2 <= k <= MAX_PAIR_CODERS:
            pairs = tuple((i, j) for i, j in combinations(range(k), 2) if facts.common[i, j] >= 2)
        centre = facts.total / facts.count if facts.count else 0.0
        cells = facts.complete * k
        complete_centre = facts.complete_total / cells if cells else 0.0
        numeric = NumericFacts(facts.complete, complete_centre, pairs, centre)
    return ProjectFacts(n_units, m, numeric)


def _plans(part: PartTargets, specs, facts: Sequence[ProjectFacts]):
    for x, (scale, icc_ordinal), f in zip(part.xs, specs, facts, strict=True):
        yield build_plan(np.asarray(x, dtype=np.int64), scale, icc_ordinal=icc_ordinal, facts=f)


def blas_threads() -> int | None:
    """Threads of this process's BLAS (None when threadpoolctl is not installed): the workers'
    products use as many, so that OpenBLAS adds a product's terms in the same order."""
    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        return None
    counts = [i["num_threads"] for i in threadpool_info() if i.get("user_api") == "blas"]
    return max(counts) if counts else None


def _limited(threads: int | None):
    """BLAS limited to ``threads`` threads (the client's count), or no limit."""
    from contextlib import nullcontext

    if threads is None:
        return nullcontext()
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=threads, user_api="blas")


@dataclass(frozen=True)
class Sums:
    """Column sums (point estimates) and R x M bootstrap sums of every row's plan."""

    totals: list[np.ndarray]
    replicates: list[np.ndarray]

    def __add__(self, other: Sums) -> Sums:
        return Sums(
            [a + b for a, b in zip(self.totals, other.totals, strict=True)],
            [a + b for a, b in zip(self.replicates, other.replicates, strict=True)],
        )


def part_sums(
    part: PartTargets,
    specs: Sequence[tuple[Scale, bool]],
    facts: Sequence[ProjectFacts],
    replicates: int,
    seed: int,
    memory: int,
    threads: int | None,
) -> Sums:
    """A partition's plans, their column sums and bootstrap sums (a task): the weights of its
    units are made here from their IDs, block by block (:func:`run_sums`)."""
    from coderel.stats.bootstrap import (
        block_size,
        jackknife_width,
        poisson_weights,
        run_sums,
        unit_keys,
    )

    plans = list(_plans(part, specs, facts))
    totals = [column_sums(p.contributions) for p in plans]
    if not replicates:
        return Sums(totals, [np.zeros((0, len(t))) for t in totals])
    keys = unit_keys(part.units, seed)
    block = block_size(replicates, jackknife_width(plans), memory)
    with _limited(threads):
        sums = run_sums(
            [p.contributions for p in plans],
            lambda a, b: poisson_weights(keys[a:b], replicates),
            replicates,
            block,
            integer_weights=True,
        )
    return Sums(totals, sums)


def part_jackknife(
    part: PartTargets,
    specs: Sequence[tuple[Scale, bool]],
    facts: Sequence[ProjectFacts],
    totals: Sequence[np.ndarray],
    centres: Sequence[dict[str, float]],
    memory: int,
) -> list[dict[str, JackknifeSums]]:
    """The jackknife of a partition's units (a task): each formula's leave-one-out values
    (:func:`coderel.stats.bootstrap.jackknife_rows`, from the project's column sums) reduced to
    :class:`JackknifeSums` around ``centres`` (the estimates)."""
    from coderel.stats.bootstrap import block_size, contributing_rows, jackknife_rows

    out = []
    for plan, total, centre in zip(_plans(part, specs, facts), totals, centres, strict=True):
        block = block_size(0, plan.contributions.shape[1], memory)
        prepared = {name: make(total) for name, make in plan.leave_one_out.items()}
        rows = contributing_rows(plan)
        sums = {name: JackknifeSums(0, 0.0, 0.0, 0.0) for name in plan.formulas}
        for start in range(0, len(rows), block):
            own = plan.contributions[rows[start : start + block]]
            values = jackknife_rows(plan, total, own, prepared)
            for name in plan.formulas:
                sums[name] = sums[name] + JackknifeSums.of(values[name], centre[name])
        out.append(sums)
    return out


def add_in_order(client: Any, futures: list) -> Any:
    """The sum of the futures' results, added pairwise in a binary tree of a fixed shape (on the
    workers): the same order of additions whatever order the tasks finish in. The additions go
    before any other task (priority), so that a worker holds a few partitions' sums at a time,
    not every partition's."""
    level = list(futures)
    while len(level) > 1:
        nxt = [
            client.submit(_add, level[i], level[i + 1], pure=False, priority=1)
            for i in range(0, len(level) - 1, 2)
        ]
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
    return level[0]


def _add(a: Any, b: Any) -> Any:
    """``a + b``, element by element for lists."""
    if isinstance(a, list):
        return [x + y for x, y in zip(a, b, strict=True)]
    return a + b
