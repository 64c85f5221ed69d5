"""Generate the bundled demo project: invented wildlife-encounter reports coded by three coders.

The scenario is invented: rangers of the (invented) Quellbarrow Highlands National Park write short
reports of visitor encounters with wildlife; three coders (``coder_ana``, ``coder_ben``,
``coder_cai``) code each report with ``sample_codebooks/wildlife_encounters.yaml``. A fourth sheet
(``coder_dee``) is kept apart in ``demo/messy`` and carries deliberate problems for validation.
The coding protocol's rounds (a pilot, two training rounds with answer keys, four trainees, one
drifting; codebook 1.0 then 1.1) are written by ``scripts/demo_rounds.py``.

Every number comes from one seeded :class:`numpy.random.Generator`, and the xlsx files are written
with fixed timestamps, so two runs give byte-identical files::

    .venv/bin/python scripts/generate_demo.py            # writes demo/
    .venv/bin/python scripts/generate_demo.py --out /tmp/demo

Coder habits built in (so the reliability report shows every verdict): a strict coder who codes
severity one step lower and leaves out minor actions; a lenient coder who codes severity one step
higher; confusion between neighbouring ordinal categories; distance estimates with noise, rounded to
5 or 10 m; occasional "cannot be coded" (99); a few reports skipped entirely; a rare "yes" in
``food_present`` (about 5 % of reports) that shows the prevalence paradox of kappa-type
coefficients.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import io
import re
import sys
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import openpyxl
import yaml
from openpyxl.utils import get_column_letter

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from coderel.io.atomic import write_bytes, write_text  # noqa: E402
from coderel.io.safe_text import neutralise  # noqa: E402

CODEBOOK = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SEED = 20261202
N_REPORTS = 200
SHEET = "coding"
UNIT = "report_id"
TEXT = "narrative"
VARIABLES = (
    "species",
    "behaviour",
    "visitor_distance_m",
    "severity",
    "time_of_day",
    "visitor_group_size",
    "temperature_c",
    "food_present",
    "actions",
    "spray_worked",
)
HEADER = (UNIT, TEXT, *VARIABLES)
CODERS = ("coder_ana", "coder_ben", "coder_cai")
MESSY_CODER = "coder_dee"
#: Fixed time stamp written into every workbook and zip entry (byte-identical output).
FIXED_TIME = dt.datetime(2026, 1, 1, 0, 0, 0)

# ---------------------------------------------------------------------------------------------
# Narrative fragments. Every word of every narrative comes from these lists (tests check this).
# Rangers are named by invented call-signs; places are numbered trail segments and loops.
# ---------------------------------------------------------------------------------------------
PLACE_LETTERS = "ABCDEFGH"
CALL_SIGNS = ("Kestrel-2", "Larch-5", "Ridge-1", "Heron-3", "Pika-4", "Sedge-6")
PLACES = (
    "trail segment T-{n}",
    "campground loop {letter}",
    "day-use lot {n}",
    "lakeshore zone {letter}",
    "backcountry site B-{n}",
)
TIME_PHRASES = {
    "dawn": ("shortly after sunrise", "at first light"),
    "day": ("around midday", "in the early afternoon", "mid-morning"),
    "dusk": ("as the light was fading", "around sunset"),
    "night": ("after dark", "late at night"),
    "unknown": ("",),
}
SPECIES_PHRASES = {
    1: ("a black bear", "a young black bear"),
    2: ("a cow elk", "a bull elk"),
    3: ("a cougar", "a mountain lion"),
    4: ("a coyote", "a pair of coyotes"),
    5: ("a rattlesnake",),
    6: ("a moose", "a cow moose"),
    7: ("a porcupine", "a badger", "a wild turkey"),
    99: ("a large dark animal they could not name",),
}
WARNINGS = {
    1: "huffed and slapped the ground",
    2: "stamped and laid its ears back",
    3: "hissed and flattened its ears",
    4: "barked and circled",
    5: "coiled and rattled",
    6: "laid its ears back and stamped",
    7: "hissed",
    99: "made a low noise",
}
BEHAVIOUR_PHRASES = {
    1: ("It kept feeding and did not look up.", "It paid no attention to them."),
    2: ("It raised its head and watched them.", "It stopped and stared at the group."),
    3: ("It {warning} and would not move off.", "It {warning}."),
    4: ("It came straight towards them.", "It made a short bluff charge."),
    5: ("It struck one visitor.", "It made contact with one of them."),
    99: ("What it did next is not clear from the call.",),
}
DISTANCE_EXACT = "The closest distance was about {d} m."
DISTANCE_VAGUE = (
    (5, "It came within arm's reach."),
    (25, "It was a few car lengths away."),
    (80, "It was across the clearing from them."),
    (500, "It stayed far off on the slope."),
)
SEVERITY_PHRASES = {
    0: ("Nobody was hurt.", "No injuries."),
    1: ("A pack was torn; nobody was hurt.", "The visitors were badly shaken but unhurt."),
    2: ("One visitor was treated on site for a cut.", "One visitor was treated for a bruised arm."),
    3: ("One visitor was taken to the clinic.", "One visitor was flown out for care."),
    99: ("Outcome not recorded.",),
}
TEMPERATURE_C = "Air temperature {t} °C."
TEMPERATURE_F = "Thermometer at the post read {f} °F."
FOOD_PHRASES = {
    1: ("An open cooler sat on the picnic table.", "A food bag hung unattended on a branch."),
    2: ("No food was out.", ""),
}
ACTION_PHRASES = {
    1: "backed away slowly",
    2: "shouted and clapped",
    3: "used bear spray",
    4: "threw stones",
    5: "ran",
    6: "reported it at the ranger post",
}
SPRAY_PHRASES = {
    1: ("The spray turned it away at once.",),
    2: ("The spray slowed it, but it lingered nearby.", "It left after a while."),
    3: ("The spray had no visible effect.", "It moved off some time later."),
}
CLOSINGS = ("", "Area signed; follow-up patrol scheduled.", "No further action.")


def template_vocabulary() -> set[str]:
    """Every word that any narrative may contain (lower case, numbers and placeholders removed)."""
    texts: list[str] = [*CALL_SIGNS, *PLACES, DISTANCE_EXACT, TEMPERATURE_C, TEMPERATURE_F]
    for table in (TIME_PHRASES, SPECIES_PHRASES, BEHAVIOUR_PHRASES, SEVERITY_PHRASES):
        texts.extend(p for phrases in table.values() for p in phrases)
    for table in (FOOD_PHRASES, SPRAY_PHRASES):
        texts.extend(p for phrases in table.values() for p in phrases)
    texts.extend(WARNINGS.values())
    texts.extend(ACTION_PHRASES.values())
    texts.extend(p for _, p in DISTANCE_VAGUE)
    texts.extend(CLOSINGS)
    texts.extend(OPENINGS)
    texts.extend(GROUP_PHRASES)
    texts.append("The visitors {actions}. and")
    texts.extend(PLACE_LETTERS)
    return set(words(" ".join(texts)))


def words(text: str) -> list[str]:
    """Lower-case words of a text, without numbers, placeholders or punctuation."""
    text = re.sub(r"\{[a-z_]+\}", " ", text)
    return re.findall(r"[a-z']+", text.lower())


OPENINGS = ("{sign} reports from {place} {time}.", "{sign}, {place}, {time}.")
GROUP_PHRASES = (
    "A lone visitor met {animal}.",
    "A party of {n} visitors met {animal}.",
    "A school group of {n} met {animal}.",
)


@dataclass
class Report:
    """The true coding of one report and the facts its narrative states."""

    report_id: str
    species: int
    behaviour: int
    distance: int
    distance_stated: bool
    severity: int
    time_of_day: str
    group_size: int
    temperature: int | None
    fahrenheit: bool
    food: int
    actions: tuple[int, ...]
    spray: int | None
    narrative: str = ""

    def values(self) -> dict[str, object]:
        """The true codes, in the sheet's form (multi-select as ``"1;3"``)."""
        return {
            "species": self.species,
            "behaviour": self.behaviour,
            "visitor_distance_m": self.distance,
            "severity": self.severity,
            "time_of_day": self.time_of_day,
            "visitor_group_size": self.group_size,
            "temperature_c": 99 if self.temperature is None else self.temperature,
            "food_present": self.food,
            "actions": join_codes(self.actions),
            "spray_worked": self.spray,
        }


