"""`coderel report` drops the long table of codings before the bootstrap, as `agree` does (issue 14).

On 9 million labels the table (`Codings`: its frame, its problems) takes about half a gigabyte
that the bootstrap never reads: everything the report needs of it (the units x coders matrices,
the coder diagnostics, the completeness counts, the merge with the decisions, stability, the
answer key and rounds) is computed first (`coderel.agree.prepare`, `coderel.report.facts`), then
the command lets go of it. These tests guard that nothing keeps it alive afterwards (a local
variable, a closure, a progress callback, the merge result, the protocol parts): from inside the
progress callback of the resampling phase, weak references to the table, its frame, its problems
and the merged table must be dead. The oracle is Python's own reference counting (`weakref`),
with no garbage collection forced by the test. The report these runs write is compared with one
built from the table kept whole (`build_report` given the codings themselves), so the facts kept
in its place give the same report.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import weakref
from pathlib import Path

import pytest
from typer.testing import CliRunner

import coderel.cli.cmd_report as cmd_report
import coderel.merge as merge_module
from coderel.agree import agreement
from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.codings import Codings
from coderel.io.read import read_codings
from coderel.report import build_report
from coderel.report.facts import table_facts
from tests.table_refs import alive, recording

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
DECISIONS = ROOT / "sample_decisions" / "wildlife_encounters.xlsx"
RETEST = ROOT / "demo" / "retest" / "coder_ana.csv"
runner = CliRunner()


@pytest.mark.parametrize(
    "options",
    [
        [],
        ["--decisions", str(DECISIONS)],
        ["--decisions", str(DECISIONS), "--occasion", f"coder_ana={RETEST}"],
    ],
    ids=["plain", "decisions", "decisions-occasion"],
)
def test_the_table_is_released_before_resampling(monkeypatch, tmp_path, options):
    refs: dict[str, weakref.ref] = {}
    alive_while_resampling: list[list[str]] = []
    read_project = cmd_report.read_project
    merge = merge_module.merge

    def merging(*args, **kwargs):
        merged = merge(*args, **kwargs)
        refs.update(merged=weakref.ref(merged), merged_frame=weakref.ref(merged.frame))
        return merged

    @contextlib.contextmanager
    def progress_bar(description, *, after=None):
        def callback(done, total, phase=None):
            if phase == "resampling units" and description == "agreement per variable":
                alive_while_resampling.append(alive(refs))

        yield callback

    monkeypatch.setattr(cmd_report, "read_project", recording(read_project, refs))
    monkeypatch.setattr(merge_module, "merge", merging)
    monkeypatch.setattr(cmd_report, "delayed_progress", progress_bar)
    out = tmp_path / "report.html"
    args = ["report", "-c", str(CB), str(SHEETS), "--replicates", "20", "-o", str(out), *options]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.output
    expected = {"codings", "frame", "problems"}
    if "--decisions" in options:
        expected |= {"merged", "merged_frame"}
    assert set(refs) == expected
    # the resampling phase ran (else the check below would hold vacuously)...
    assert alive_while_resampling
    # ...and at each of its steps the table, its frame, its problems and the merge were gone
    assert alive_while_resampling == [[]] * len(alive_while_resampling)


def _records() -> list[dict]:
    """Four units, three coders: u1 all three, u2 two, u3 one (a blank cell counts as a row),
    u4 two; a variable outside the codebook is no cell of it. Counted by hand: 4 units, 1 coded
    by every coder, 1 by one coder only; per coder ana 4, ben 3, cy 2; of the 11 rows of the
    codebook's variables, 8 hold a value."""
    return [
        {"unit": "u1", "coder": "ana", "variable": "species", "value": 1},
        {"unit": "u1", "coder": "ben", "variable": "species", "value": 2},
        {"unit": "u1", "coder": "cy", "variable": "species", "value": 1},
        {"unit": "u1", "coder": "ana", "variable": "visitor_group_size", "value": 3.0},
        {"unit": "u1", "coder": "ben", "variable": "visitor_group_size", "value": None},
        {"unit": "u2", "coder": "ana", "variable": "species", "value": 2},
        {"unit": "u2", "coder": "ben", "variable": "species", "value": 2},
        {"unit": "u3", "coder": "ana", "variable": "species", "value": None},
        {"unit": "u4", "coder": "ana", "variable": "species", "value": 4},
        {"unit": "u4", "coder": "cy", "variable": "species", "value": None},
        {"unit": "u4", "coder": "ben", "variable": "not_in_codebook", "value": 1},
        {"unit": "u4", "coder": "ben", "variable": "species", "value": 4},
    ]


