"""`coderel agree` drops the long table of codings before the bootstrap (issue 14, item 3).

On 9 million labels the table (`Codings`: its frame, its problems) takes about half a gigabyte
that the bootstrap never reads: everything that needs it (the units x coders matrices, the
coder diagnostics, the `--collapse` what-if's matrices, the count of single-coded units) is
computed first (`coderel.agree.prepare`), then the command lets go of it. These tests guard that
nothing keeps it alive afterwards (a local variable, a closure, a progress callback, a result
object, the problems list): from inside the progress callback of the resampling phase, weak
references to the table, its frame and its problems must be dead. The oracle is Python's own
reference counting (`weakref`), with no garbage collection forced by the test.
"""

from __future__ import annotations

import contextlib
import weakref
from pathlib import Path

import pytest
from typer.testing import CliRunner

import coderel.cli.cmd_agree as cmd_agree
from coderel.agree.prepare import prepare
from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.codings import Codings
from coderel.io.read import read_codings
from tests.table_refs import alive, recording

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
runner = CliRunner()


@pytest.mark.parametrize(
    "options",
    [[], ["--coders"], ["--collapse", "behaviour=4+5"], ["--pairs", "--coders"]],
    ids=["plain", "coders", "collapse", "pairs-coders"],
)
def test_the_table_is_released_before_resampling(monkeypatch, options):
    refs: dict[str, weakref.ref] = {}
    alive_while_resampling: list[list[str]] = []
    read_project = cmd_agree.read_project

    @contextlib.contextmanager
    def progress_bar(description, *, after=None):
        def callback(done, total, phase=None):
            if phase == "resampling units":
                alive_while_resampling.append(alive(refs))

        yield callback

    monkeypatch.setattr(cmd_agree, "read_project", recording(read_project, refs))
    monkeypatch.setattr(cmd_agree, "delayed_progress", progress_bar)
    args = ["agree", "-c", str(CB), str(SHEETS), "--replicates", "20", "--json", *options]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.output
    assert set(refs) == {"codings", "frame", "problems"}
    # the resampling phase ran (else the check below would hold vacuously)...
    assert alive_while_resampling
    # ...and at each of its steps the table, its frame and its problems were gone
    assert alive_while_resampling == [[]] * len(alive_while_resampling)


def test_prepared_single_coded_units_count_as_the_table_does():
    """Units with rows of one coder only (a blank cell counts as a row, as in
    ``Codings.single_coded_units``): u1 has two coders, u2 one, u3 one (two rows, blank and
    not), u4 two coders of whom one left the cell blank; counted by hand: 2."""
    records = [
        {"unit": "u1", "coder": "ana", "variable": "v", "value": 1},
        {"unit": "u1", "coder": "ben", "variable": "v", "value": 2},
        {"unit": "u2", "coder": "ana", "variable": "v", "value": 1},
        {"unit": "u3", "coder": "ben", "variable": "v", "value": None},
        {"unit": "u3", "coder": "ben", "variable": "w", "value": 1},
        {"unit": "u4", "coder": "ana", "variable": "v", "value": 2},
        {"unit": "u4", "coder": "cy", "variable": "v", "value": None},
    ]
    cb = load_codebook(CB)
    codings = Codings.from_records(cb, records)
    assert codings.single_coded_units() == 2
    assert prepare(codings).single_coded_units == 2
    demo = read_codings(cb, [SHEETS])
    assert prepare(demo).single_coded_units == demo.single_coded_units()