def join_codes(codes: tuple[int, ...]) -> object:
    """A multi-select cell: one code stays a number (as a spreadsheet stores it), several a text."""
    if not codes:
        return None
    if len(codes) == 1:
        return codes[0]
    return ";".join(str(c) for c in sorted(codes))


def choice(rng: np.random.Generator, options: tuple | list) -> object:
    return options[int(rng.integers(len(options)))]


def make_report(rng: np.random.Generator, number: int) -> Report:
    species = int(
        rng.choice([1, 2, 3, 4, 5, 6, 7, 99], p=[0.27, 0.22, 0.06, 0.14, 0.12, 0.10, 0.06, 0.03])
    )
    behaviour = int(rng.choice([1, 2, 3, 4, 5], p=[0.20, 0.34, 0.26, 0.15, 0.05]))
    if behaviour == 5:
        distance = int(rng.choice([0, 0, 1, 2]))
    elif behaviour == 4:
        distance = int(np.clip(round(rng.lognormal(np.log(12), 0.5)), 2, 60))
    else:
        distance = int(np.clip(round(rng.lognormal(np.log(45), 0.8)), 3, 400))
    distance_stated = bool(rng.random() < 0.55)
    if distance_stated:
        distance = int(5 * round(distance / 5)) if distance > 10 else distance
    severity = {
        1: lambda: 0,
        2: lambda: int(rng.choice([0, 1], p=[0.9, 0.1])),
        3: lambda: int(rng.choice([0, 1], p=[0.6, 0.4])),
        4: lambda: int(rng.choice([0, 1, 2], p=[0.35, 0.5, 0.15])),
        5: lambda: int(rng.choice([1, 2, 3], p=[0.1, 0.5, 0.4])),
    }[behaviour]()
    time_of_day = str(rng.choice(["dawn", "day", "dusk", "night"], p=[0.15, 0.55, 0.2, 0.1]))
    if rng.random() < 0.08:
        time_of_day = "unknown"
    if rng.random() < 0.06:
        group_size = int(rng.integers(15, 41))
    else:
        group_size = 1 + int(rng.poisson(1.8))
    temperature: int | None = None
    fahrenheit = False
    if rng.random() < 0.7:
        temperature = int(np.clip(round(rng.normal(13, 9)), -15, 34))
        fahrenheit = bool(rng.random() < 0.25)
    food = 1 if rng.random() < 0.05 else 2
    actions: set[int] = set()
    if rng.random() < 0.7:
        actions.add(1)
    if rng.random() < (0.45 if behaviour >= 3 else 0.15):
        actions.add(2)
    if species in (1, 3, 6) and behaviour >= 3 and rng.random() < 0.6:
        actions.add(3)
    if rng.random() < (0.15 if behaviour >= 3 else 0.04):
        actions.add(4)
    if rng.random() < 0.07:
        actions.add(5)
    if rng.random() < 0.45:
        actions.add(6)
    if not actions:
        actions.add(1)
    spray = int(rng.choice([1, 2, 3], p=[0.45, 0.35, 0.2])) if 3 in actions else None
    report = Report(
        report_id=f"ENC-{number:03d}",
        species=species,
        behaviour=behaviour,
        distance=distance,
        distance_stated=distance_stated,
        severity=severity,
        time_of_day=time_of_day,
        group_size=group_size,
        temperature=temperature,
        fahrenheit=fahrenheit,
        food=food,
        actions=tuple(sorted(actions)),
        spray=spray,
    )
    report.narrative = narrative(rng, report)
    return report


