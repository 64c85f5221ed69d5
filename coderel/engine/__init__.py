"""Where agreement is computed: ``local`` (this process, the default) or ``dask`` (partition-wise
on a Dask cluster, :mod:`coderel.engine.agree`).

Both engines run the same code on the same numbers: the dask engine reads and summarises groups
of units on the workers (:mod:`coderel.engine.partitions`), joins the per-unit summaries into the
same units x coders matrices (:mod:`coderel.engine.assemble`) and makes the bootstrap's weighted
sums and jackknife values on the workers in the same blocks of units as this process
(:mod:`coderel.engine.bootstrap`). Nothing here imports dask until a cluster is asked for.
"""

from __future__ import annotations

#: The engines a command accepts with ``--engine``.
ENGINES: tuple[str, ...] = ("local", "dask")
