"""A seeded long table on the demo codebook (every level of measurement, a multi-select variable,
skip logic, missing codes and a few invalid cells), written as a dataset of Parquet files: split
by unit (``by="unit"``), or one file per coder or per variable (every unit in many files); and the
fixtures and comparison the engine tests share: a test module makes them its fixtures with
``pytest.fixture(scope="module", name=...)``, so that each module starts one local cluster."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

CODEBOOK = Path(__file__).resolve().parents[1] / "sample_codebooks" / "wildlife_encounters.yaml"
CODERS = ("ana", "ben", "cai", "dev")
#: Units of the engine tests' dataset: ~40,000 labels, so that the suite stays quick (the 1M case
#: is in benchmarks/bench_engine.py).
UNITS = 1_200


def long_table(n_units: int, seed: int = 14, first: int = 0) -> pa.Table:
    """unit, coder, variable, value (text) for ``n_units`` units (IDs from ``r<first>``) and four
    coders; each coder codes a unit with probability 0.9 and gives the unit's true value with
    probability 0.8."""
    rng = np.random.default_rng(seed)
    n_c = len(CODERS)
    units = np.repeat(np.arange(n_units), n_c)
    coders = np.tile(np.arange(n_c), n_units)
    coded = rng.random(len(units)) < 0.9
    units, coders = units[coded], coders[coded]
    n = len(units)
    columns: dict[str, np.ndarray] = {}

    def categorical(codes: list[str], missing: str | None) -> np.ndarray:
        truth = rng.integers(0, len(codes), n_units)
        noise = rng.random(n) < 0.2
        idx = np.where(noise, rng.integers(0, len(codes), n), truth[units])
        out = np.array(codes, dtype=object)[idx]
        if missing is not None:
            out[rng.random(n) < 0.03] = missing
        return out

    def numeric(low: float, high: float, decimals: int, missing: str) -> np.ndarray:
        truth = rng.uniform(low, high, n_units)
        noisy = np.clip(truth[units] + rng.normal(0, (high - low) / 20, n), low, high)
        out = np.round(noisy, decimals).astype(str).astype(object)
        if decimals == 0:
            out = np.round(noisy).astype(int).astype(str).astype(object)
        out[rng.random(n) < 0.03] = missing
        return out

    columns["species"] = categorical([str(i) for i in range(1, 8)], "99")
    columns["behaviour"] = categorical([str(i) for i in range(1, 6)], "99")
    columns["visitor_distance_m"] = numeric(0, 500, 1, "999")
    columns["severity"] = categorical([str(i) for i in range(4)], "99")
    columns["time_of_day"] = categorical(["dawn", "day", "dusk", "night"], "unknown")
    columns["visitor_group_size"] = numeric(1, 60, 0, "99")
    columns["temperature_c"] = numeric(-20, 40, 1, "99")
    columns["food_present"] = categorical(["1", "2"], None)
    chosen = rng.random((n, 6)) < 0.3
    actions = np.array(
        [";".join(str(j + 1) for j in np.flatnonzero(row)) or "99" for row in chosen]
    )
    columns["actions"] = actions.astype(object)
    spray = categorical(["1", "2", "3"], "99")
    sprayed = chosen[:, 2]
    # a few invalid cells: codes outside the codebook (problems with file and cell)
    bad = rng.random(n) < 0.002
    columns["species"][bad] = "8"
    parts = []
    for name, values in columns.items():
        keep = rng.random(n) >= 0.02  # some cells left blank
        parts.append((name, keep, values))
    parts.append(("spray_worked", sprayed, spray))
    unit_ids = np.char.add("r", (units + first).astype(str))
    coder_ids = np.array(CODERS)[coders]
    tables = [
        pa.table(
            {
                "unit": pa.array(unit_ids[keep]),
                "coder": pa.array(coder_ids[keep]),
                "variable": pa.array(np.full(int(keep.sum()), name)),
                "value": pa.array(values[keep].astype(str)),
            }
        )
        for name, keep, values in parts
    ]
    return pa.concat_tables(tables)


def write_dataset(table: pa.Table, folder: Path, by: str = "unit", parts: int = 6) -> Path:
    """The table as Parquet files in ``folder``: ``parts`` files by a hash of the unit ID, or
    one file per coder or per variable (every unit in many files)."""
    folder.mkdir(parents=True, exist_ok=True)
    if by in ("coder", "variable"):
        column = table.column(by).to_numpy(zero_copy_only=False)
        for c in sorted(set(column)):
            pq.write_table(table.filter(pa.array(column == c)), folder / f"{c}.parquet")
        return folder
    units = table.column("unit").to_numpy(zero_copy_only=False)
    number = np.char.lstrip(units.astype(str), "r").astype(np.int64)
    bucket = (number * 2654435761) % parts
    for p in range(parts):
        pq.write_table(table.filter(pa.array(bucket == p)), folder / f"part-{p:03d}.parquet")
    return folder


def local_cluster():
    """A real ``distributed.LocalCluster``: 2 worker processes (one thread each) on 127.0.0.1."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address="127.0.0.1:0",
    ) as c:
        yield c


def engine_dataset(tmp_path_factory):
    """The seeded table of ``UNITS`` units partitioned by unit (5 parts), one file per coder and
    one per variable."""
    root = tmp_path_factory.mktemp("engine")
    table = long_table(UNITS, seed=21)
    return {
        "unit": write_dataset(table, root / "by_unit", by="unit", parts=5),
        "coder": write_dataset(table, root / "by_coder", by="coder"),
        "variable": write_dataset(table, root / "by_variable", by="variable"),
        "labels": table.num_rows,
    }


def compare(a, b, path="", worst=None):
    """Every float to 1e-12, everything else equal; returns the largest difference."""
    worst = [0.0] if worst is None else worst
    if isinstance(a, dict):
        assert set(a) == set(b), path
        for k in a:
            compare(a[k], b[k], f"{path}/{k}", worst)
    elif isinstance(a, list | tuple):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            compare(x, y, f"{path}[{i}]", worst)
    elif isinstance(a, float) and isinstance(b, float):
        if math.isnan(a):
            assert math.isnan(b), path
        else:
            worst[0] = max(worst[0], abs(a - b))
            assert abs(a - b) <= 1e-12, (path, a, b)
    else:
        assert a == b, (path, a, b)
    return worst[0]