def test_table_facts_count_as_by_hand():
    cb = load_codebook(CB)
    codings = Codings.from_records(cb, _records())
    facts = table_facts(codings)
    assert facts.units == ("u1", "u2", "u3", "u4")
    assert facts.coders == ("ana", "ben", "cy")
    assert facts.cells_filled == 8
    assert facts.units_all_coders == 2  # u1, and u4 (ben's row outside the codebook counts)
    assert facts.units_one_coder == 1
    assert facts.units_per_coder == (("ana", 4), ("ben", 3), ("cy", 2))
    assert facts.units_one_coder == codings.single_coded_units()


def test_table_facts_count_as_pandas_groupby_does():
    """The demo's counts against pandas' own grouping of the table (one row per label): distinct
    coders per unit and units per coder (``DataFrame.groupby(...).nunique()``), and the rows of
    the codebook's variables holding a value, or blank with a false condition, counted one by
    one in Python."""
    cb = load_codebook(CB)
    codings = read_codings(cb, [SHEETS])
    frame = codings.frame
    in_cb = frame[frame["variable"].isin([v.name for v in cb.variables])]
    per_unit = frame.groupby("unit", observed=True)["coder"].nunique()
    per_coder = frame.groupby("coder", observed=True)["unit"].nunique()
    facts = table_facts(codings)
    assert facts.cells_filled == sum(v is not None for v in in_cb["value"])
    assert facts.cells_not_applicable == sum(
        v is None and a is False for v, a in zip(in_cb["value"], in_cb["applies"], strict=True)
    )
    assert facts.cells_not_applicable > 0  # the demo's conditional variables count
    assert facts.units_all_coders == int((per_unit == len(codings.coders)).sum())
    assert facts.units_one_coder == int((per_unit == 1).sum())
    assert facts.units_per_coder == tuple((c, int(per_coder[c])) for c in codings.coders)
    # a table restricted to some units keeps every unit as a category: no count of the others
    few = codings.restricted_to(codings.units[:5])
    assert table_facts(few).units_one_coder + table_facts(few).units_all_coders <= 5


def test_the_report_from_the_facts_is_the_report_from_the_table():
    """``build_report`` given the facts (the table dropped) or the table itself: one content."""
    cb = load_codebook(CB)
    codings = read_codings(cb, [SHEETS])
    result = agreement(codings, replicates=0)
    from coderel.adjudicate import read_decisions
    from coderel.merge import merge

    merged = merge(codings, read_decisions(DECISIONS, cb))
    when = dt.datetime(2026, 1, 1, tzinfo=dt.UTC)
    whole = build_report(codings, result, merged, generated=when)
    kept = build_report(table_facts(codings, merged), result, generated=when)
    assert kept == whole
    assert whole.coders.final
    assert whole.adjudication is not None


def test_the_streamed_page_is_the_rendered_page(tmp_path):
    """The HTML file written chart by chart (each drawn where the page places it) holds the same
    bytes as the page rendered whole with every chart drawn first, with and without Markdown (its
    charts are then drawn once for both forms)."""
    from coderel.adjudicate import read_decisions
    from coderel.merge import merge
    from coderel.report import write_report
    from coderel.report.charts import report_charts
    from coderel.report.html import render_html

    cb = load_codebook(CB)
    codings = read_codings(cb, [SHEETS])
    merged = merge(codings, read_decisions(DECISIONS, cb))
    result = agreement(codings, replicates=50)
    when = dt.datetime(2026, 1, 1, tzinfo=dt.UTC)
    content = build_report(codings, result, merged, generated=when)
    whole = render_html(content, report_charts(content)).encode("utf-8")
    assert whole.count(b"<svg") > 10  # heat maps, Bland-Altman plots, the adjudication chart
    alone = write_report(content, tmp_path / "alone.html")
    both = write_report(content, tmp_path / "both.html", ["html", "md"])
    assert alone[0].read_bytes() == whole
    assert both[0].read_bytes() == whole
