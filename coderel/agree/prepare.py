"""What agreement keeps of the long table: the rows to compute and a few counts, not the table.

:func:`prepare` reads everything :func:`coderel.agree.agreement` (and the coder diagnostics and
the ``--collapse`` what-if) need from :class:`~coderel.codings.Codings` at once: each variable's
units x coders matrix of value indices, the project's units and coders, and how many units one
coder only coded. The result holds no reference to the table, so a caller that drops the table
afterwards runs the bootstrap with the per-unit summaries only: on 9 million labels the table
takes about half a gigabyte, which the bootstrap does not need (docs/scale.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coderel.agree.matrices import Target, UnitIndex, build_index, targets_from_index
from coderel.codebook import Codebook
from coderel.codings import Codings


@dataclass(frozen=True)
class Prepared:
    """Everything agreement needs from the long table, without the table.

    ``targets`` are the rows to compute (:func:`coderel.agree.matrices.build_targets`), over
    ``units`` and ``coders`` in natural order, their matrices stored in the smallest integers
    that hold them (:func:`coderel.agree.matrices.compact`; :meth:`Target.own` gives the 64-bit
    form the statistics take); ``single_coded_units`` counts the units that one coder only coded
    (:meth:`coderel.codings.Codings.single_coded_units`).
    """

    codebook: Codebook
    targets: tuple[Target, ...]
    units: list[str]
    coders: list[str]
    single_coded_units: int


def prepare(codings: Codings) -> Prepared:
    """The rows to compute, units, coders and single-coded units of ``codings``."""
    coders, units = codings.coders, codings.units
    ix = build_index(codings, coders, units)
    targets = targets_from_index(codings.codebook, ix, coders, units, stored=True)
    single = _single_coded_units(ix, len(units), len(coders))
    return Prepared(codings.codebook, tuple(targets), units, coders, single)


def _single_coded_units(ix: UnitIndex, n_units: int, n_coders: int) -> int:
    """Units with rows of exactly one coder (any variable, blank or not), as
    :meth:`coderel.codings.Codings.single_coded_units` counts them, from the index's positions."""
    ok = (ix.unit >= 0) & (ix.coder >= 0)
    unit, coder = ix.unit[ok], ix.coder[ok]
    if n_units * n_coders <= 64_000_000:  # a units x coders grid of flags (64 MB at most)
        seen = np.zeros((n_units, n_coders), dtype=bool)
        seen[unit, coder] = True
        per_unit = seen.sum(axis=1)
    else:
        pairs = np.unique(unit.astype(np.int64) * n_coders + coder)
        per_unit = np.bincount(pairs // n_coders, minlength=n_units)
    return int((per_unit == 1).sum())
