"""The same codings through every input path give the same answer (issue 9, items 7 and 10).

A unit a coder left blank in a template workbook (unit ID pre-filled, nothing coded) is the same
data as a long table without rows for it: the unit was not coded by that coder. Checked for wide
xlsx (a real template from ``coderel.template``), wide csv, wide parquet and a long csv, through
reading, agreement, the adjudication list, the merged data and the report's counts.

The invariance itself is the check: the expected figures come from the definition of the data (no
program's output), e.g. the unit left blank by one coder has two coders' values.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook

from coderel.adjudicate import build_adjudication
from coderel.agree import agreement
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.io.read import read_codings
from coderel.merge import merge
from coderel.report import build_report
from coderel.template import write_templates

CB = Codebook(
    title="paths (invented)",
    unit="report_id",
    variables=(
        Variable(
            "animal",
            "nominal",
            categories=(Category(1, "Bear"), Category(2, "Elk"), Category(3, "Cougar")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable("distance_m", "ratio", range=(0.0, 500.0)),
    ),
)
UNITS = [f"R{i}" for i in range(1, 9)]
#: coder -> unit -> (animal, distance); cai leaves R3 and R7 blank, ben leaves R5 blank.
CODES: dict[str, dict[str, tuple[object, object]]] = {
    "ana": {u: (1 + i % 3, 10.0 * (i + 1)) for i, u in enumerate(UNITS)},
    "ben": {u: (1 + i % 3, 10.0 * (i + 1)) for i, u in enumerate(UNITS) if u != "R5"},
    "cai": {
        u: ((3 if u == "R2" else 1 + i % 3), 10.0 * (i + 1))
        for i, u in enumerate(UNITS)
        if u not in ("R3", "R7")
    },
}


def _wide_frame(coder: str) -> pd.DataFrame:
    rows = []
    for u in UNITS:
        animal, distance = CODES[coder].get(u, (None, None))
        rows.append({"report_id": u, "animal": animal, "distance_m": distance})
    return pd.DataFrame(rows)


def write_xlsx(folder: Path) -> Path:
    """Real templates with every unit pre-filled; each coder fills only the units coded."""
    write_templates(CB, list(CODES), folder, UNITS)
    for coder in CODES:
        path = folder / f"{coder}.xlsx"
        wb = load_workbook(path)
        ws = wb.worksheets[0]
        header = [c.value for c in ws[1]]
        for row in ws.iter_rows(min_row=2):
            unit = row[header.index("report_id")].value
            if unit in CODES[coder]:
                animal, distance = CODES[coder][unit]
                row[header.index("animal")].value = animal
                row[header.index("distance_m")].value = distance
        wb.save(path)
    return folder


def write_csv(folder: Path) -> Path:
    folder.mkdir()
    for coder in CODES:
        _wide_frame(coder).to_csv(folder / f"{coder}.csv", index=False)
    return folder


def write_parquet(folder: Path) -> Path:
    folder.mkdir()
    for coder in CODES:
        frame = _wide_frame(coder)
        frame["animal"] = frame["animal"].astype("Int64")
        frame["distance_m"] = frame["distance_m"].astype("float64")
        frame.to_parquet(folder / f"{coder}.parquet", index=False)
    return folder


def write_long(folder: Path) -> Path:
    folder.mkdir()
    with open(folder / "long.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["unit", "coder", "variable", "value"])
        for coder, units in CODES.items():
            for unit, (animal, distance) in units.items():
                w.writerow([unit, coder, "animal", animal])
                w.writerow([unit, coder, "distance_m", distance])
    return folder


WRITERS = {"xlsx": write_xlsx, "csv": write_csv, "parquet": write_parquet, "long": write_long}


def _key(codings) -> pd.DataFrame:
    f = codings.frame[["unit", "coder", "variable", "value", "missing", "applies"]].copy()
    f["value"] = f["value"].map(lambda v: None if v is None else float(v))
    return f.sort_values(["unit", "coder", "variable"]).reset_index(drop=True)


@pytest.fixture(scope="module")
def paths(tmp_path_factory) -> dict[str, object]:
    base = tmp_path_factory.mktemp("paths")
    return {name: read_codings(CB, write(base / name)) for name, write in WRITERS.items()}


def test_blank_template_rows_are_not_coded_on_every_path(paths):
    long = _key(paths["long"])
    assert len(long) == 2 * (8 + 7 + 6)
    for name in ("xlsx", "csv", "parquet"):
        pd.testing.assert_frame_equal(_key(paths[name]), long, check_dtype=False, obj=name)


def test_one_warning_per_coder_with_count_and_units(paths):
    for name in ("xlsx", "csv", "parquet"):
        uncoded = [p for p in paths[name].problems if p.code == "uncoded-unit"]
        assert sorted(p.coder for p in uncoded) == ["ben", "cai"], name
        cai = next(p for p in uncoded if p.coder == "cai")
        assert "left 2 units blank" in cai.message
        assert "R3, R7" in cai.message
        assert cai.severity == "warning"
    assert not [p for p in paths["long"].problems if p.code == "uncoded-unit"]
    # every path reports the same units as coded by only some coders
    partial = {
        name: sorted(p.unit for p in c.problems if p.code == "partial-unit")
        for name, c in paths.items()
    }
    assert all(units == ["R3", "R5", "R7"] for units in partial.values()), partial


def test_agreement_adjudication_merge_and_report_agree_across_paths(paths):
    outputs = {}
    for name, codings in paths.items():
        result = agreement(codings, replicates=0)
        adj = build_adjudication(codings)
        merged = merge(codings)
        report = build_report(codings, result, merged)
        outputs[name] = (
            [(r.variable, r.units, r.pairable_values) for r in result.variables],
            [(r.unit, r.variable, r.kind, dict(r.values)) for r in adj.rows],
            merged.to_frame().astype(str).to_dict(orient="list"),
            (report.summary.units, report.summary.units_all_coders),
        )
    # the only disagreement is cai's animal on R2; blank units are no "values differ" rows
    rows = outputs["long"][1]
    assert [(u, v, k) for u, v, k, _ in rows] == [("R2", "animal", "values differ")]
    assert outputs["long"][3] == (8, 5)
    merged = outputs["long"][2]
    assert "unresolved" not in merged["distance_m_status"]
    for name in ("xlsx", "csv", "parquet"):
        assert outputs[name] == outputs["long"], name


def test_coder_names_differing_in_case_or_spaces_say_did_you_mean(tmp_path):
    path = tmp_path / "long.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["unit", "coder", "variable", "value"])
        for i, unit in enumerate(UNITS):
            for coder in ("Mara", "ben"):
                w.writerow([unit, coder, "animal", 1 + i % 3])
                w.writerow([unit, coder, "distance_m", 10])
        w.writerow(["R9", "mara ", "animal", 1])
        w.writerow(["R9", "ben", "animal", 1])
    codings = read_codings(CB, path)
    alike = [p for p in codings.problems if p.code == "similar-coder-names"]
    assert len(alike) == 1
    assert "did you mean 'Mara'" in alike[0].hint
    partial = [p for p in codings.problems if p.code == "partial-unit" and p.unit == "R1"]
    assert partial
    assert "did you mean 'Mara' for 'mara'" in partial[0].hint
