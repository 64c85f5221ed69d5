"""`coderel merge` keeps per-unit summaries, not the long table (issue 14, item 2).

On 8.5 million labels the merge took 5.4 GB where reading takes 1.5 GB: a Python token per label,
lists of row numbers and every cell's tokens lived at once, and the table of codings stayed alive
while the dataset was written (docs/scale.md). These tests guard the two causes without timing
anything: a variable's summary (`coderel.merge.summary.VariableCells`) holds a few integers per
unit and coder and one token per distinct value, never one per row; and the command lets go of
the table before it writes. The oracle of the second is Python's own reference counting
(`weakref`), as in tests/test_agree_memory.py.
"""

from __future__ import annotations

import weakref
from pathlib import Path

import numpy as np
from typer.testing import CliRunner

import coderel.cli.cmd_merge as cmd_merge
import coderel.merge
from coderel.cli import app
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.codings import Codings
from coderel.merge.summary import row_index, variable_cells
from tests.table_refs import alive, recording

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
DECISIONS = ROOT / "sample_decisions" / "wildlife_encounters.xlsx"
runner = CliRunner()


def test_a_summary_holds_integers_per_unit_and_one_token_per_distinct_value():
    """3,000 units x 3 coders of one variable, values 1 to 3 and a missing code, some rows given
    twice: the summary's tokens are the distinct entries (not applicable, blank, the missing code
    and the three values), and its arrays take at most 64 bytes per unit (4 coders' worth of
    32-bit entries, a 64-bit offset, a kind and a token id: 45 bytes)."""
    var = Variable(
        "trail",
        "nominal",
        categories=(Category(1, "Ridge"), Category(2, "Lake"), Category(3, "Moor")),
        missing=(MissingCode(99, "cannot be coded"),),
    )
    cb = Codebook(title="memory test (invented)", unit="unit", variables=(var,))
    rng = np.random.default_rng(7)
    n_units = 3000
    records = [
        {
            "unit": f"U{u}",
            "coder": coder,
            "variable": "trail",
            "value": None if code == 99 else int(code),
            "missing": 99 if code == 99 else None,
        }
        for u in range(n_units)
        for coder in ("ann", "bob", "cai")
        for code in rng.choice([1, 2, 3, 99], size=1 + (u % 7 == 0))
    ]
    cells = variable_cells(var, row_index(Codings.from_records(cb, records)))
    assert len(cells.tokens) == 2 + 1 + 3
    arrays = (
        cells.same,
        cells.start,
        cells.entry_coder,
        cells.entry_token,
        cells.kind,
        cells.token,
    )
    assert all(isinstance(a, np.ndarray) and a.dtype != object for a in arrays)
    assert sum(a.nbytes for a in arrays) <= 64 * n_units
    assert len(cells.entry_token) == 3 * n_units  # one entry per unit and coder, not per row


def test_the_table_is_released_before_writing(monkeypatch, tmp_path):
    refs: dict[str, weakref.ref] = {}
    alive_while_writing: list[list[str]] = []
    read_project = cmd_merge.read_project
    write_merged = coderel.merge.write_merged

    def writing(*args, **kwargs):
        alive_while_writing.append(alive(refs))
        return write_merged(*args, **kwargs)

    monkeypatch.setattr(cmd_merge, "read_project", recording(read_project, refs))
    monkeypatch.setattr(coderel.merge, "write_merged", writing)
    out = tmp_path / "merged.parquet"
    args = ["merge", "-c", str(CB), str(SHEETS), "--decisions", str(DECISIONS), "-o", str(out)]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.output
    assert out.is_file()
    assert set(refs) == {"codings", "frame", "problems"}
    # the dataset was written (else the check below would hold vacuously)...
    assert len(alive_while_writing) == 1
    # ...and while it was, the table, its frame and its problems were gone
    assert alive_while_writing == [[]]
