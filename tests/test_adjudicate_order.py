"""The adjudication list and the merge do not depend on the order of the input rows (issue 14).

A long table of invented codings (seeded; Quellbarrow Highlands trail reports) is read as written
and with its rows shuffled. The adjudication list
(written as xlsx and as csv) must be the same bytes and the merged dataset the same values, also
after decisions were filled in. The invariance itself is the check (same data, same answer).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
from openpyxl import load_workbook

from coderel.adjudicate import build_adjudication, write_adjudication
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.io.read import read_codings
from coderel.merge import merge

CB = Codebook(
    title="trail reports (invented)",
    unit="report_id",
    variables=(
        Variable(
            "animal",
            "nominal",
            categories=(Category(1, "Bear"), Category(2, "Elk"), Category(3, "Cougar")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable(
            "threat",
            "ordinal",
            categories=(Category(1, "low"), Category(2, "medium"), Category(3, "high")),
        ),
        Variable("distance_m", "ratio", range=(0.0, 500.0)),
    ),
)


def _long_table(seed: int = 14) -> pa.Table:
    rng = np.random.default_rng(seed)
    units, coders = 150, ("ana", "ben", "cai")
    rows: dict[str, list] = {"unit": [], "coder": [], "variable": [], "value": []}
    truth = {"animal": rng.integers(1, 4, units), "threat": rng.integers(1, 4, units)}
    distance = rng.integers(1, 50, units) * 10.0
    for u in range(units):
        for coder in coders:
            if rng.random() < 0.05:
                continue  # this coder did not code the unit
            for name in ("animal", "threat", "distance_m"):
                if name == "distance_m":
                    value = distance[u] + (10.0 if rng.random() < 0.2 else 0.0)
                else:
                    value = float(truth[name][u] if rng.random() < 0.8 else rng.integers(1, 4))
                    if name == "animal" and rng.random() < 0.03:
                        value = 99.0
                rows["unit"].append(f"TR-{u:04d}")
                rows["coder"].append(coder)
                rows["variable"].append(name)
                rows["value"].append(value)
    return pa.table(rows)


def _outputs(codings, folder: Path, decisions: Path | None = None):
    folder.mkdir()
    adj = build_adjudication(codings, decisions)
    write_adjudication(adj, folder / "list.xlsx")
    write_adjudication(adj, folder / "list.csv")
    merged = merge(codings, decisions)
    return (
        (folder / "list.xlsx").read_bytes(),
        (folder / "list.csv").read_bytes(),
        merged.to_frame().astype(str).to_dict(orient="list"),
        merged.to_dict(),
    )


def test_adjudication_list_and_merge_do_not_depend_on_row_order(tmp_path):
    table = _long_table()
    pq.write_table(table, tmp_path / "codings.parquet")
    order = np.random.default_rng(7).permutation(table.num_rows)
    shuffled = table.take(pa.array(order))
    pq.write_table(shuffled, tmp_path / "shuffled.parquet")

    plain = read_codings(CB, tmp_path / "codings.parquet")
    mixed = read_codings(CB, tmp_path / "shuffled.parquet")
    assert plain.coders != mixed.coders or list(plain.frame["unit"]) != list(mixed.frame["unit"])
    first = _outputs(plain, tmp_path / "plain")
    assert first == _outputs(mixed, tmp_path / "mixed")
    assert first[0].startswith(b"PK")  # a workbook, not an empty file

    # Decide every third row of the list, then list and merge again on both inputs.
    decided = tmp_path / "decided.xlsx"
    (tmp_path / "plain" / "list.xlsx").replace(decided)
    wb = load_workbook(decided)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    col = header.index("decision") + 1
    variables = [ws.cell(row=r, column=header.index("variable") + 1).value for r in range(2, 50)]
    for r, name in zip(range(2, 50, 3), variables[::3], strict=False):
        ws.cell(row=r, column=col, value="2" if name != "distance_m" else "120")
    wb.save(decided)
    again = _outputs(plain, tmp_path / "plain-again", decided)
    assert again == _outputs(mixed, tmp_path / "mixed-again", decided)
    assert again[3]["adjudicated"]  # the decisions were used