def narrative(rng: np.random.Generator, r: Report) -> str:
    """A short invented report text built from the fragment lists above."""
    place = str(choice(rng, PLACES)).format(
        n=int(rng.integers(1, 40)), letter=PLACE_LETTERS[int(rng.integers(len(PLACE_LETTERS)))]
    )
    time = str(choice(rng, TIME_PHRASES[r.time_of_day]))
    opening = str(choice(rng, OPENINGS)).format(
        sign=choice(rng, CALL_SIGNS), place=place, time=time
    )
    opening = opening.replace(" .", ".").replace(", .", ".")
    animal = choice(rng, SPECIES_PHRASES[r.species])
    if r.group_size == 1:
        group = GROUP_PHRASES[0].format(animal=animal)
    elif r.group_size >= 15:
        group = GROUP_PHRASES[2].format(n=r.group_size, animal=animal)
    else:
        group = GROUP_PHRASES[1].format(n=r.group_size, animal=animal)
    parts = [opening, group]
    parts.append(
        str(choice(rng, BEHAVIOUR_PHRASES[r.behaviour])).format(warning=WARNINGS[r.species])
    )
    if r.distance_stated:
        parts.append(DISTANCE_EXACT.format(d=r.distance))
    else:
        parts.append(next(p for limit, p in DISTANCE_VAGUE if r.distance <= limit))
    acts = [ACTION_PHRASES[a] for a in r.actions]
    acts_text = acts[0] if len(acts) == 1 else ", ".join(acts[:-1]) + " and " + acts[-1]
    parts.append(f"The visitors {acts_text}.")
    if r.spray is not None:
        parts.append(str(choice(rng, SPRAY_PHRASES[r.spray])))
    parts.append(str(choice(rng, SEVERITY_PHRASES[r.severity])))
    if r.temperature is not None:
        if r.fahrenheit:
            parts.append(TEMPERATURE_F.format(f=round(r.temperature * 9 / 5 + 32)))
        else:
            parts.append(TEMPERATURE_C.format(t=r.temperature))
    parts.append(str(choice(rng, FOOD_PHRASES[r.food])))
    parts.append(str(choice(rng, CLOSINGS)))
    return " ".join(p for p in parts if p)


