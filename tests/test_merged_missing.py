"""Missing codes in the merged dataset are true missing values (issue 9, item 8).

Before, ``999`` stayed a number in a ratio column, so a careless mean included it. Now the value
column is empty where the final value is a missing code and ``<variable>_missing`` holds the code
(its meaning in the data dictionary and the labels sheet), identically in csv, xlsx and parquet.
Expected values follow from the construction of the data (mean of 10 and 20 is 15).
"""

from __future__ import annotations

import pandas as pd
import pytest

from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.codings import Codings
from coderel.merge import dictionary_frame, merge, spread_multiselect, write_merged

CB = Codebook(
    title="missing (invented)",
    unit="report_id",
    variables=(
        Variable(
            "species",
            "nominal",
            categories=(Category(1, "Bear"), Category(2, "Elk")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable(
            "distance_m",
            "ratio",
            range=(0.0, 500.0),
            missing=(MissingCode(999, "not stated"),),
        ),
        Variable(
            "actions",
            "nominal",
            multiple=True,
            categories=(Category(1, "Backed away"), Category(2, "Shouted")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable("visitors", "ratio", range=(0.0, 50.0), integer=True),
    ),
)


def codings() -> Codings:
    rows = {
        "R1": (1, 10.0, (1,), 2.0),
        "R2": (99, 999, 99, 3.0),
        "R3": (2, 20.0, (1, 2), 4.0),
    }
    records = []
    for unit, (species, distance, actions, visitors) in rows.items():
        for coder in ("ann", "bob"):
            for name, value in (
                ("species", species),
                ("distance_m", distance),
                ("actions", actions),
                ("visitors", visitors),
            ):
                missing = value if value in (99, 999) else None
                records.append(
                    {
                        "unit": unit,
                        "coder": coder,
                        "variable": name,
                        "value": None if missing is not None else value,
                        "missing": missing,
                    }
                )
    return Codings.from_records(CB, records)


def test_missing_code_is_a_missing_value_with_its_code_beside_it():
    result = merge(codings())
    f = result.frame.set_index("report_id")
    assert list(result.frame.columns) == [
        "report_id",
        "species",
        "species_status",
        "species_missing",
        "distance_m",
        "distance_m_status",
        "distance_m_missing",
        "actions",
        "actions_status",
        "actions_missing",
        "visitors",
        "visitors_status",
    ]
    assert pd.isna(f.loc["R2", "distance_m"])
    assert f.loc["R2", "distance_m_status"] == "agreed"
    assert f.loc["R2", "distance_m_missing"] == 999
    assert f["distance_m"].mean() == 15.0  # 999 is not averaged in
    assert pd.isna(f.loc["R1", "distance_m_missing"])
    assert pd.isna(f.loc["R2", "species"])
    assert f.loc["R2", "species_missing"] == 99
    assert pd.isna(f.loc["R2", "actions"])
    assert f.loc["R2", "actions_missing"] == 99
    spread = spread_multiselect(result.frame, CB).set_index("report_id")
    assert spread.loc["R3", ["actions__1", "actions__2"]].tolist() == [1, 1]
    assert spread.loc["R2", ["actions__1", "actions__2"]].isna().all()


def test_labels_and_dictionary_keep_the_meaning():
    result = merge(codings())
    labels = result.labels_frame().set_index("report_id")
    assert labels.loc["R2", "distance_m_missing"] == "not stated"
    assert pd.isna(labels.loc["R2", "distance_m"])
    d = dictionary_frame(CB)
    rows = d[d["column"] == "distance_m_missing"]
    assert rows[rows["code"] == "999"]["meaning"].tolist() == ["not stated"]
    assert "999" not in d[d["column"] == "distance_m"]["code"].tolist()


@pytest.mark.parametrize("suffix", [".csv", ".xlsx", ".parquet"])
def test_every_form_holds_the_same_missing_values(tmp_path, suffix):
    result = merge(codings())
    path = tmp_path / f"merged{suffix}"
    write_merged(result, path)
    if suffix == ".csv":
        back = pd.read_csv(path)
    elif suffix == ".xlsx":
        back = pd.read_excel(path, sheet_name="merged", engine="openpyxl")
    else:
        back = pd.read_parquet(path)
    back = back.set_index("report_id")
    assert pd.isna(back.loc["R2", "distance_m"])
    assert int(back.loc["R2", "distance_m_missing"]) == 999
    assert back["distance_m"].mean() == 15.0
    assert int(back.loc["R2", "species_missing"]) == 99
