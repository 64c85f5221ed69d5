"""Benchmark: 50 variables x 2,000 units x 3 coders, 10% missing, 2,000 bootstrap replicates.

Prints, in one run, coderel's time for ``agreement`` (every coefficient, every variable, one
seeded weight matrix) against the obvious approach: calling the ``krippendorff`` package once per
replicate per variable, timed on a sample of replicates and scaled to 2,000 x 50. Also prints
peak memory. Run with ``make bench``.
"""

from __future__ import annotations

import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import krippendorff  # GPL reference, benchmark only
import numpy as np
import pandas as pd

from coderel.agree import agreement
from coderel.codebook import Category, Codebook, Variable
from coderel.codebook.frictionless import write_codebook_yaml
from coderel.codings import Codings

UNITS, CODERS, VARIABLES, REPLICATES, MISSING = 2000, 3, 50, 2000, 0.10
LEVELS = ("nominal", "ordinal", "interval", "ratio")


def make_data(seed: int = 1) -> tuple[Codings, list[np.ndarray], list[str]]:
    rng = np.random.default_rng(seed)
    variables, records, arrays = [], [], []
    for j in range(VARIABLES):
        level = LEVELS[j % 4]
        cats = tuple(Category(i, f"c{i}") for i in range(1, 6)) if level in LEVELS[:2] else ()
        var = Variable(name=f"v{j:02d}", level=level, categories=cats)
        variables.append(var)
        truth = rng.integers(1, 6, UNITS)
        noise = rng.random((CODERS, UNITS)) < 0.2
        values = np.where(noise, rng.integers(1, 6, (CODERS, UNITS)), truth).astype(float)
        values[rng.random((CODERS, UNITS)) < MISSING] = np.nan
        arrays.append(values)
        for c in range(CODERS):
            for u in range(UNITS):
                v = values[c, u]
                val = None if np.isnan(v) else (int(v) if cats else float(v))
                records.append(
                    {"unit": f"u{u}", "coder": f"c{c}", "variable": var.name, "value": val}
                )
    cb = Codebook(title="benchmark", variables=tuple(variables))
    return Codings.from_records(cb, records), arrays, [v.level for v in variables]


def time_cli(codings: Codings) -> float:
    """Seconds for the whole ``coderel agree --json`` command (read, compute, print) on the data
    written as a long table, in a fresh process."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        cb = write_codebook_yaml(codings.codebook, folder / "codebook.yaml")
        data = folder / "codings.csv"
        frame = codings.frame[["unit", "coder", "variable", "value"]].copy()
        frame["value"] = ["" if pd.isna(v) else f"{v:g}" for v in frame["value"]]
        frame.to_csv(data, index=False)
        exe = Path(sys.executable).with_name("coderel")
        t0 = time.perf_counter()
        subprocess.run(
            [
                str(exe),
                "agree",
                "-c",
                str(cb),
                str(data),
                "--json",
                "--replicates",
                str(REPLICATES),
            ],
            check=True,
            stdout=subprocess.DEVNULL,
        )
        return time.perf_counter() - t0


def main() -> None:
    codings, arrays, levels = make_data()
    whole = time_cli(codings)
    t0 = time.perf_counter()
    agreement(codings, replicates=REPLICATES, seed=1)
    ours = time.perf_counter() - t0

    rng = np.random.default_rng(2)
    sample = 20
    t0 = time.perf_counter()
    for values, level in zip(arrays, levels, strict=True):
        for _ in range(sample):
            idx = rng.integers(0, UNITS, UNITS)
            krippendorff.alpha(
                values[:, idx], level_of_measurement=level, value_domain=[1, 2, 3, 4, 5]
            )
    naive = (time.perf_counter() - t0) / (sample * VARIABLES) * REPLICATES * VARIABLES
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"data: {VARIABLES} variables x {UNITS} units x {CODERS} coders, {MISSING:.0%} missing")
    print(f"coderel agreement (all coefficients, {REPLICATES} replicates): {ours:.2f} s")
    print(f"krippendorff package per replicate per variable (alpha only, scaled): {naive:.1f} s")
    print(f"ratio: {naive / ours:.0f}x (target >= 50x)")
    print(
        f"whole 'coderel agree --json' command on the same data as a long csv: {whole:.2f} s "
        f"(target < 10 s: {'met' if whole < 10 else 'NOT met'})"
    )
    print(f"peak memory (max RSS, this process): {peak_mb:.0f} MB")


if __name__ == "__main__":
    main()