# ---------------------------------------------------------------------------------------------
# Coders
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Habits:
    """How one coder departs from the true coding (probabilities per unit)."""

    severity_shift: int = 0  # -1 strict, +1 lenient
    severity_shift_p: float = 0.0
    behaviour_confusion: float = 0.1  # move to a neighbouring category
    behaviour_bias: int = 0  # direction preferred when confused (0 = either)
    miss_minor_actions: float = 0.03  # leave out 2 (shouted) and 6 (reported)
    distance_sigma: float = 0.15  # log-scale noise of estimates when the report gives no figure
    distance_round: int = 5
    species_error: float = 0.02
    time_confusion: float = 0.03
    temperature_slip: float = 0.05  # off by one or two degrees (conversion, typing)
    food_miss: float = 0.2  # misses a stated "yes"
    food_false: float = 0.01  # codes "yes" when the report says nothing of food
    spray_disagree: float = 0.35
    group_slip: float = 0.03
    cannot_code: float = 0.015  # an occasional 99 on species, behaviour or severity
    skips: int = 0
    extra: dict[str, float] = field(default_factory=dict)


HABITS: dict[str, Habits] = {
    # careful coder
    "coder_ana": Habits(behaviour_confusion=0.25, food_miss=0.15, spray_disagree=0.2),
    # strict coder: severity one step lower, leaves out minor actions, rounds distances to 10 m
    "coder_ben": Habits(
        severity_shift=-1,
        severity_shift_p=0.45,
        behaviour_confusion=0.5,
        behaviour_bias=-1,
        miss_minor_actions=0.45,
        distance_round=10,
        distance_sigma=0.25,
        food_miss=0.35,
        spray_disagree=0.3,
        skips=4,
    ),
    # lenient coder: severity one step higher, behaviour drifts upwards
    "coder_cai": Habits(
        severity_shift=1,
        severity_shift_p=0.4,
        behaviour_confusion=0.5,
        behaviour_bias=1,
        distance_sigma=0.3,
        temperature_slip=0.12,
        time_confusion=0.06,
        food_false=0.02,
        spray_disagree=0.3,
        skips=3,
    ),
}

NEIGHBOUR_TIMES = {"dawn": "day", "day": "dawn", "dusk": "night", "night": "dusk"}


