"""The project's index and domains from the partitions' facts, exactly as
:func:`coderel.agree.matrices.build_targets` makes them from the whole long table: units and
coders in natural order, numeric domains the sorted distinct numbers of all partitions, code sets
in their canonical order."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from coderel.agree.matrices import canonical_sets
from coderel.codings import natural_order
from coderel.stats.plan import Scale


def project_index(summaries: Sequence) -> tuple[list[str], list[str]]:
    """The project's units and coders in natural order (the one unit index of every matrix)."""
    units = natural_order(u for s in summaries for u in s.units)
    coders = natural_order(dict.fromkeys(c for s in summaries for c in s.coders))
    return units, coders


def project_scale(var, scales: list[Scale]) -> tuple[Scale, list[np.ndarray]]:
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
