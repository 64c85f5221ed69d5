"""Reading sheets made from an earlier codebook version: `renamed_from` and the `recode` block
applied by validate, agree and merge; a version with no recode path is a warning naming both.

Oracle: hand-filled templates of the earlier version whose values are known cell by cell; after
renaming and recoding, the coders agree on every unit (percent agreement 1, by counting).
"""

import json
import textwrap
from pathlib import Path

import openpyxl
import pandas as pd
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.io.versions import read_versioned
from coderel.template import write_templates

runner = CliRunner()

OLD = """\
title: Revisions test (invented)
version: "1.0"
unit: unit
variables:
  - name: sort
    level: nominal
    categories: [{code: 1, label: One}, {code: 2, label: Two}, {code: 3, label: Three}]
  - name: detail
    level: nominal
    applies_when: {variable: sort, includes: [1]}
    categories: [{code: 1, label: Yes}, {code: 2, label: No}]
  - name: size
    level: ratio
"""
NEW = """\
title: Revisions test (invented)
version: "1.1"
unit: unit
variables:
  - name: kind
    renamed_from: sort
    level: nominal
    categories: [{code: 1, label: One}, {code: 2, label: Two or three}]
  - name: detail
    level: nominal
    applies_when: {variable: kind, includes: [1]}
    categories: [{code: 1, label: Yes}, {code: 2, label: No}]
  - name: size
    level: ratio
"""
RECODE = """\
recode:
  - from_version: "1.0"
    variables:
      kind: {3: 2}
"""
#: per coder: sort, detail (blank where sort is not 1), size; 3 and 2 of sort agree after 1.1
SHEETS = {
    "ana": [(1, 1, 10), (2, None, 12), (3, None, 14), (3, None, 16)],
    "ben": [(1, 1, 10), (3, None, 12), (2, None, 14), (3, None, 16)],
}


def _write(tmp_path: Path, name: str, body: str) -> Path:
    path = tmp_path / name
    path.write_text(textwrap.dedent(body), encoding="utf-8")
    return path


def _sheets(tmp_path: Path) -> Path:
    out = tmp_path / "sheets"
    old = load_codebook(_write(tmp_path, "old.yaml", OLD))
    write_templates(old, list(SHEETS), out, ["u1", "u2", "u3", "u4"])
    for coder, rows in SHEETS.items():
        path = out / f"{coder}.xlsx"
        wb = openpyxl.load_workbook(path)
        ws = wb.worksheets[0]
        header = [c.value for c in ws[1]]
        for r, values in enumerate(rows, start=2):
            for name, value in zip(("sort", "detail", "size"), values, strict=True):
                ws.cell(row=r, column=header.index(name) + 1, value=value)
        wb.save(path)
    return out


def test_renamed_and_recoded_when_read_by_validate_agree_and_merge(tmp_path):
    sheets = _sheets(tmp_path)
    before = {p: p.read_bytes() for p in sheets.iterdir()}
    new = _write(tmp_path, "new.yaml", NEW + RECODE)
    codings = read_versioned(load_codebook(new), [sheets])
    assert [p.code for p in codings.problems] == []
    wide = codings.wide("kind")
    assert list(wide["ana"]) == [1, 2, 2, 2]
    assert list(wide["ben"]) == [1, 2, 2, 2]
    assert set(codings.frame["variable"]) == {"kind", "detail", "size"}
    # the condition of detail names kind in 1.1 and sort in 1.0: it holds on u1 only
    detail = codings.for_variable("detail")
    assert set(detail.loc[detail["applies"] == True, "unit"]) == {"u1"}  # noqa: E712
    valid = runner.invoke(app, ["validate", "-c", str(new), str(sheets), "--json"])
    assert valid.exit_code == 0, valid.output
    assert json.loads(valid.stdout)["problems"] == []
    agree = runner.invoke(
        app, ["agree", "-c", str(new), str(sheets), "--json", "--replicates", "0"]
    )
    assert agree.exit_code == 0, agree.output
    kind = next(v for v in json.loads(agree.stdout)["variables"] if v["variable"] == "kind")
    assert kind["percent_agreement"]["estimate"] == 1.0
    merged = tmp_path / "merged.csv"
    merge = runner.invoke(app, ["merge", "-c", str(new), str(sheets), "-o", str(merged)])
    assert merge.exit_code == 0, merge.output
    table = pd.read_csv(merged)
    assert "sort" not in table.columns
    assert list(table.sort_values("unit")["kind"]) == [1, 2, 2, 2]
    assert {p: p.read_bytes() for p in sheets.iterdir()} == before


def test_a_version_without_recode_path_warns_with_both_versions_and_still_renames(tmp_path):
    sheets = _sheets(tmp_path)
    new = _write(
        tmp_path, "new.yaml", NEW.replace("Two or three}]", "Two}, {code: 3, label: Three}]")
    )
    codings = read_versioned(load_codebook(new), [sheets])
    codes = [p.code for p in codings.problems]
    assert codes == ["version-no-recode", "version-no-recode"]
    message = codings.problems[0].message
    assert "version 1.0" in message
    assert "version 1.1" in message
    assert "renamed variables under their old names" in message
    assert list(codings.wide("kind")["ben"]) == [1, 3, 2, 3]  # read as they are
    result = runner.invoke(app, ["validate", "-c", str(new), str(sheets)])
    assert result.exit_code == 0
    assert "version 1.0" in result.output
    assert "version 1.1" in result.output