def code_report(rng: np.random.Generator, r: Report, h: Habits) -> dict[str, object]:
    """One coder's values for one report (sheet form), respecting ``applies_when``."""
    out: dict[str, object] = {}
    # species
    species = r.species
    if species == 99:
        species = 99 if rng.random() < 0.7 else 1
    elif rng.random() < h.species_error:
        species = int(choice(rng, [s for s in (1, 2, 3, 4, 5, 6, 7) if s != species]))
    out["species"] = species
    # behaviour: neighbouring categories confused
    behaviour = r.behaviour
    if rng.random() < h.behaviour_confusion:
        step = (
            h.behaviour_bias if h.behaviour_bias and rng.random() < 0.75 else choice(rng, (-1, 1))
        )
        behaviour = int(np.clip(behaviour + int(step), 1, 5))
    if rng.random() < h.cannot_code:
        behaviour = 99
    out["behaviour"] = behaviour
    # distance: the stated figure, else an estimate rounded to 5 or 10 m
    if r.distance_stated:
        distance = r.distance
    else:
        estimate = max(r.distance, 1) * float(np.exp(rng.normal(0, h.distance_sigma)))
        distance = int(np.clip(h.distance_round * round(estimate / h.distance_round), 0, 500))
    out["visitor_distance_m"] = distance
    # severity: strict or lenient shift
    severity = r.severity
    if h.severity_shift and rng.random() < h.severity_shift_p:
        severity = int(np.clip(severity + h.severity_shift, 0, 3))
    elif rng.random() < 0.08:
        severity = int(np.clip(severity + int(choice(rng, (-1, 1))), 0, 3))
    if rng.random() < h.cannot_code:
        severity = 99
    out["severity"] = severity
    # time of day
    time_of_day = r.time_of_day
    if time_of_day == "unknown":
        time_of_day = "unknown" if rng.random() < 0.75 else "day"
    elif rng.random() < h.time_confusion:
        time_of_day = NEIGHBOUR_TIMES[time_of_day]
    out["time_of_day"] = time_of_day
    # group size
    group = r.group_size
    if rng.random() < h.group_slip:
        group = max(1, group + int(choice(rng, (-1, 1))))
    out["visitor_group_size"] = group
    # temperature (interval): slips in conversion and typing
    if r.temperature is None:
        out["temperature_c"] = 99
    else:
        t = r.temperature
        slip = h.temperature_slip * (2 if r.fahrenheit else 1)
        if rng.random() < slip:
            t += int(choice(rng, (-2, -1, 1, 2)))
        out["temperature_c"] = int(np.clip(t, -20, 40))
    # food present: rare yes, sometimes missed
    if r.food == 1:
        out["food_present"] = 2 if rng.random() < h.food_miss else 1
    else:
        out["food_present"] = 1 if rng.random() < h.food_false else 2
    # actions: the strict coder leaves out minor actions
    actions = {a for a in r.actions if not (a in (2, 6) and rng.random() < h.miss_minor_actions)}
    if rng.random() < 0.03:
        actions.add(int(choice(rng, (1, 2, 6))))
    if not actions:
        actions = {1}
    out["actions"] = join_codes(tuple(sorted(actions)))
    # spray worked: only when this coder's actions include 3 (applies_when)
    if 3 in actions:
        spray = r.spray if r.spray is not None else 99
        if r.spray is not None and rng.random() < h.spray_disagree:
            spray = int(choice(rng, [s for s in (1, 2, 3) if s != r.spray]))
        out["spray_worked"] = spray
    else:
        out["spray_worked"] = None
    return out


# ---------------------------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------------------------
def deterministic_xlsx(wb: openpyxl.Workbook) -> bytes:
    """The workbook's bytes with fixed document and zip time stamps (byte-identical re-runs)."""
    wb.properties.creator = "coderel demo generator"
    wb.properties.created = FIXED_TIME
    buffer = io.BytesIO()
    wb.save(buffer)
    stamp = FIXED_TIME.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    out = io.BytesIO()
    with (
        zipfile.ZipFile(io.BytesIO(buffer.getvalue())) as src,
        zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst,
    ):
        for info in src.infolist():
            data = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                data = re.sub(
                    rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)",
                    rb"\g<1>" + stamp + rb"\g<2>",
                    data,
                )
            entry = zipfile.ZipInfo(info.filename, date_time=FIXED_TIME.timetuple()[:6])
            entry.compress_type = zipfile.ZIP_DEFLATED
            dst.writestr(entry, data)
    return out.getvalue()


def new_sheet() -> tuple[openpyxl.Workbook, openpyxl.worksheet.worksheet.Worksheet]:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = SHEET
    ws.append(list(HEADER))
    ws.freeze_panes = "C2"
    widths = {UNIT: 11, TEXT: 60}
    for i, name in enumerate(HEADER, start=1):
        ws.column_dimensions[get_column_letter(i)].width = widths.get(name, 14)
    return wb, ws


