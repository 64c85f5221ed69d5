"""Benchmark of crowd-scale data: wall time and peak memory of whole commands on long tables.

Generates, with a seed, long Parquet tables (unit, coder, variable, value) and runs ``coderel
validate``, ``agree`` (2,000 replicates), ``merge`` and ``report`` on each in a fresh process,
printing wall seconds and the process's peak resident memory (from the operating system's own
accounting of the finished child, ``os.wait4``). Run with ``make bench-scale``; pick data sets and
commands with ``--sets a,d --commands validate,agree``. Data sets (issue 14):

a   300k labels: 2,000 units x 3 coders x 50 variables
b   5M labels: 20,000 units x 5 coders x 50 variables
c   9M labels: 100,000 units x 3 coders x 30 variables
d   crowd: 200,000 items x 20 labellers, each item labelled by 3-5 of them, 5 variables (~4M)
r   one ratio variable with 10,000 distinct values at 20,000 units x 3 coders
j   adjudication: 20,000 units x 3 coders x 6 variables (its commands: adjudicate, run twice, the
    second time keeping the decisions of the first list, then merge with that list; the same
    three with the list as csv instead of xlsx)

Categorical variables have 5 categories; each coder reports the unit's true category with
probability 0.8, otherwise a category drawn uniformly; 5% of values are left out. The figures are
measured here, on whatever machine runs this; they are not timed tests.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from coderel.codebook import Category, Codebook, Variable
from coderel.codebook.frictionless import write_codebook_yaml

SETS = {
    "a": {"units": 2_000, "coders": 3, "variables": 50},
    "b": {"units": 20_000, "coders": 5, "variables": 50},
    "c": {"units": 100_000, "coders": 3, "variables": 30},
    "d": {"units": 200_000, "coders": 20, "variables": 5, "per_unit": (3, 5)},
    "r": {"units": 20_000, "coders": 3, "variables": 1, "ratio_values": 10_000},
    "j": {"units": 20_000, "coders": 3, "variables": 6},
}
LEVELS = ("nominal", "ordinal", "nominal", "ordinal", "ratio")
COMMANDS = ("validate", "agree", "merge", "report")
#: Set j times the adjudication round trip instead.
ADJUDICATION = (
    *("adjudicate", "adjudicate-again", "merge-decided"),
    *("adjudicate-csv", "adjudicate-again-csv", "merge-decided-csv"),
)


def _codebook(spec: dict) -> Codebook:
    variables = []
    for j in range(spec["variables"]):
        if "ratio_values" in spec:
            variables.append(Variable(name=f"v{j:02d}", level="ratio"))
            continue
        level = LEVELS[j % len(LEVELS)]
        cats = tuple(Category(i, f"c{i}") for i in range(1, 6)) if level != "ratio" else ()
        variables.append(Variable(name=f"v{j:02d}", level=level, categories=cats))
    return Codebook(title="scale benchmark", unit="unit", variables=tuple(variables))


def generate(name: str, folder: Path, seed: int = 14) -> tuple[Path, Path, int]:
    """Write the data set's codebook and long Parquet table; return their paths and labels."""
    spec = SETS[name]
    rng = np.random.default_rng(seed)
    cb = _codebook(spec)
    folder.mkdir(parents=True, exist_ok=True)
    cb_path = write_codebook_yaml(cb, folder / "codebook.yaml")
    n_units, n_coders = spec["units"], spec["coders"]
    if "per_unit" in spec:
        low, high = spec["per_unit"]
        k = rng.integers(low, high + 1, n_units)
        units = np.repeat(np.arange(n_units), k)
        # k distinct labellers per item: the first k of a random permutation
        keys = rng.random((n_units, n_coders)).argsort(axis=1)
        offsets = np.arange(len(units)) - np.repeat(np.cumsum(k) - k, k)
        coders = keys[units, offsets]
    else:
        units = np.repeat(np.arange(n_units), n_coders)
        coders = np.tile(np.arange(n_coders), n_units)
    tables = []
    for j, var in enumerate(cb.variables):
        if "ratio_values" in spec:
            # distinct values, three decimals; every one is some unit's true value
            pool = np.unique(np.round(rng.lognormal(3, 1, 3 * spec["ratio_values"]), 3))
            domain = rng.choice(pool, spec["ratio_values"], replace=False)
            truth = rng.permutation(np.resize(np.arange(len(domain)), n_units))
            noise = rng.random(len(units)) < 0.2
            idx = np.where(noise, rng.integers(0, len(domain), len(units)), truth[units])
            values = pa.array(domain[idx])
        else:
            truth = rng.integers(1, 6, n_units)
            noise = rng.random(len(units)) < 0.2
            values = pa.array(np.where(noise, rng.integers(1, 6, len(units)), truth[units]))
        keep = rng.random(len(units)) >= 0.05
        tables.append(
            pa.table(
                {
                    "unit": pa.array(np.char.add("u", units[keep].astype(str))),
                    "coder": pa.array(np.char.add("coder", coders[keep].astype(str))),
                    "variable": pa.array(np.full(int(keep.sum()), var.name)),
                    "value": values.filter(pa.array(keep)),
                }
            )
        )
        del j
    table = pa.concat_tables(tables)
    data = folder / "labels.parquet"
    pq.write_table(table, data)
    return cb_path, data, table.num_rows


