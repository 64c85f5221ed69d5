"""Same data, same answer whatever the order (issue 9, item 4): any order of files, of rows within
files and of coders, and any file format of the same codings, give byte-identical ``agree --json``.

Units are indexed in one natural order of their IDs (``Codings.units``), so the bootstrap's unit
weights never follow the order in which units first appear. The check is the invariance itself:
no outside value is needed.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook import Category, Codebook, Variable
from coderel.codebook.frictionless import write_codebook_yaml
from coderel.codings import natural_key

ROOT = Path(__file__).resolve().parents[1]
DEMO_CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
DEMO = ROOT / "demo" / "sheets"
REPLICATES = "300"

runner = CliRunner()


def _agree_json(codebook: Path, paths: list[Path]) -> str:
    res = runner.invoke(
        app,
        [
            *("agree", "-c", str(codebook), *map(str, paths), "--json", "--pairs"),
            *("--replicates", REPLICATES, "--seed", "7"),
        ],
    )
    assert res.exit_code == 0, res.output
    return res.stdout


def test_natural_key_orders_numbers_by_value():
    ids = ["u10", "u9", "U1", "a-2", "a-10", "u01"]
    assert sorted(ids, key=natural_key) == ["a-2", "a-10", "U1", "u01", "u9", "u10"]


@pytest.mark.parametrize(
    "order", [("coder_ben", "coder_ana", "coder_cai"), ("coder_cai", "coder_ben", "coder_ana")]
)
def test_demo_gives_the_same_json_whatever_the_order_of_its_files(order):
    # The audit's case: the demo's sheets given as ben, ana, cai moved species' interval.
    reference = _agree_json(
        DEMO_CB, [DEMO / f"{c}.xlsx" for c in ("coder_ana", "coder_ben", "coder_cai")]
    )
    assert _agree_json(DEMO_CB, [DEMO / f"{c}.xlsx" for c in order]) == reference


CB = Codebook(
    title="order (invented)",
    unit="unit_id",
    variables=(
        Variable("kind", "nominal", categories=tuple(Category(i, f"k{i}") for i in (1, 2, 3))),
        Variable("grade", "ordinal", categories=tuple(Category(i, f"g{i}") for i in (1, 2, 3, 4))),
        Variable("metres", "ratio", range=(0.0, 1000.0)),
    ),
)
CODERS = ("nia", "olu", "pim")


def _data(seed: int = 3, n_units: int = 30) -> dict[str, pd.DataFrame]:
    """One wide table per coder; each coder skips some units and leaves some cells blank."""
    rng = np.random.default_rng(seed)
    truth = {
        "kind": rng.integers(1, 4, n_units),
        "grade": rng.integers(1, 5, n_units),
        "metres": rng.integers(5, 400, n_units).astype(float),
    }
    out = {}
    for c in CODERS:
        rows = []
        for u in range(n_units):
            if rng.random() < 0.12:
                continue  # this coder skipped the unit
            row = {"unit_id": f"E{u + 1}"}
            for name, values in truth.items():
                v = values[u]
                if rng.random() < 0.25:
                    v = rng.integers(1, 4) if name == "kind" else v
                    v = rng.integers(1, 5) if name == "grade" else v
                    v = v * rng.uniform(0.8, 1.2) if name == "metres" else v
                blank = rng.random() < 0.08
                row[name] = None if blank else (round(float(v), 1) if name == "metres" else int(v))
            rows.append(row)
        out[c] = pd.DataFrame(rows, columns=["unit_id", "kind", "grade", "metres"])
    return out


def _write(frames: dict[str, pd.DataFrame], folder: Path, fmt: str, seed: int | None) -> list[Path]:
    """Each coder's table as ``fmt``, rows shuffled with ``seed`` (None: as generated); the
    files are returned in a shuffled order too."""
    folder.mkdir()
    rng = np.random.default_rng(seed)
    paths = []
    for coder, frame in frames.items():
        if seed is not None:
            frame = frame.iloc[rng.permutation(len(frame))]
        path = folder / f"{coder}.{fmt}"
        if fmt == "csv":
            frame.to_csv(path, index=False)
        elif fmt == "xlsx":
            frame.to_excel(path, index=False, sheet_name=coder)
        else:
            frame.astype({"kind": "Int64", "grade": "Int64"}).to_parquet(path, index=False)
        paths.append(path)
    if seed is not None:
        paths = [paths[i] for i in rng.permutation(len(paths))]
    return paths


def _write_long(frames: dict[str, pd.DataFrame], folder: Path, seed: int) -> list[Path]:
    folder.mkdir()
    long = pd.concat(
        [
            f.melt(id_vars="unit_id", var_name="variable", value_name="value").assign(coder=c)
            for c, f in frames.items()
        ]
    )
    long = long.rename(columns={"unit_id": "unit"})[["unit", "coder", "variable", "value"]]
    long["value"] = [
        "" if pd.isna(v) else (f"{v:g}" if isinstance(v, float) else str(v)) for v in long["value"]
    ]
    long = long.iloc[np.random.default_rng(seed).permutation(len(long))]
    path = folder / "codings.csv"
    long.to_csv(path, index=False)
    return [path]


def test_any_order_of_files_rows_and_coders_and_any_format_gives_the_same_json(tmp_path):
    cb = write_codebook_yaml(CB, tmp_path / "codebook.yaml")
    frames = _data()
    reference = _agree_json(cb, _write(frames, tmp_path / "csv", "csv", None))
    doc = json.loads(reference)
    # Not a degenerate case: every variable has an alpha with an interval.
    assert all(v["krippendorff_alpha"]["ci"] for v in doc["variables"]), reference
    variants = {
        "csv, rows and files shuffled": _write(frames, tmp_path / "csv1", "csv", 1),
        "csv, another shuffle": _write(frames, tmp_path / "csv2", "csv", 2),
        "coders given in reverse order": list(
            reversed(_write(frames, tmp_path / "csv3", "csv", None))
        ),
        "xlsx, shuffled": _write(frames, tmp_path / "xlsx", "xlsx", 3),
        "parquet, shuffled": _write(frames, tmp_path / "parquet", "parquet", 4),
        "one long csv, shuffled": _write_long(frames, tmp_path / "long", 5),
    }
    mixed = tmp_path / "mixed"
    mixed.mkdir()
    for coder, fmt in zip(CODERS, ("parquet", "xlsx", "csv"), strict=True):
        shutil.copy(tmp_path / fmt / f"{coder}.{fmt}", mixed / f"{coder}.{fmt}")
    variants["one coder per format"] = [mixed]
    for name, paths in variants.items():
        assert _agree_json(cb, paths) == reference, name