def sheet_row(report: Report, values: dict[str, object]) -> list[object]:
    return [report.report_id, neutralise(report.narrative), *(values[v] for v in VARIABLES)]


def write_clean_sheets(
    out: Path, reports: list[Report], codings: dict[str, dict[str, dict[str, object]]]
) -> None:
    for coder in CODERS:
        wb, ws = new_sheet()
        for r in reports:
            if r.report_id in codings[coder]:
                ws.append(sheet_row(r, codings[coder][r.report_id]))
        write_bytes(out / "sheets" / f"{coder}.xlsx", deterministic_xlsx(wb))


# Deliberate problems of the messy sheet: (row index into its rows, column, value, code, note).
# Row indices count data rows from 0; the sheet row is index + 2.
COL = {name: get_column_letter(i) for i, name in enumerate(HEADER, start=1)}
MESSY_ROWS = 20


def write_messy_sheet(out: Path, reports: list[Report]) -> list[dict[str, str]]:
    """Write ``messy/coder_dee.xlsx`` with known problems; return the expected-problem rows."""
    wb, ws = new_sheet()
    # The fourth coder codes like the truth, on reports without missing codes, so that the only
    # problems are the deliberate ones below (and the applies_when rule holds everywhere else).
    complete = [r for r in reports if 99 not in r.values().values() and r.time_of_day != "unknown"]
    rows = [sheet_row(r, r.values()) for r in complete[:MESSY_ROWS]]
    # Duplicate unit: the fifth row's report is entered a second time as row index 13.
    rows.insert(13, list(rows[4]))
    # Missing unit ID: a row with values but no report_id (a copy of ENC-016 with the ID deleted).
    orphan = list(rows[16])
    orphan[0] = None
    rows.insert(17, orphan)
    for row in rows:
        ws.append(row)
    expected: list[dict[str, str]] = []

    def put(index: int, name: str, value: object, code: str, note: str) -> None:
        cell = f"{COL[name]}{index + 2}"
        ws[cell] = value
        unit = ws[f"A{index + 2}"].value
        expected.append(
            {
                "file": f"{MESSY_CODER}.xlsx",
                "sheet": SHEET,
                "cell": cell,
                "unit": "" if unit is None else str(unit),
                "variable": name if name in VARIABLES else "",
                "code": code,
                "note": note,
            }
        )

    def flag(cell: str, unit: str, variable: str, code: str, note: str) -> None:
        expected.append(
            {
                "file": f"{MESSY_CODER}.xlsx",
                "sheet": SHEET,
                "cell": cell,
                "unit": unit,
                "variable": variable,
                "code": code,
                "note": note,
            }
        )

    labels = category_labels()

    def true_value(index: int, name: str) -> object:
        return rows[index][HEADER.index(name)]

    put(0, "behaviour", 7, "not-in-codebook", "behaviour has codes 1-5 and 99; 7 is not one")
    put(
        1,
        "behaviour",
        labels["behaviour"][true_value(1, "behaviour")],
        "normalised-label",
        "the category's label typed instead of its code",
    )
    put(
        2,
        "visitor_group_size",
        str(true_value(2, "visitor_group_size")),
        "normalised-number",
        "number stored as text",
    )
    put(
        3,
        "time_of_day",
        f"{true_value(3, 'time_of_day')}  ",
        "normalised-space",
        "code followed by two spaces",
    )
    put(
        5,
        "actions",
        dt.datetime(2026, 3, 1),
        "date-converted",
        "'1-3' turned into a date by a spreadsheet",
    )
    put(6, "visitor_distance_m", "#N/A", "spreadsheet-error", "error value #N/A (data type e)")
    fahrenheit = round(int(true_value(7, "temperature_c")) * 9 / 5 + 32)
    put(
        7,
        "temperature_c",
        f"=ROUND(({fahrenheit}-32)*5/9,0)",
        "formula-no-value",
        "Fahrenheit conversion typed as a formula, never calculated",
    )
    put(8, "visitor_distance_m", 750, "out-of-range", "range is 0-500 m")
    put(9, "visitor_group_size", "a few", "not-a-number", "text in a ratio variable")
    # should-not-apply: a row whose actions lack 3 gets a spray_worked value
    target = next(
        i for i in (10, 12, 14, 15, 16) if "3" not in str(rows[i][HEADER.index("actions")])
    )
    put(target, "spray_worked", 1, "should-not-apply", "spray_worked given although actions lack 3")
    # duplicate unit (row 15 = index 13)
    flag(f"A{13 + 2}", str(rows[13][0]), "", "duplicate-unit", "second row for the same report")
    # missing unit ID (index 17)
    flag(f"A{17 + 2}", "", "", "missing-unit-id", "a row with values but no report_id")
    # hidden row
    hidden_index = 11
    ws.row_dimensions[hidden_index + 2].hidden = True
    flag(
        f"A{hidden_index + 2}",
        str(rows[hidden_index][0]),
        "",
        "hidden-row",
        "row hidden in the sheet",
    )
    # merged cells: species merged over two rows; only the top-left cell keeps its value
    merge_index = 18
    top = f"{COL['species']}{merge_index + 2}"
    bottom = f"{COL['species']}{merge_index + 3}"
    ws.merge_cells(f"{top}:{bottom}")
    flag(top, str(rows[merge_index][0]), "species", "merged-cells", f"merged range {top}:{bottom}")
    # unknown column: food_present's header typed as food_presnt (so the variable has no column)
    ws[f"{COL['food_present']}1"] = "food_presnt"
    flag(f"{COL['food_present']}1", "", "", "unknown-column", "typo of food_present")
    flag("", "", "food_present", "missing-column", "consequence of the typo above")
    write_bytes(out / "messy" / f"{MESSY_CODER}.xlsx", deterministic_xlsx(wb))
    expected.sort(key=lambda e: (_row_of(e["cell"]), e["cell"]))
    return expected


