"""Codebook revisions: `codebook diff`, the recode block applied to sheets made from an earlier
version, renamed_from, thresholds.training, and their bad-input messages.

Oracle: the demo's two codebook versions (sample_codebooks/) and hand-filled templates; the
expected values are counted by hand from the cells written here.
"""

import json
import textwrap
from pathlib import Path

import openpyxl
import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.codebook.revisions import diff_codebooks
from coderel.errors import CodebookError
from coderel.io.versions import read_versioned, sheet_version
from coderel.template import write_templates

ROOT = Path(__file__).resolve().parents[1]
V10 = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
V11 = ROOT / "sample_codebooks" / "wildlife_encounters_v1.1.yaml"
runner = CliRunner()


def test_diff_of_the_demo_versions():
    diff = diff_codebooks(load_codebook(V10), load_codebook(V11))
    assert (diff.old_version, diff.new_version) == ("1.0", "1.1")
    assert diff.added == diff.removed == diff.renamed == ()
    (behaviour,) = diff.changed
    assert behaviour.variable == "behaviour"
    assert behaviour.categories_merged == (
        "5 = Contact or attack -> 4 = Approach, charge or contact",
    )
    assert behaviour.categories_relabelled == (
        "4: 'Approach or bluff charge' -> 'Approach, charge or contact'",
    )
    assert diff.recode_from_old
    assert "training 0.700" in diff.thresholds[0]
    result = runner.invoke(app, ["codebook", "diff", str(V10), str(V11), "--json"])
    assert result.exit_code == 0
    assert json.loads(result.stdout)["changed"][0]["variable"] == "behaviour"


def _codebook(tmp_path: Path, body: str, name: str = "cb.yaml") -> Path:
    path = tmp_path / name
    path.write_text(textwrap.dedent(body), encoding="utf-8")
    return path


BASE = """\
title: Revisions test (invented)
version: "{version}"
unit: unit
variables:
  - name: kind
    level: nominal
    {renamed}categories: [{{code: 1, label: One}}, {{code: 2, label: Two}}{three}]
  - name: size
    level: ratio
"""


def _cb(tmp_path, version="1.0", three=True, renamed="", extra="", name="cb.yaml"):
    body = BASE.format(
        version=version, three=", {code: 3, label: Three}" if three else "", renamed=renamed
    )
    return _codebook(tmp_path, body + extra, name)


def test_renames_added_removed_and_threshold_in_diff(tmp_path):
    old = _cb(tmp_path, name="old.yaml")
    new = _codebook(
        tmp_path,
        """\
        title: Revisions test (invented)
        version: "2.0"
        unit: unit
        thresholds: {reliable: 0.85}
        variables:
          - name: category
            renamed_from: kind
            level: ordinal
            categories: [{code: 1, label: One}, {code: 2, label: Second}]
          - name: weight
            level: ratio
        """,
        "new.yaml",
    )
    diff = diff_codebooks(load_codebook(old), load_codebook(new))
    assert diff.renamed == (("kind", "category"),)
    assert diff.added == ("weight",)
    assert diff.removed == ("size",)
    (change,) = diff.changed
    assert change.changes == ("level nominal -> ordinal",)
    assert change.categories_removed == ("3 = Three",)
    assert change.categories_relabelled == ("2: 'Two' -> 'Second'",)
    assert any("no recode block" in n for n in diff.notes)


def test_recode_onto_a_missing_code_is_a_located_error(tmp_path):
    path = _cb(
        tmp_path,
        version="1.1",
        three=False,
        extra='recode:\n  - from_version: "1.0"\n    variables:\n      kind: {3: 7}\n',
    )
    with pytest.raises(CodebookError) as err:
        load_codebook(path)
    (problem,) = err.value.problems
    assert problem.code == "recode-unknown-code"
    assert problem.line == 13
    assert problem.variable == "kind"
    result = runner.invoke(app, ["codebook", "check", str(path)])
    assert result.exit_code == 1
    assert "recode-unknown-code" in result.output