def run(args: list[str], out: Path) -> tuple[float, float, int]:
    """Wall seconds, peak RSS (GB) and exit code of one command in a fresh process."""
    start = time.perf_counter()
    with open(out, "wb") as sink:
        proc = subprocess.Popen(args, stdout=sink, stderr=subprocess.STDOUT)
        _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - start
    proc.returncode = os.waitstatus_to_exitcode(status)
    return wall, usage.ru_maxrss / 1024**2, proc.returncode


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sets", default="a,b,c,d,r,j")
    parser.add_argument("--commands", default=",".join(COMMANDS))
    parser.add_argument("--replicates", type=int, default=2000)
    parser.add_argument("--keep", type=Path, default=None, help="folder to keep data in")
    opts = parser.parse_args()
    coderel = [str(Path(sys.executable).with_name("coderel"))]
    root = opts.keep or Path(tempfile.mkdtemp(prefix="coderel-bench-"))
    print(f"{'set':4}{'labels':>12}  {'command':21}{'wall s':>9}{'peak GB':>9}  exit")
    for name in opts.sets.split(","):
        folder = root / name
        started = time.perf_counter()
        cb, data, labels = generate(name, folder)
        made = time.perf_counter() - started
        print(f"{name:4}{labels:>12,}  {'(generate)':21}{made:>9.1f}", flush=True)
        commands = ADJUDICATION if name == "j" else opts.commands.split(",")
        if name == "j":  # the first `adjudicate` makes its list: none left from an earlier run
            for old in ("adjudication.xlsx", "adjudication.csv", "merged.parquet"):
                (folder / old).unlink(missing_ok=True)
            (folder / "merged.parquet.audit.jsonl").unlink(missing_ok=True)
        for command in commands:
            args = [*coderel, command.split("-")[0], "-c", str(cb), str(data)]
            if command in ("agree", "report"):
                args += ["--replicates", str(opts.replicates)]
            if command == "agree":
                args += ["--json"]
            elif command == "merge":
                args += ["-o", str(folder / "merged.parquet")]
            elif command == "report":
                args += ["-o", str(folder / "report.html")]
            adjudication = folder / (
                "adjudication.csv" if "csv" in command else "adjudication.xlsx"
            )
            if command.startswith("adjudicate"):
                args += ["-o", str(adjudication)]
            elif command.startswith("merge-decided"):
                args += ["-o", str(folder / "merged.parquet"), "--decisions", str(adjudication)]
            wall, peak, code = run(args, folder / f"{command}.out")
            row = f"{name:4}{labels:>12,}  {command:21}{wall:>9.1f}{peak:>9.2f}  {code}"
            print(row, flush=True)


if __name__ == "__main__":
    main()
