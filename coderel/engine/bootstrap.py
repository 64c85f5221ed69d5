"""The bootstrap's weighted sums made on the workers.

The units are cut into the same blocks and runs of blocks as in this process
(:func:`coderel.stats.bootstrap.evaluate_plans`); each task is one run: the plans' contributions
of its units and, for Poisson weights, only the units' 64-bit keys (the worker makes the weights
itself, a pure function of seed, unit ID and replicate). It returns the run's R x M sums, made by
:func:`run_sums`, the function this process uses. The client adds the runs' sums in unit order
and evaluates the formulas and the jackknife as this process does, so the numbers are the same.

The products run with as many BLAS threads as the client's numpy uses (threadpoolctl): OpenBLAS
adds a product's terms in an order that depends on its thread count, so this keeps the sums
identical to the last bit on the same kind of machine. Workers on other processors may round
differently (differences of about 1e-16).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from coderel.stats.bootstrap import (
    DEFAULT_MEMORY,
    RUN_BLOCKS,
    Evaluated,
    MatrixUnitWeights,
    PoissonUnitWeights,
    UnitWeights,
    block_size,
    evaluate_plans,
    jackknife_width,
    poisson_weights,
    run_sums,
)
from coderel.stats.plan import Plan

if TYPE_CHECKING:
    from distributed import Client


def blas_threads() -> int | None:
    """Threads of this process's BLAS (None when threadpoolctl is not installed)."""
    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        return None
    counts = [i["num_threads"] for i in threadpool_info() if i.get("user_api") == "blas"]
    return max(counts) if counts else None


def _run(
    contributions: list[Any],
    weights: tuple[str, np.ndarray, int],
    block: int,
    threads: int | None,
) -> list[np.ndarray]:
    """One run of blocks on a worker: its R x M sums per plan."""
    kind, data, replicates = weights

    def weights_of(start: int, stop: int) -> np.ndarray:
        if kind == "poisson":
            return poisson_weights(data[start:stop], replicates)
        return data[:, start:stop]

    whole = kind == "poisson"
    if threads is None:
        return run_sums(contributions, weights_of, replicates, block, integer_weights=whole)
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=threads, user_api="blas"):
        return run_sums(contributions, weights_of, replicates, block, integer_weights=whole)


def cluster_evaluator(client: Client):
    """An ``evaluate(plans, weights, *, progress, memory)`` like
    :func:`coderel.stats.bootstrap.evaluate_plans` whose sums are made on ``client``'s workers."""

    def evaluate(
        plans: Sequence[Plan],
        weights: UnitWeights | None,
        *,
        progress: Callable[[int, int], None] | None = None,
        memory: int = DEFAULT_MEMORY,
    ) -> list[dict[str, Evaluated]]:
        from distributed import as_completed

        n_units = plans[0].contributions.shape[0] if plans else 0
        width = jackknife_width(plans)
        replicates = weights.replicates if weights is not None else 0
        block = block_size(replicates, width, memory)
        run = block * RUN_BLOCKS
        starts = list(range(0, n_units, run)) if replicates else []
        threads = blas_threads()
        futures = {}
        for start in starts:
            stop = min(start + run, n_units)
            if isinstance(weights, PoissonUnitWeights):
                spec = ("poisson", weights.keys[start:stop], replicates)
            elif isinstance(weights, MatrixUnitWeights):
                spec = ("matrix", weights.matrix[:, start:stop], replicates)
            else:
                raise TypeError(f"no cluster form of {type(weights).__name__}")
            # One plan's share at a time: the client's serialised copy of what it sends is
            # one plan's rows of the run, not every plan's at once.
            payload = [client.scatter(p.contributions[start:stop], hash=False) for p in plans]
            fut = client.submit(_run, payload, spec, block, threads, pure=False)
            futures[fut] = start
        results: dict[int, list[np.ndarray]] = {}
        steps = len(starts) + len(plans)
        for done, fut in enumerate(as_completed(futures), 1):
            results[futures[fut]] = fut.result()
            fut.release()
            if progress is not None:
                progress(done, steps)
        sums = [np.zeros((replicates, p.contributions.shape[1])) for p in plans]
        for start in starts:  # unit order, whatever order the runs finished in
            for i, part in enumerate(results.pop(start)):
                sums[i] += part

        def done_plan(done: int, _total: int) -> None:
            if progress is not None:
                progress(len(starts) + done, steps)

        # The formulas and the jackknife on the client, by the in-process function with the
        # sums already made: the weights of no unit are needed any more.
        return evaluate_plans(
            plans, None, sums=sums if replicates else None, progress=done_plan, memory=memory
        )

    return evaluate
