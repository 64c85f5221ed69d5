"""The groups' per-unit summaries joined into the project's units x coders matrices, exactly as
:func:`coderel.agree.matrices.build_targets` builds them from the whole long table: units and
coders in natural order, numeric domains the sorted distinct numbers of all groups, code sets in
their canonical order."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from coderel.agree.matrices import Target, canonical_sets, targets_of
from coderel.codebook import Codebook
from coderel.codings import natural_order
from coderel.engine.partitions import Summary
from coderel.stats.plan import Scale


def project_index(summaries: Sequence[Summary]) -> tuple[list[str], list[str]]:
    """The project's units and coders in natural order (the one unit index of every matrix)."""
    units = natural_order(u for s in summaries for u in s.units)
    coders = natural_order(dict.fromkeys(c for s in summaries for c in s.coders))
    return units, coders


def _scale(var, scales: list[Scale]) -> tuple[Scale, list[np.ndarray]]:
    """The variable's project scale and, per group, the map of its local indices onto it."""
    kind = scales[0].kind if scales else "categorical"
    if kind == "numeric":
        values = np.array(
            sorted({float(v) for s in scales for v in np.asarray(s.values, float)}), dtype=float
        )
        scale = Scale("numeric", var.level, len(values), values=values)
        maps = [np.searchsorted(values, np.asarray(s.values, float)) for s in scales]
        return scale, maps
    if kind == "set":
        sets = canonical_sets((c for s in scales for c in s.sets), var)
        position = {c: i for i, c in enumerate(sets)}
        scale = Scale("set", "nominal", len(sets), sets=sets)
        return scale, [np.array([position[c] for c in s.sets], dtype=np.int64) for s in scales]
    return scales[0], [np.arange(s.size, dtype=np.int64) for s in scales]


def assemble(
    codebook: Codebook, summaries: Sequence[Summary]
) -> tuple[list[Target], list[str], list[str]]:
    """The rows to compute, the units and the coders, from every group's summary."""
    units, coders = project_index(summaries)
    unit_pos = {u: i for i, u in enumerate(units)}
    coder_pos = {c: i for i, c in enumerate(coders)}
    rows = [np.fromiter((unit_pos[u] for u in s.units), np.int64, len(s.units)) for s in summaries]
    cols = [np.array([coder_pos[c] for c in s.coders], dtype=np.int64) for s in summaries]
    shape = (len(units), len(coders))
    matrices: dict[str, tuple[np.ndarray, Scale, np.ndarray | None]] = {}
    for var in codebook.variables:
        parts = [s.matrices[var.name] for s in summaries]
        scale, maps = _scale(var, [p[1] for p in parts])
        x = np.full(shape, -1, dtype=int)
        xa = np.full(shape, -1, dtype=int) if var.applies_when is not None else None
        for (xp, _, ap), r, c, m in zip(parts, rows, cols, maps, strict=True):
            local = np.asarray(xp, dtype=np.int64)
            mapped = np.where(local >= 0, m[np.maximum(local, 0)] if len(m) else -1, -1)
            x[np.ix_(r, c)] = mapped
            if xa is not None and ap is not None:
                xa[np.ix_(r, c)] = ap
        matrices[var.name] = (x, scale, xa)
    return targets_of(codebook, coders, matrices), units, coders