def category_labels() -> dict[str, dict[object, str]]:
    """Labels of each categorical variable's codes, read from the demo codebook."""
    book = yaml.safe_load(CODEBOOK.read_text(encoding="utf-8"))
    return {
        v["name"]: {c["code"]: c["label"] for c in v.get("categories", [])}
        for v in book["variables"]
    }


def _row_of(cell: str) -> int:
    digits = "".join(ch for ch in cell if ch.isdigit())
    return int(digits) if digits else 0


def write_expected(out: Path, expected: list[dict[str, str]]) -> None:
    buffer = io.StringIO()
    writer = csv.DictWriter(
        buffer,
        fieldnames=["file", "sheet", "cell", "unit", "variable", "code", "note"],
        lineterminator="\n",
    )
    writer.writeheader()
    writer.writerows(expected)
    write_text(out / "messy_expected_problems.csv", buffer.getvalue())


# ---------------------------------------------------------------------------------------------
# The front half of the protocol: a corpus to draw from and a pilot to plan with
# ---------------------------------------------------------------------------------------------
CORPUS_REPORTS = 1200
PILOT_REPORTS = 40
PILOT_CODERS = ("coder_ana", "coder_ben")
#: Ranger districts of the invented park and their shares of the season's reports.
DISTRICTS = (("North Fork", 0.45), ("Lakes", 0.30), ("Ridge", 0.17), ("Canyon", 0.08))


def write_protocol_files(
    out: Path, reports: list[Report], codings: dict[str, dict[str, dict[str, object]]], seed: int
) -> dict[str, int]:
    """``corpus.csv``: next season's 1,200 report IDs with their district (the population that
    ``coderel draw`` samples); ``pilot/``: the first 40 reports as coded by two coders (csv), the
    pilot that ``coderel plan --pilot`` reads."""
    rng = np.random.default_rng([seed, 2])
    names = [d for d, _ in DISTRICTS]
    shares = [p for _, p in DISTRICTS]
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([UNIT, "district"])
    for i in range(1, CORPUS_REPORTS + 1):
        writer.writerow([f"QH-{i:04d}", names[int(rng.choice(len(names), p=shares))]])
    write_text(out / "corpus.csv", buffer.getvalue())
    pilot = reports[:PILOT_REPORTS]
    for coder in PILOT_CODERS:
        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(list(HEADER))
        for r in pilot:
            if r.report_id in codings[coder]:
                values = codings[coder][r.report_id]
                writer.writerow(
                    [r.report_id, neutralise(r.narrative)]
                    + ["" if values[v] is None else values[v] for v in VARIABLES]
                )
        write_text(out / "pilot" / f"{coder}.csv", buffer.getvalue())
    return {"corpus": CORPUS_REPORTS, "pilot": len(pilot)}


