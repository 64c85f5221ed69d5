"""The bootstrap's weighted sums and jackknife values made on the workers.

The units are cut into the same blocks as :func:`coderel.stats.bootstrap.evaluate_plans` would
use in this process; each task takes a run of consecutive blocks: the plans' contributions of
those units and, for Poisson weights, only the units' 64-bit keys (each worker makes the weights
itself, a pure function of seed, unit ID and replicate). It returns the run's R x M sums (block
products added in block order, by :func:`block_products`) and the leave-one-out values of its
units (:func:`jackknife_rows`). The client adds the runs' sums in unit order and joins the
jackknife values in unit order, then applies the plans' formulas (:func:`evaluated`): the same
functions as in this process, so the same numbers up to the rounding of adding the runs' sums.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from coderel.stats.bootstrap import (
    DEFAULT_MEMORY,
    Evaluated,
    MatrixUnitWeights,
    PoissonUnitWeights,
    UnitWeights,
    block_products,
    block_size,
    contributing_rows,
    evaluated,
    jackknife_rows,
    joined,
    poisson_weights,
)
from coderel.stats.plan import Plan, column_sums

if TYPE_CHECKING:
    from distributed import Client

#: Runs of blocks per worker: more runs balance the load, fewer send fewer R x M sums back.
RUNS_PER_WORKER = 2


def _run(
    formulas: list[dict[str, Callable]],
    contributions: list[Any],
    weights: tuple[str, np.ndarray, int],
    block: int,
    totals: list[np.ndarray],
    jack_rows: list[np.ndarray],
) -> tuple[list[np.ndarray] | None, list[dict[str, np.ndarray]]]:
    """One run of blocks on a worker: summed block products and the jackknife values."""
    kind, data, replicates = weights
    n = contributions[0].shape[0] if contributions else 0
    sums = None
    if replicates:
        sums = [np.zeros((replicates, c.shape[1])) for c in contributions]
        for start in range(0, n, block):
            stop = min(start + block, n)
            if kind == "poisson":
                w = poisson_weights(data[start:stop], replicates)
            else:
                w = data[:, start:stop]
            for i, product in enumerate(block_products([c[start:stop] for c in contributions], w)):
                sums[i] += product
    jack = []
    for f, c, total, rows in zip(formulas, contributions, totals, jack_rows, strict=True):
        jack.append(jackknife_rows(Plan(c, f), total, c[rows]))
    return sums, jack


def cluster_evaluator(client: Client, *, runs_per_worker: int = RUNS_PER_WORKER):
    """An ``evaluate(plans, weights, *, progress, memory)`` like
    :func:`coderel.stats.bootstrap.evaluate_plans`, made on the workers of ``client``."""

    def evaluate(
        plans: Sequence[Plan],
        weights: UnitWeights | None,
        *,
        progress: Callable[[int, int], None] | None = None,
        memory: int = DEFAULT_MEMORY,
    ) -> list[dict[str, Evaluated]]:
        from distributed import as_completed

        n_units = plans[0].contributions.shape[0] if plans else 0
        width = max((p.contributions.shape[1] for p in plans), default=1)
        replicates = weights.replicates if weights is not None else 0
        block = block_size(replicates, width, memory)
        n_blocks = max(1, -(-n_units // block))
        workers = max(1, len(client.scheduler_info().get("workers", {})))
        per_run = -(-n_blocks // min(n_blocks, workers * runs_per_worker)) * block
        totals = [column_sums(p.contributions) for p in plans]
        jack_all = [contributing_rows(p) for p in plans]
        formulas = client.scatter([dict(p.formulas) for p in plans], broadcast=True)
        futures = {}
        starts = list(range(0, n_units, per_run)) if n_units else []
        for start in starts:
            stop = min(start + per_run, n_units)
            if isinstance(weights, PoissonUnitWeights):
                spec = ("poisson", weights.keys[start:stop], replicates)
            elif isinstance(weights, MatrixUnitWeights):
                spec = ("matrix", weights.matrix[:, start:stop], replicates)
            else:
                spec = ("none", np.empty(0), 0)
            rows = [r[(r >= start) & (r < stop)] - start for r in jack_all]
            payload = client.scatter([p.contributions[start:stop] for p in plans])
            fut = client.submit(
                _run, formulas, payload, spec, block, totals, rows, pure=False, priority=-start
            )
            futures[fut] = start
        results: dict[int, Any] = {}
        for done, fut in enumerate(as_completed(futures), 1):
            results[futures[fut]] = fut.result()
            fut.release()
            if progress is not None:
                progress(done, len(starts) + len(plans))
        sums: list[np.ndarray | None] = [None] * len(plans)
        if replicates:
            sums = [np.zeros((replicates, p.contributions.shape[1])) for p in plans]
        parts: list[dict[str, list[np.ndarray]]] = [{k: [] for k in p.formulas} for p in plans]
        for start in starts:  # unit order, whatever order the runs finished in
            run_sums, run_jack = results.pop(start)
            for i in range(len(plans)):
                if run_sums is not None:
                    sums[i] += run_sums[i]  # type: ignore[operator]
                for name, values in run_jack[i].items():
                    parts[i][name].append(values)
        out = []
        for i, plan in enumerate(plans):
            out.append(evaluated(plan, sums[i], joined(parts[i])))
            if progress is not None:
                progress(len(starts) + i + 1, len(starts) + len(plans))
        return out

    return evaluate
