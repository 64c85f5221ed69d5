"""Drawing the reliability subsample: simple random or stratified with proportional allocation.

The draw depends only on the seed and the SET of unit IDs (with their strata): IDs are sorted
before drawing, so neither the row order nor a re-saved file changes the sample.

* Simple random sampling without replacement: ``n`` of the ``N`` sorted IDs, chosen by
  ``numpy.random.Generator(PCG64(seed)).choice(N, n, replace=False)``.
* Stratified sampling with proportional allocation (Cochran, W. G. 1977, *Sampling Techniques*,
  3rd ed., Wiley, section 5.5): stratum h of size N_h gets n N_h / N units. The exact shares are
  rounded by the largest-remainder method: every stratum gets the whole part of its share, and the
  units left over go to the strata with the largest remainders (ties: strata in sorted order), so
  every stratum's count is within one unit of its exact share and the counts add up to n. With a
  minimum per stratum, strata whose share falls below it get the minimum and the rest of the
  sample is allocated proportionally over the other strata (repeated until no share falls below).
  Within each stratum (strata in sorted order, one generator for all) a simple random sample is
  drawn from the stratum's sorted IDs.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from coderel.errors import UsageError
from coderel.io.atomic import refuse_overwriting_inputs, write_text
from coderel.protocol.manifest import digest_lines, manifest_text, parse_seed, unit_list_text
from coderel.protocol.population import read_units

SIMPLE = "simple random sampling without replacement"
STRATIFIED = "stratified random sampling, proportional allocation (largest remainder)"


def proportional_allocation(sizes: Sequence[int], n: int, minimum: int = 0) -> list[int]:
    """Counts per stratum for a sample of ``n`` from strata of ``sizes`` (Cochran 1977, 5.5).

    Largest-remainder rounding of n N_h / N: each count is within one unit of its exact share and
    the counts sum to ``n``; remainders are compared exactly (integer arithmetic), ties go to the
    earlier stratum. With ``minimum`` > 0 every stratum gets at least ``minimum`` units.

    >>> proportional_allocation([50, 30, 20], 10)
    [5, 3, 2]
    >>> proportional_allocation([5, 5, 5], 10)
    [4, 3, 3]

    Raises
    ------
    UsageError
        ``n`` larger than the population, or a minimum the strata or ``n`` cannot meet.
    """
    sizes = [int(s) for s in sizes]
    total = sum(sizes)
    if n < 0 or n > total:
        raise UsageError(f"cannot draw {n} units from {total}")
    small = [i for i, s in enumerate(sizes) if s < minimum]
    if small:
        raise UsageError(
            f"stratum {small[0] + 1} holds {sizes[small[0]]} units, fewer than {minimum}"
        )
    if minimum * len(sizes) > n:
        raise UsageError(
            f"a minimum of {minimum} in each of {len(sizes)} strata needs {minimum * len(sizes)} "
            f"units, more than the {n} to draw"
        )
    fixed: dict[int, int] = {}
    while True:
        free = [i for i in range(len(sizes)) if i not in fixed]
        n_free = n - sum(fixed.values())
        n_pop = sum(sizes[i] for i in free)
        counts = _largest_remainder([sizes[i] for i in free], n_free, n_pop)
        below = [i for i, c in zip(free, counts, strict=True) if c < minimum]
        if not below:
            out = [0] * len(sizes)
            for i, c in fixed.items():
                out[i] = c
            for i, c in zip(free, counts, strict=True):
                out[i] = c
            return out
        for i in below:
            fixed[i] = minimum


def _largest_remainder(sizes: list[int], n: int, total: int) -> list[int]:
    if total == 0:
        return [0] * len(sizes)
    whole = [n * s // total for s in sizes]
    rest = [n * s % total for s in sizes]
    left = n - sum(whole)
    order = sorted(range(len(sizes)), key=lambda i: (-rest[i], i))
    for i in order[:left]:
        whole[i] += 1
    return whole


@dataclass(frozen=True)
class Stratum:
    """One stratum: its values, population size, exact proportional share and count drawn."""

    values: tuple[str, ...]
    population: int
    exact_share: float
    drawn: int


@dataclass(frozen=True)
class Draw:
    """The drawn units (sorted) and how they were drawn."""

    units: tuple[str, ...]
    method: str
    seed: int
    size: int
    population: int
    strata_columns: tuple[str, ...] = ()
    strata: tuple[Stratum, ...] = ()
    min_per_stratum: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "seed": self.seed,
            "size": self.size,
            "population_units": self.population,
            "strata_columns": list(self.strata_columns),
            "min_per_stratum": self.min_per_stratum,
            "strata": [
                {
                    "stratum": dict(zip(self.strata_columns, s.values, strict=True)),
                    "population": s.population,
                    "exact_share": s.exact_share,
                    "drawn": s.drawn,
                }
                for s in self.strata
            ],
        }

    def to_frame(self) -> pd.DataFrame:
        """One row per stratum (one row for the whole population without strata)."""
        if not self.strata:
            return pd.DataFrame(
                [{"stratum": "(all)", "population": self.population, "drawn": self.size}]
            )
        rows = [
            {
                **dict(zip(self.strata_columns, s.values, strict=True)),
                "population": s.population,
                "exact_share": s.exact_share,
                "drawn": s.drawn,
            }
            for s in self.strata
        ]
        return pd.DataFrame(rows)


def check_size(size: Any, population: int, excluded: int = 0) -> int:
    """The sample size as a whole number from 1 to the population; :class:`UsageError` else."""
    if isinstance(size, bool) or not isinstance(size, int | np.integer):
        raise UsageError(f"the sample size must be a whole number, not {size!r}")
    after = f" (after leaving out {excluded} excluded)" if excluded else ""
    if size < 1:
        raise UsageError(f"the sample size must be 1 or more, not {size}")
    if size > population:
        raise UsageError(
            f"the sample size {size:,} is larger than the population of {population:,} units"
            f"{after}; draw at most {population:,}"
        )
    return int(size)


def size_from_share(share: float, population: int) -> int:
    """``ceil(share x N)`` for a share in (0, 1]."""
    if isinstance(share, bool) or not isinstance(share, int | float) or not 0 < share <= 1:
        raise UsageError(f"the share must lie above 0 and at most 1 (e.g. 0.1), not {share!r}")
    return max(1, math.ceil(round(share * population, 9)))


def draw_units(
    ids: Sequence[str],
    size: int,
    seed: int,
    *,
    strata: Sequence[tuple[str, ...]] | None = None,
    strata_columns: Sequence[str] = (),
    min_per_stratum: int = 0,
) -> Draw:
    """Draw ``size`` unit IDs; the result depends only on ``seed`` and the set of (ID, stratum).

    Parameters
    ----------
    ids
        Unit IDs, unique (any order).
    size
        Number of units to draw.
    seed
        Seed of ``numpy.random.Generator(PCG64(seed))``.
    strata
        Each ID's stratum values (same order as ``ids``); ``None`` for simple random sampling.
    strata_columns
        Names of the strata values (for the manifest).
    min_per_stratum
        Every stratum gets at least this many units.
    """
    if len(set(ids)) != len(ids):
        raise UsageError("the unit IDs must be unique")
    size = check_size(size, len(ids))
    seed = parse_seed(seed)
    if isinstance(min_per_stratum, bool) or min_per_stratum < 0:
        raise UsageError(f"the minimum per stratum must be 0 or more, not {min_per_stratum!r}")
    rng = np.random.Generator(np.random.PCG64(seed))
    if strata is None:
        if min_per_stratum:
            raise UsageError("a minimum per stratum needs strata (--strata)")
        ordered = sorted(ids)
        picked = rng.choice(len(ordered), size=size, replace=False)
        units = sorted(ordered[i] for i in picked)
        return Draw(tuple(units), SIMPLE, seed, size, len(ids))
    groups: dict[tuple[str, ...], list[str]] = {}
    for unit, key in zip(ids, strata, strict=True):
        groups.setdefault(tuple(key), []).append(unit)
    keys = sorted(groups)
    sizes = [len(groups[k]) for k in keys]
    too_small = [(k, s) for k, s in zip(keys, sizes, strict=True) if s < min_per_stratum]
    if too_small:
        key, s = too_small[0]
        raise UsageError(
            f"the stratum {_name(strata_columns, key)} holds {s} unit(s), fewer than the minimum "
            f"of {min_per_stratum} per stratum ({len(too_small)} stratum/strata too small); "
            "lower --min-per-stratum or merge small strata"
        )
    if min_per_stratum * len(keys) > size:
        raise UsageError(
            f"a minimum of {min_per_stratum} in each of the {len(keys)} strata needs "
            f"{min_per_stratum * len(keys):,} units, more than the {size:,} to draw"
        )
    counts = proportional_allocation(sizes, size, min_per_stratum)
    units: list[str] = []
    out_strata = []
    for key, n_h, count in zip(keys, sizes, counts, strict=True):
        members = sorted(groups[key])
        picked = rng.choice(n_h, size=count, replace=False)
        units.extend(members[i] for i in picked)
        out_strata.append(Stratum(key, n_h, round(size * n_h / len(ids), 6), count))
    return Draw(
        tuple(sorted(units)),
        STRATIFIED,
        seed,
        size,
        len(ids),
        tuple(strata_columns),
        tuple(out_strata),
        min_per_stratum,
    )


def _name(columns: Sequence[str], key: tuple[str, ...]) -> str:
    if not columns:
        return repr(key)
    return ", ".join(f"{c}={v!r}" for c, v in zip(columns, key, strict=True))


# ---- files: population in, unit list and manifest out ----------------------------------------
def manifest_path(units_path: str | os.PathLike[str]) -> Path:
    """The manifest beside a unit list: ``reliability.txt`` -> ``reliability.manifest.json``."""
    p = Path(units_path)
    return p.with_name(f"{p.stem}.manifest.json")


def plan_recommendation(path: str | os.PathLike[str]) -> int:
    """The recommendation of a ``coderel plan --json`` output file."""
    p = Path(path)
    if not p.is_file():
        raise UsageError(f"no plan file {p.name!r}")
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
        value = data["recommendation"]
    except (ValueError, KeyError, TypeError, UnicodeDecodeError):
        raise UsageError(
            f"{p.name} is not the JSON of 'coderel plan --json' (no 'recommendation')"
        ) from None
    if value is None:
        raise UsageError(f"the plan {p.name} has no recommendation (no variable could be planned)")
    return int(value)


@dataclass(frozen=True)
class DrawRun:
    """A finished draw with the files written."""

    draw: Draw
    units_file: Path
    manifest_file: Path
    manifest: dict[str, Any]


def draw_to_files(
    population: str | os.PathLike[str],
    out: str | os.PathLike[str],
    *,
    id_column: str,
    seed: int,
    size: int | None = None,
    share: float | None = None,
    plan: str | os.PathLike[str] | None = None,
    strata_columns: Sequence[str] = (),
    min_per_stratum: int = 0,
    exclude: Sequence[str | os.PathLike[str]] = (),
) -> DrawRun:
    """Read the population, leave out excluded units, draw, and write the unit list + manifest.

    Exactly one of ``size``, ``share`` and ``plan`` gives the sample size. Nothing is written
    when anything is wrong; both files are written atomically.
    """
    seed = parse_seed(seed)
    given = [x is not None for x in (size, share, plan)]
    if sum(given) != 1:
        raise UsageError("give exactly one of --size, --share and --plan")
    out = Path(out)
    manifest_file = manifest_path(out)
    inputs = [Path(population), *map(Path, exclude), *([Path(plan)] if plan else [])]
    refuse_overwriting_inputs([out, manifest_file], inputs)
    pop = read_units(population, id_column, tuple(strata_columns))
    left_out: set[str] = set()
    excluded_files = []
    for path in exclude:
        table = read_units(path, id_column, what="exclusion list")
        left_out.update(table.ids)
        excluded_files.append({"file": table.file, "sha256": table.sha256, "units": len(table.ids)})
    keep = [i for i, u in enumerate(pop.ids) if u not in left_out]
    ids = [pop.ids[i] for i in keep]
    strata = [pop.strata[i] for i in keep] if strata_columns else None
    n_excluded = len(pop.ids) - len(ids)
    if size is not None:
        size_from = "--size"
    elif share is not None:
        size, size_from = size_from_share(share, len(ids)), f"--share {share:g}"
    else:
        size, size_from = plan_recommendation(plan), f"the recommendation of {Path(plan).name}"
    check_size(size, len(ids), n_excluded)
    draw = draw_units(
        ids,
        size,
        seed,
        strata=strata,
        strata_columns=strata_columns,
        min_per_stratum=min_per_stratum,
    )
    text = unit_list_text(list(draw.units))
    body = {
        "command": "draw",
        "population": {
            "file": pop.file,
            "rows": pop.rows,
            "sha256": pop.sha256,
            "id_column": pop.id_column,
            "units": len(pop.ids),
            "id_set_sha256": digest_lines(sorted(pop.ids)),
        },
        "excluded": {
            "files": excluded_files,
            "units_listed": len(left_out),
            "units_left_out": n_excluded,
            "not_in_population": len(left_out) - n_excluded,
        },
        "size_from": size_from,
        **draw.to_dict(),
        "units_file": out.name,
        "units_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(),
    }
    manifest = manifest_text(body)
    write_text(out, text)
    write_text(manifest_file, manifest)
    return DrawRun(draw, out, manifest_file, json.loads(manifest))