# ---------------------------------------------------------------------------------------------
# Stability: coder_ana recodes a subset two weeks later (test-retest)
# ---------------------------------------------------------------------------------------------
RETEST_CODER = "coder_ana"
RETEST_UNITS = 40
RETEST_FIRST = "2026-03-03"
RETEST_SECOND = "2026-03-17"
#: Chance that a recoded value is the coder's first value (else a fresh coding of the report).
RETEST_KEEP = 0.5


def write_retest(
    out: Path, reports: list[Report], first: dict[str, dict[str, object]], seed: int
) -> int:
    """``retest/coder_ana.csv``: a long table (unit, coder, variable, value, occasion) holding
    coder_ana's first coding of 40 reports (dated 2026-03-03) and her recoding of them two weeks
    later (2026-03-17). Its own seeded generator leaves the other demo files unchanged."""
    rng = np.random.default_rng([seed, 13])
    by_id = {r.report_id: r for r in reports}
    ids = sorted(rng.choice(sorted(first), size=RETEST_UNITS, replace=False).tolist())
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["unit", "coder", "variable", "value", "occasion"])
    rows: list[tuple[str, str, object, str]] = []
    for unit in ids:
        before = first[unit]
        fresh = code_report(rng, by_id[unit], HABITS[RETEST_CODER])
        after = {
            name: before[name] if rng.random() < RETEST_KEEP else fresh[name]
            for name in VARIABLES
            if name not in ("actions", "spray_worked")
        }
        # spray_worked applies only with action 3: it is recoded together with actions.
        source = before if rng.random() < RETEST_KEEP else fresh
        after["actions"], after["spray_worked"] = source["actions"], source["spray_worked"]
        for name in VARIABLES:
            rows.append((unit, name, before[name], RETEST_FIRST))
        for name in VARIABLES:
            rows.append((unit, name, after[name], RETEST_SECOND))
    for unit, name, value, when in rows:
        writer.writerow([unit, RETEST_CODER, name, "" if value is None else value, when])
    write_text(out / "retest" / f"{RETEST_CODER}.csv", buffer.getvalue())
    return len(ids)


def generate(out: Path, seed: int = SEED) -> dict[str, object]:
    """Write the demo files under ``out``; return a short summary (counts only)."""
    sys.path.insert(0, str(ROOT / "scripts"))
    try:
        from demo_rounds import write_rounds
    finally:
        sys.path.remove(str(ROOT / "scripts"))

    rng = np.random.default_rng(seed)
    reports = [make_report(rng, i) for i in range(1, N_REPORTS + 1)]
    codings: dict[str, dict[str, dict[str, object]]] = {}
    for coder in CODERS:
        habits = HABITS[coder]
        skipped = set(
            rng.choice([r.report_id for r in reports], size=habits.skips, replace=False).tolist()
        )
        codings[coder] = {
            r.report_id: code_report(rng, r, habits) for r in reports if r.report_id not in skipped
        }
    write_clean_sheets(out, reports, codings)
    write_text(out / "units.txt", "".join(f"{r.report_id}\n" for r in reports))
    expected = write_messy_sheet(out, reports)
    write_expected(out, expected)
    write_protocol_files(out, reports, codings, seed)
    recoded = write_retest(out, reports, codings[RETEST_CODER], seed)
    rounds = write_rounds(sys.modules[__name__], out, seed)
    return {
        "reports": len(reports),
        "coded": {c: len(codings[c]) for c in CODERS},
        "messy_problems": len(expected),
        "recoded": recoded,
        "rounds": rounds,
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=ROOT / "demo", help="output folder")
    parser.add_argument("--seed", type=int, default=SEED)
    args = parser.parse_args(argv)
    summary = generate(args.out, args.seed)
    print(
        f"wrote {summary['reports']} reports, coded per coder {summary['coded']}, "
        f"{summary['messy_problems']} deliberate problems in the messy sheet, to {args.out}",
        file=sys.stderr,
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
