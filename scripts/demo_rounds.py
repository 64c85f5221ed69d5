"""The demo's coding protocol: a pilot round, two training rounds with an answer key, codebook 1.1.

Part of the invented demo (``scripts/generate_demo.py`` calls :func:`write_rounds`). Four new
trainees code three rounds of 40 reports each:

``demo/rounds/pilot/``
    coded with codebook version 1.0 (workbooks whose ``codebook`` sheet says so); the trainees
    confuse behaviour 4 (approach or bluff charge) and 5 (contact or attack), and the team merges
    the two in version 1.1 (``sample_codebooks/wildlife_encounters_v1.1.yaml``, whose ``recode``
    block maps 5 onto 4 when pilot sheets are read);
``demo/rounds/training-1/``, ``demo/rounds/training-2/``
    coded with version 1.1; every trainee makes fewer slips round after round, except
    ``coder_gus``, who drifts in the second training round (behaviour and severity one step
    higher, more slips): his agreement with the others drops and he falls below the training
    threshold;
``demo/keys/training-1.xlsx``, ``demo/keys/training-2.xlsx``
    the answer key of each training round (the reports' true coding, agreed by the lead), with a
    ``note`` column where the key's choice needs a word.

Its own seeded generator (``[seed, 21]``) leaves every other demo file unchanged; workbooks carry
fixed time stamps, so two runs give identical bytes.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from types import ModuleType

import numpy as np
import openpyxl

TRAINEES = ("coder_eli", "coder_fay", "coder_gus", "coder_hal")
DRIFTER = "coder_gus"
#: (round, codebook version, first report number); 40 reports per round.
ROUNDS = (("pilot", "1.0", 301), ("training-1", "1.1", 501), ("training-2", "1.1", 601))
ROUND_REPORTS = 40
#: Reports drawn for the pilot, of which 40 are kept (half of them with behaviour 4 or 5).
PILOT_POOL = 160
#: How many times the base slip rates each trainee makes, round by round.
SLIPS = {
    "pilot": {"coder_eli": 3.0, "coder_fay": 3.2, "coder_gus": 2.8, "coder_hal": 3.4},
    "training-1": {"coder_eli": 1.2, "coder_fay": 1.3, "coder_gus": 1.1, "coder_hal": 1.4},
    "training-2": {"coder_eli": 0.4, "coder_fay": 0.5, "coder_gus": 2.6, "coder_hal": 0.5},
}
BASE = {
    "behaviour_confusion": 0.22,
    "species_error": 0.04,
    "time_confusion": 0.05,
    "temperature_slip": 0.06,
    "food_miss": 0.15,
    "food_false": 0.01,
    "spray_disagree": 0.25,
    "miss_minor_actions": 0.1,
    "group_slip": 0.04,
    "cannot_code": 0.01,
    "distance_sigma": 0.15,
}
#: Under version 1.1, behaviour 5 (contact or attack) is part of 4.
MERGED = {5: 4}


def _reports(gen: ModuleType, rng: np.random.Generator, first: int, pilot: bool) -> list:
    """The round's reports; the pilot's are chosen so that half of them tell of an approach,
    charge or contact (behaviour 4 or 5), the categories the pilot puts to the test."""
    if not pilot:
        return [gen.make_report(rng, first + i) for i in range(ROUND_REPORTS)]
    pool = [gen.make_report(rng, first + i) for i in range(PILOT_POOL)]
    close = [r for r in pool if r.behaviour in (4, 5)][: ROUND_REPORTS // 2]
    other = [r for r in pool if r.behaviour not in (4, 5)][: ROUND_REPORTS - len(close)]
    return sorted(close + other, key=lambda r: r.report_id)


def _habits(gen: ModuleType, round_name: str, trainee: str):
    scale = SLIPS[round_name][trainee]
    rates = {k: float(min(0.9, v * scale)) for k, v in BASE.items()}
    habits = gen.Habits(**rates)
    if round_name == "pilot":
        habits.extra["confuse_4_5"] = 0.6
    if trainee == DRIFTER and round_name == "training-2":
        habits = dataclasses.replace(
            habits, behaviour_bias=1, severity_shift=1, severity_shift_p=0.6
        )
    return habits


def _coded(gen: ModuleType, rng: np.random.Generator, report, habits, version: str) -> dict:
    values = gen.code_report(rng, report, habits)
    b = values["behaviour"]
    if b in (4, 5) and rng.random() < habits.extra.get("confuse_4_5", 0.0):
        values["behaviour"] = 9 - b  # 4 <-> 5: the pilot's trainees cannot tell them apart
    if version != "1.0":
        values["behaviour"] = MERGED.get(values["behaviour"], values["behaviour"])
    return values


def _workbook(gen: ModuleType, version: str, header: list[str], rows: list[list]) -> bytes:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = gen.SHEET
    ws.append(header)
    for row in rows:
        ws.append(row)
    info = wb.create_sheet("codebook")
    info.append(["title", "Visitor-wildlife encounters, Quellbarrow Highlands National Park"])
    info.append(["version", version])
    return gen.deterministic_xlsx(wb)


def _note(report, version: str) -> str | None:
    if version != "1.0" and report.behaviour == 5:
        return "contact counts as 4 since codebook 1.1"
    if not report.distance_stated:
        return "no figure in the report: distance estimated from the description"
    return None


def write_rounds(gen: ModuleType, out: Path, seed: int) -> dict[str, int]:
    """Write ``rounds/`` and ``keys/`` under ``out``; return the reports per round."""
    rng = np.random.default_rng([seed, 21])
    counts = {}
    for name, version, first in ROUNDS:
        reports = _reports(gen, rng, first, name == "pilot")
        for trainee in TRAINEES:
            habits = _habits(gen, name, trainee)
            rows = [gen.sheet_row(r, _coded(gen, rng, r, habits, version)) for r in reports]
            data = _workbook(gen, version, list(gen.HEADER), rows)
            gen.write_bytes(out / "rounds" / name / f"{trainee}.xlsx", data)
        if name != "pilot":
            rows = []
            for r in reports:
                truth = r.values()
                truth["behaviour"] = MERGED.get(r.behaviour, r.behaviour)
                rows.append([*gen.sheet_row(r, truth), _note(r, version)])
            data = _workbook(gen, version, [*gen.HEADER, "note"], rows)
            gen.write_bytes(out / "keys" / f"{name}.xlsx", data)
        counts[name] = len(reports)
    return counts
