"""Make the demo's decisions file: the adjudication list of the demo with every decision filled in.

An invented adjudicator ("lead ranger") settles every disagreement of the three demo coders: the
value most coders gave when more than half agree, otherwise one of the coders' values drawn with a
seeded generator (a demo stand-in for reading the report). The decisions are written into the
list's ``decision``, ``note`` and ``adjudicator`` cells with openpyxl, exactly as a person would
fill the workbook, and saved with fixed time stamps so that the file is byte-reproducible.

Usage (from the repository root)::

    python scripts/make_demo_decisions.py [--out sample_decisions/wildlife_encounters.xlsx]

Then ``coderel merge --decisions sample_decisions/wildlife_encounters.xlsx`` leaves no cell
unresolved. The file sits beside the sample codebook, not in ``demo/``, which holds only what
``scripts/generate_demo.py`` makes.
"""

from __future__ import annotations

import argparse
import io
import random
from collections import Counter
from pathlib import Path

from openpyxl import load_workbook

from coderel.adjudicate import MAIN_SHEET, build_adjudication, write_adjudication
from coderel.codebook.load import load_codebook
from coderel.io.atomic import write_bytes
from coderel.io.read import read_codings
from coderel.io.tables import FIXED_TIME, normalise_xlsx

ROOT = Path(__file__).resolve().parents[1]
CODEBOOK = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
SEED = 20261202
ADJUDICATOR = "lead ranger"
BLANK = "(blank)"


def choose(values: list[str], rng: random.Random) -> tuple[str, str]:
    """The decision and its note for one row, from the coders' values as shown on the list."""
    given = [v for v in values if v and v != BLANK]
    counts = Counter(given)
    if counts:
        value, n = counts.most_common(1)[0]
        if 2 * n > len(values):
            return value, "most coders; report read again"
        return rng.choice(sorted(counts)), "coders split; decided on the report"
    raise ValueError("a row where every coder left the cell blank needs a code chosen by hand")


def make(out: Path) -> dict[str, int]:
    codebook = load_codebook(CODEBOOK)
    codings = read_codings(codebook, [SHEETS])
    adjudication = build_adjudication(codings)
    buffer_path = out.with_name(f".{out.stem}.list.xlsx")
    try:
        write_adjudication(adjudication, buffer_path)
        wb = load_workbook(buffer_path)
    finally:
        buffer_path.unlink(missing_ok=True)
    ws = wb[MAIN_SHEET]
    header = [c.value for c in ws[1]]
    col = {name: header.index(name) + 1 for name in ("unit", "variable", "decision", "note")}
    col["adjudicator"] = header.index("adjudicator") + 1
    rng = random.Random(SEED)
    notes: Counter[str] = Counter()
    for i, row in enumerate(adjudication.rows, start=2):
        place = (
            ws.cell(row=i, column=col["unit"]).value,
            ws.cell(row=i, column=col["variable"]).value,
        )
        if place != (row.unit, row.variable):
            raise RuntimeError(f"row {i} of the list is not {row.key}")
        decision, note = choose([row.values.get(c, "") for c in adjudication.coders], rng)
        ws.cell(row=i, column=col["decision"], value=decision)
        ws.cell(row=i, column=col["note"], value=note)
        ws.cell(row=i, column=col["adjudicator"], value=ADJUDICATOR)
        notes[note] += 1
    wb.properties.created = FIXED_TIME
    wb.properties.modified = FIXED_TIME
    wb.properties.creator = "coderel demo"
    data = io.BytesIO()
    wb.save(data)
    write_bytes(out, normalise_xlsx(data.getvalue()))
    return {"decisions": len(adjudication.rows), **notes}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument(
        "--out", type=Path, default=ROOT / "sample_decisions" / "wildlife_encounters.xlsx"
    )
    args = parser.parse_args()
    counts = make(args.out)
    print(f"{args.out}: " + ", ".join(f"{k}: {v}" for k, v in counts.items()))


if __name__ == "__main__":
    main()
