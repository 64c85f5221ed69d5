"""Benchmark of ``agree``, ``merge`` and ``report`` with ``--engine dask`` against the in-process
engine on a partitioned dataset.

Generates, with a seed, a long table on the demo codebook (10 variables of every level, a
multi-select and a conditional variable, 4 coders, ~33 labels per unit; tests/engine_data.py),
or with ``--design c`` on set c's codebook of benchmarks/bench_scale.py (3 coders x 30 nominal,
ordinal and ratio variables, 5% of cells blank, ~85 labels per unit; for 100M labels), written as
Parquet parts partitioned by unit, part by part (memory bounded by one part). Then
runs each command (``agree --json``, ``merge -o merged.parquet``, ``report --json``) in a fresh
process with the default engine and with ``--engine dask --scheduler`` on a local cluster of 2
worker processes (one thread each, 127.0.0.1) started here for that command, and prints wall
seconds, the command's (the client's) peak resident memory, the larger of the workers' peak
resident memory (asked of the workers) and how the engines' outputs compare: the largest
difference between their numbers (every float of the JSON) for agree and report, whether the
dataset files are the same bytes for merge. Run with ``make bench-engine`` (``LABELS=1M,5M``,
``ENGINE_COMMANDS=agree,merge``; ``--skip-local`` for sizes the in-process engine cannot hold).
Figures are measured on whatever machine runs this; not timed tests.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pyarrow.parquet as pq

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from tests.engine_data import CODEBOOK, long_table

LABELS_PER_UNIT = 33  # about, with the generator's 10% uncoded units and 2% blank cells
#: Parts stay under the per-file limit of 2,000,000 cells (docs/limits.md): ~400,000 rows.
UNITS_PER_PART = 12_000


def _size(text: str) -> int:
    text = text.strip().upper()
    scale = {"K": 10**3, "M": 10**6}.get(text[-1], 1)
    return int(float(text.rstrip("KM")) * scale)


#: Units per part of design c (~427,000 rows a part).
C_UNITS_PER_PART = 5_000


def generate_c(labels: int, folder: Path) -> tuple[Path, int]:
    """Design c in parts of ``C_UNITS_PER_PART`` units (each part's numbers drawn as
    benchmarks/bench_scale.py draws set c's, seeded by the part); the codebook is written beside
    the data folder. Return the codebook and the number of labels written."""
    import numpy as np
    import pyarrow as pa

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from bench_scale import SETS, _codebook

    from coderel.codebook.frictionless import write_codebook_yaml

    spec = SETS["c"]
    cb = _codebook(spec)
    folder.mkdir(parents=True, exist_ok=True)
    cb_path = write_codebook_yaml(cb, folder.parent / "codebook.yaml")
    n_coders = spec["coders"]
    per_unit = n_coders * len(cb.variables) * 0.95
    units = max(1, round(labels / per_unit))
    written = 0
    for part, first in enumerate(range(0, units, C_UNITS_PER_PART)):
        n = min(C_UNITS_PER_PART, units - first)
        rng = np.random.default_rng([14, part])
        unit = np.repeat(np.arange(first, first + n), n_coders)
        coder = np.tile(np.arange(n_coders), n)
        tables = []
        for var in cb.variables:
            truth = rng.integers(1, 6, n)
            noise = rng.random(len(unit)) < 0.2
            values = np.where(noise, rng.integers(1, 6, len(unit)), truth[unit - first])
            keep = rng.random(len(unit)) >= 0.05
            tables.append(
                pa.table(
                    {
                        "unit": pa.array(np.char.add("u", unit[keep].astype(str))),
                        "coder": pa.array(np.char.add("coder", coder[keep].astype(str))),
                        "variable": pa.array(np.full(int(keep.sum()), var.name)),
                        "value": pa.array(values[keep]),
                    }
                )
            )
        table = pa.concat_tables(tables)
        pq.write_table(table, folder / f"part-{part:04d}.parquet")
        written += table.num_rows
    return cb_path, written


def generate(labels: int, folder: Path) -> int:
    """Parts of ``UNITS_PER_PART`` units each; return the number of labels written."""
    folder.mkdir(parents=True, exist_ok=True)
    units = max(1, labels // LABELS_PER_UNIT)
    written = 0
    for part, first in enumerate(range(0, units, UNITS_PER_PART)):
        n = min(UNITS_PER_PART, units - first)
        table = long_table(n, seed=1000 + part, first=first)
        pq.write_table(table, folder / f"part-{part:04d}.parquet")
        written += table.num_rows
    return written


#: The environment as it was before a cluster was started here: distributed sets
#: OMP_NUM_THREADS=1 (and the like) in its own process, which a command started from it would
#: inherit (one BLAS thread instead of the machine's).
ENVIRONMENT = dict(os.environ)


def run(args: list[str], out: Path) -> tuple[float, float, int]:
    """Wall seconds, peak RSS (GB) and exit code of one command in a fresh process."""
    start = time.perf_counter()
    with open(out, "wb") as sink:
        proc = subprocess.Popen(args, stdout=sink, stderr=subprocess.DEVNULL, env=ENVIRONMENT)
        _, status, usage = os.wait4(proc.pid, 0)
    return time.perf_counter() - start, usage.ru_maxrss / 1024**2, os.waitstatus_to_exitcode(status)


def _floats(a, b, worst: list[float]) -> None:
    if isinstance(a, dict):
        for k in a:
            _floats(a[k], b[k], worst)
    elif isinstance(a, list):
        for x, y in zip(a, b, strict=True):
            _floats(x, y, worst)
    elif isinstance(a, float) and isinstance(b, float) and a == a:
        worst[0] = max(worst[0], abs(a - b))
    elif a != b:
        worst[0] = float("inf")


def _peak_gb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--labels", default="1M", help="sizes, e.g. 1M,5M")
    parser.add_argument("--replicates", type=int, default=2000)
    parser.add_argument("--skip-local", action="store_true")
    parser.add_argument("--commands", default="agree", help="e.g. agree,merge,report")
    parser.add_argument("--keep", type=Path, default=None, help="folder to keep data in")
    parser.add_argument("--design", choices=("demo", "c"), default="demo")
    opts = parser.parse_args()
    coderel = str(Path(sys.executable).with_name("coderel"))
    root = opts.keep or Path(tempfile.mkdtemp(prefix="coderel-engine-"))
    print(f"{'labels':>12}  {'command':16}{'wall s':>9}{'peak GB':>9}{'worker GB':>11}  exit")
    for size in opts.labels.split(","):
        folder = root / size / "data"
        started = time.perf_counter()
        if opts.design == "c" and opts.keep and (folder.parent / "codebook.yaml").exists():
            codebook = folder.parent / "codebook.yaml"  # kept from an earlier run
            labels = sum(pq.read_metadata(f).num_rows for f in folder.glob("*.parquet"))
        elif opts.design == "c":
            codebook, labels = generate_c(_size(size), folder)
        else:
            codebook, labels = CODEBOOK, generate(_size(size), folder)
        print(f"{labels:>12,}  {'(data)':16}{time.perf_counter() - started:>9.1f}", flush=True)
        for command in opts.commands.split(","):
            _compare_engines(coderel, command, codebook, folder, labels, root / size, opts)


def _command(
    coderel: str, command: str, codebook: Path, folder: Path, out: Path, replicates: int
) -> list[str]:
    args = [coderel, command, "-c", str(codebook), str(folder)]
    if command == "merge":
        return [*args, "-o", str(out)]
    args += ["--replicates", str(replicates), "--json"]
    return [*args, "--date", "2026-12-03"] if command == "report" else args


def _compare_engines(
    coderel: str, command: str, codebook: Path, folder: Path, labels: int, root: Path, opts
):
    from coderel.engine.cluster import connect

    form = ".parquet" if command == "merge" else ".json"
    outputs = {}
    name = f"{command} {{}}"
    if not opts.skip_local:
        out = root / f"{command}-local{form}"
        base = _command(coderel, command, codebook, folder, out, opts.replicates)
        wall, peak, code = run(base, root / f"{command}-local.stdout" if form != ".json" else out)
        outputs["local"] = out
        shown = name.format("local")
        print(f"{labels:>12,}  {shown:16}{wall:>9.1f}{peak:>9.2f}{'':>11}  {code}", flush=True)
    # the engine's own local cluster (2 worker processes on loopback), reached from a fresh process
    with connect(None, workers=2) as client:
        out = root / f"{command}-dask{form}"
        args = _command(coderel, command, codebook, folder, out, opts.replicates)
        args += ["--engine", "dask", "--scheduler", client.scheduler.address]
        wall, peak, code = run(args, root / f"{command}-dask.stdout" if form != ".json" else out)
        outputs["dask"] = out
        most = max(client.run(_peak_gb).values())
        shown = name.format("dask")
        print(f"{labels:>12,}  {shown:16}{wall:>9.1f}{peak:>9.2f}{most:>11.2f}  {code}", flush=True)
    if len(outputs) < 2:
        return
    if form != ".json":
        same = outputs["local"].read_bytes() == outputs["dask"].read_bytes()
        print(f"{labels:>12,}  {command}: dataset files the same bytes: {same}")
        return
    worst = [0.0]
    a, b = (json.loads(p.read_text()) for p in outputs.values())
    _floats(a, b, worst)
    print(f"{labels:>12,}  {command}: largest difference between the engines: {worst[0]:.3g}")


if __name__ == "__main__":
    main()