def test_rename_cycle_is_a_located_error(tmp_path):
    path = _codebook(
        tmp_path,
        """\
        title: t
        variables:
          - name: a
            renamed_from: b
            level: ratio
          - name: b
            renamed_from: a
            level: ratio
        """,
    )
    with pytest.raises(CodebookError) as err:
        load_codebook(path)
    codes = [p.code for p in err.value.problems]
    assert codes == ["rename-cycle"]
    assert err.value.problems[0].line == 4


def test_training_threshold_is_read():
    assert load_codebook(V11).thresholds.training == pytest.approx(0.7)
    assert load_codebook(V11).thresholds.training_threshold == pytest.approx(0.7)
    assert load_codebook(V10).thresholds.training is None
    assert load_codebook(V10).thresholds.training_threshold == pytest.approx(0.8)


def _filled_templates(tmp_path: Path, cb_path: Path, values: dict[str, list[int]]) -> Path:
    out = tmp_path / "sheets"
    write_templates(load_codebook(cb_path), list(values), out, ["u1", "u2", "u3", "u4"])
    for coder, kinds in values.items():
        path = out / f"{coder}.xlsx"
        wb = openpyxl.load_workbook(path)
        ws = wb.worksheets[0]
        header = [c.value for c in ws[1]]
        col = header.index("kind") + 1
        size = header.index("size") + 1
        for row, kind in enumerate(kinds, start=2):
            ws.cell(row=row, column=col, value=kind)
            ws.cell(row=row, column=size, value=10)
        wb.save(path)
    return out


def test_sheets_of_an_earlier_version_are_recoded(tmp_path):
    old = _cb(tmp_path, name="old.yaml")
    sheets = _filled_templates(tmp_path, old, {"ana": [1, 2, 3, 3], "ben": [1, 3, 2, 3]})
    assert sheet_version(sheets / "ana.xlsx") == "1.0"
    new = _cb(
        tmp_path,
        version="1.1",
        three=False,
        extra='recode:\n  - from_version: "1.0"\n    variables:\n      kind: {3: 2}\n',
        name="new.yaml",
    )
    before = {p: p.read_bytes() for p in sheets.iterdir()}
    codings = read_versioned(load_codebook(new), [sheets])
    assert not codings.problems.errors
    wide = codings.wide("kind")
    assert list(wide["ana"]) == [1, 2, 2, 2]
    assert list(wide["ben"]) == [1, 2, 2, 2]
    # validate and agree use the same path: the recoded sheets agree on every unit
    result = runner.invoke(
        app, ["agree", "-c", str(new), str(sheets), "--json", "--replicates", "0"]
    )
    assert result.exit_code == 0, result.output
    kind = next(v for v in json.loads(result.stdout)["variables"] if v["variable"] == "kind")
    assert kind["percent_agreement"]["estimate"] == 1.0
    valid = runner.invoke(app, ["validate", "-c", str(new), str(sheets)])
    assert valid.exit_code == 0, valid.output
    assert {p: p.read_bytes() for p in sheets.iterdir()} == before


def test_a_version_without_recode_path_is_a_warning_with_both_versions(tmp_path):
    old = _cb(tmp_path, name="old.yaml")
    sheets = _filled_templates(tmp_path, old, {"ana": [1, 2, 3, 3], "ben": [1, 3, 2, 3]})
    new = _cb(tmp_path, version="2.0", name="new.yaml")
    codings = read_versioned(load_codebook(new), [sheets])
    warnings = [p for p in codings.problems if p.code == "version-no-recode"]
    assert len(warnings) == 2
    assert "version 1.0" in warnings[0].message
    assert "version 2.0" in warnings[0].message
    assert warnings[0].file == "ana.xlsx"
    result = runner.invoke(app, ["validate", "-c", str(new), str(sheets), "--json"])
    assert result.exit_code == 0
    assert "version-no-recode" in result.stdout
