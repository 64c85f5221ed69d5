"""The reconciled dataset: statuses, rules, decisions, spreading, safe and reproducible writing.

Expected values are worked out by hand from the rules in coderel/merge.py (consensus of all
coders, majority of more than half, adjudication of the rest: common practice, no source); the
csv/xlsx checks follow the OWASP guidance on CSV injection (a leading ``'`` before ``= + - @``,
tab or carriage return).
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from openpyxl import load_workbook

from coderel.adjudicate import Decision, Decisions
from coderel.audit import append_audit, audit_path, read_audit
from coderel.codebook import Category, Codebook, Condition, MissingCode, Variable
from coderel.codings import Codings, SourceFile
from coderel.merge import STATUSES, merge, spread_multiselect, write_merged

CB = Codebook(
    title="merge test (invented)",
    version="3.1",
    unit="report_id",
    variables=(
        Variable(
            "species",
            "nominal",
            categories=(Category(1, "Bear"), Category(2, "Elk"), Category(3, "Cougar")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable(
            "actions",
            "nominal",
            multiple=True,
            categories=(Category(1, "Backed away"), Category(2, "Shouted"), Category(3, "Spray")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable(
            "spray_worked",
            "nominal",
            categories=(Category(1, "Yes"), Category(2, "No")),
            applies_when=Condition("actions", (3,)),
        ),
        Variable("distance_m", "ratio", range=(0.0, 500.0), missing=(MissingCode(999),)),
    ),
    text_columns=("narrative",),
)
NAMES = [v.name for v in CB.variables]


def make(rows: dict[str, dict[str, tuple]], texts: list[dict] | None = None) -> Codings:
    """rows: coder -> unit -> (species, actions, spray_worked, distance_m); 99/999 are missing."""
    recs = []
    for coder, units in rows.items():
        for unit, values in units.items():
            for name, value in zip(NAMES, values, strict=True):
                missing = value if value in (99, 999) else None
                recs.append(
                    {
                        "unit": unit,
                        "coder": coder,
                        "variable": name,
                        "value": None if missing is not None else value,
                        "missing": missing,
                    }
                )
    text_frame = pd.DataFrame(texts or [], columns=["unit", "coder", "column", "text"])
    return Codings.from_records(
        CB, recs, texts=text_frame, sources=(SourceFile("sheets/a.xlsx", "ab" * 32, 10),)
    )


def status(result, unit, name):
    row = result.frame.set_index("report_id").loc[unit]
    return row[f"{name}_status"], row[name]


def test_statuses_under_unanimous_rule():
    c = make(
        {
            "ann": {
                "R1": (1, (1, 3), 1, 10.0),
                "R2": (1, (1,), None, 999),
                "R3": (2, (2,), None, 5.0),
            },
            "bob": {"R1": (1, (1, 3), 2, 10.0), "R2": (99, (1,), None, 999)},
        }
    )
    r = merge(c)
    # a variable with missing codes gets <variable>_missing (issue 9, item 8)
    missing = {v.name for v in CB.variables if v.missing_codes}
    expected = ["report_id"]
    for name in ("species", "actions", "spray_worked", "distance_m"):
        expected += [name, f"{name}_status"] + ([f"{name}_missing"] if name in missing else [])
    assert list(r.frame.columns) == expected
    assert status(r, "R1", "species") == ("agreed", 1)
    assert status(r, "R1", "actions") == ("agreed", "1;3")
    assert status(r, "R1", "spray_worked")[0] == "unresolved"
    assert pd.isna(status(r, "R1", "spray_worked")[1])
    # a missing code against a code is a disagreement; two missing codes agree
    assert status(r, "R2", "species")[0] == "unresolved"
    assert status(r, "R2", "distance_m")[0] == "agreed"
    assert pd.isna(status(r, "R2", "distance_m")[1])  # a missing code is a missing value
    assert r.frame.set_index("report_id").loc["R2", "distance_m_missing"] == 999
    assert status(r, "R2", "spray_worked")[0] == "not_applicable"
    assert status(r, "R3", "species") == ("single", 2)
    assert r.unresolved == (("R1", "spray_worked"), ("R2", "species"))
    assert r.status_counts["species"] == {
        "agreed": 1,
        "within_tolerance": 0,
        "majority": 0,
        "adjudicated": 0,
        "single": 1,
        "unresolved": 1,
        "not_applicable": 0,
    }


def test_majority_rule_and_ties_left_unresolved():
    three = make(
        {
            "ann": {"R1": (1, (1,), None, 5.0), "R2": (1, (3,), 1, 5.0)},
            "bob": {"R1": (1, (2,), None, 6.0), "R2": (2, (1,), None, None)},
            "cai": {"R1": (2, (3,), 1, 7.0), "R2": (3, (1,), None, None)},
        }
    )
    r = merge(three, rule="majority")
    assert status(r, "R1", "species") == ("majority", 1)  # 2 of 3
    assert status(r, "R1", "actions")[0] == "unresolved"  # 1:1:1
    assert status(r, "R1", "distance_m")[0] == "unresolved"
    assert status(r, "R2", "species")[0] == "unresolved"
    # two coders find spray_worked does not apply: the majority says "not applicable"
    st_, value = status(r, "R2", "spray_worked")
    assert st_ == "majority"
    assert pd.isna(value)
    # two blanks are no majority value
    assert status(r, "R2", "distance_m")[0] == "unresolved"
    # the same data under the unanimous rule has no majority status at all
    assert merge(three).status_counts["species"]["majority"] == 0

    four = make(
        {
            "ann": {"R1": (1, (1,), None, 5.0)},
            "bob": {"R1": (1, (1,), None, 5.0)},
            "cai": {"R1": (2, (1,), None, 5.0)},
            "dan": {"R1": (2, (1,), None, 5.0)},
        }
    )
    assert status(merge(four, rule="majority"), "R1", "species")[0] == "unresolved"  # 2:2 tie


def decision(value, token, text, values=None, cell="F2"):
    return Decision(value, token, text, "lead ranger", "read twice", cell, values)


def test_decisions_override_and_stale_ones_are_not_used():
    c = make(
        {
            "ann": {"R1": (1, (1, 3), 1, 10.0), "R2": (1, (1,), None, 4.0)},
            "bob": {"R1": (2, (1,), None, 12.0), "R2": (1, (1,), None, 4.0)},
        }
    )
    decisions = Decisions(
        {
            ("R1", "species"): decision(
                2, ("value", 2), "2 = Elk", {"ann": "1 = Bear", "bob": "2 = Elk"}
            ),
            ("R1", "actions"): decision((1, 3), ("value", (1, 3)), "1;3"),
            ("R1", "spray_worked"): decision(None, ("na", None), "not applicable"),
            # the coders' values were different when this was decided
            ("R1", "distance_m"): decision(11.0, ("value", 11.0), "11", {"ann": "9", "bob": "12"}),
            ("R2", "species"): decision(3, ("value", 3), "3"),  # coders agree now
            ("R9", "species"): decision(3, ("value", 3), "3"),  # unit not in the data
        }
    )
    r = merge(c, decisions)
    assert status(r, "R1", "species") == ("adjudicated", 2)
    assert status(r, "R1", "actions") == ("adjudicated", "1;3")
    st_, value = status(r, "R1", "spray_worked")
    assert st_ == "adjudicated"
    assert pd.isna(value)
    assert status(r, "R1", "distance_m")[0] == "unresolved"
    assert status(r, "R2", "species") == ("agreed", 1)
    stale = [(p.code, p.unit, p.variable) for p in r.problems if p.code == "stale-decision"]
    # The decisions keep spray (3) in R1's actions yet call spray_worked not applicable: the
    # merged row breaks the skip logic, and the merge says so.
    assert [(p.code, p.unit, p.variable) for p in r.problems if p.code != "stale-decision"] == [
        ("merged-skip-logic", "R1", "spray_worked")
    ]
    assert stale == [
        ("stale-decision", "R1", "distance_m"),
        ("stale-decision", "R2", "species"),
        ("stale-decision", "R9", "species"),
    ]
    assert [(a.unit, a.variable, a.decision) for a in r.adjudicated] == [
        ("R1", "species", "2 = Elk"),
        ("R1", "actions", "1;3"),
        ("R1", "spray_worked", "not applicable"),
    ]
    assert r.adjudicated[0].values == {"ann": "1 = Bear", "bob": "2 = Elk"}
    assert r.adjudicated[0].adjudicator == "lead ranger"


codes = st.sampled_from([1, 2, 3, 99, None])


@settings(max_examples=60, deadline=None)
@given(
    st.dictionaries(
        st.sampled_from(["ann", "bob", "cai"]),
        st.dictionaries(
            st.sampled_from([f"R{i}" for i in range(1, 9)]),
            st.tuples(
                codes,
                st.sampled_from([(1,), (3,), (1, 3), 99]),
                st.sampled_from([1, 2, None]),
                st.sampled_from([5.0, 6.0, 999, None]),
            ),
            min_size=1,
        ),
        min_size=1,
    ),
    st.sampled_from(["unanimous", "majority"]),
)
def test_every_unit_once_and_counts_add_up(rows, rule):
    c = make(rows)
    r = merge(c, rule=rule)
    coded = {u for units in rows.values() for u in units}
    assert sorted(r.frame["report_id"]) == sorted(coded)
    assert r.frame["report_id"].is_unique
    for name in NAMES:
        counts = r.status_counts[name]
        assert list(counts) == list(STATUSES)
        assert sum(counts.values()) == len(coded)
        assert (
            counts
            == r.frame[f"{name}_status"].value_counts().reindex(STATUSES, fill_value=0).to_dict()
        )
    assert sum(r.totals().values()) == r.cells == len(coded) * len(NAMES)
    assert len(r.unresolved) == r.totals()["unresolved"]
    unresolved = r.frame[[f"{n}_status" for n in NAMES]].eq("unresolved").to_numpy()
    empty = r.frame[NAMES].isna().to_numpy()
    assert (empty | ~unresolved).all()  # an unresolved cell is always empty
    if rule == "unanimous":
        assert r.totals()["majority"] == 0


def test_spread_gives_zero_one_columns():
    c = make(
        {
            "ann": {
                "R1": (1, (1, 3), 1, 5.0),
                "R2": (1, 99, None, 5.0),
                "R3": (1, (1,), None, 5.0),
            },
            "bob": {
                "R1": (1, (1, 3), 1, 5.0),
                "R2": (1, 99, None, 5.0),
                "R3": (1, (2,), None, 5.0),
            },
        }
    )
    frame = spread_multiselect(merge(c).frame, CB)
    cols = list(frame.columns)
    at = cols.index("actions_missing")
    assert cols[at + 1 : at + 4] == ["actions__1", "actions__2", "actions__3"]
    by_unit = frame.set_index("report_id")
    assert by_unit.loc["R1", ["actions__1", "actions__2", "actions__3"]].tolist() == [1, 0, 1]
    assert pd.isna(by_unit.loc["R2", "actions"])
    assert by_unit.loc["R2", "actions_missing"] == 99
    assert by_unit.loc[["R2", "R3"], "actions__1"].isna().all()  # missing code, unresolved


def test_injection_neutralised_in_csv_and_xlsx_raw_in_parquet(tmp_path):
    c = make({"ann": {"=HYPERLINK(1)": (1, (1,), None, 5.0), "@R2": (2, (1,), None, 5.0)}})
    r = merge(c)
    write_merged(r, tmp_path / "m.csv")
    write_merged(r, tmp_path / "m.xlsx")
    write_merged(r, tmp_path / "m.parquet")
    text = (tmp_path / "m.csv").read_text()
    assert "'=HYPERLINK(1)" in text
    assert "'@R2" in text
    assert "\n=HYPERLINK" not in text
    assert "\n@R2" not in text
    wb = load_workbook(tmp_path / "m.xlsx")
    assert wb.sheetnames == ["merged", "labels", "dictionary"]
    units = sorted(str(row[0].value) for row in wb["merged"].iter_rows(min_row=2))
    assert units == ["'=HYPERLINK(1)", "'@R2"]
    assert all(cell.data_type != "f" for row in wb["merged"].iter_rows() for cell in row)
    back = pd.read_parquet(tmp_path / "m.parquet")
    assert sorted(back["report_id"]) == ["=HYPERLINK(1)", "@R2"]


def test_xlsx_labels_and_dictionary(tmp_path):
    c = make({"ann": {"R1": (3, (1, 3), 2, 999)}, "bob": {"R1": (3, (1, 3), 2, 999)}})
    write_merged(merge(c), tmp_path / "m.xlsx", spread=True)
    wb = load_workbook(tmp_path / "m.xlsx")
    header = [c.value for c in wb["labels"][1]]
    row = dict(zip(header, [c.value for c in wb["labels"][2]], strict=True))
    assert row["species"] == "Cougar"
    assert row["actions"] == "Backed away; Spray"
    assert row["spray_worked"] == "No"
    assert row["distance_m"] is None
    assert row["distance_m_missing"] == "cannot be coded"
    assert row["actions__3"] == 1
    dictionary = pd.DataFrame(wb["dictionary"].values)
    dictionary.columns = dictionary.iloc[0]
    dictionary = dictionary.iloc[1:]
    assert set(dictionary["column"]) >= {"report_id", "species", "species_status", "actions__2"}
    species = dictionary[(dictionary["column"] == "species") & (dictionary["code"] == "3")]
    assert species["meaning"].tolist() == ["Cougar"]


@pytest.mark.parametrize("suffix", ["csv", "xlsx", "parquet"])
def test_writing_twice_gives_identical_bytes(tmp_path, suffix):
    c = make(
        {
            "ann": {"R1": (1, (1, 3), 1, 10.5), "R2": (2, (2,), None, 4.0)},
            "bob": {"R1": (2, (1, 3), 1, 10.5), "R2": (2, (2,), None, 4.0)},
        }
    )
    write_merged(merge(c), tmp_path / f"a.{suffix}", spread=True)
    write_merged(merge(c), tmp_path / f"b.{suffix}", spread=True)
    assert (tmp_path / f"a.{suffix}").read_bytes() == (tmp_path / f"b.{suffix}").read_bytes()


def test_audit_log_appends_one_line_per_merge_without_narrative(tmp_path):
    secret = "the visitor Jo Example was bitten near the lake"
    c = make(
        {"ann": {"R1": (1, (1,), None, 5.0)}, "bob": {"R1": (2, (1,), None, 5.0)}},
        texts=[{"unit": "R1", "coder": "ann", "column": "narrative", "text": secret}],
    )
    decisions = Decisions({("R1", "species"): decision(2, ("value", 2), "2 = Elk")})
    r = merge(c, decisions)
    out = tmp_path / "merged.csv"
    cb_file = tmp_path / "cb.yaml"
    cb_file.write_text("title: x\n")
    write_merged(r, out)
    log = append_audit(r, out, codebook_path=cb_file)
    append_audit(r, out, codebook_path=cb_file)
    assert log == audit_path(out) == tmp_path / "merged.csv.audit.jsonl"
    lines = log.read_text().splitlines()
    assert len(lines) == 2
    record = json.loads(lines[0])
    assert record == read_audit(out)[0]
    assert record["rule"] == "unanimous"
    assert record["inputs"] == [{"path": "sheets/a.xlsx", "sha256": "ab" * 32, "size": 10}]
    assert record["codebook"]["version"] == "3.1"
    assert len(record["codebook"]["sha256"]) == 64
    assert record["adjudicated"] == [
        {
            "unit": "R1",
            "variable": "species",
            "coders": {"ann": "1 = Bear", "bob": "2 = Elk"},
            "decision": "2 = Elk",
            "value": 2,
            "adjudicator": "lead ranger",
            "note": "read twice",
        }
    ]
    assert record["time"].endswith("Z")
    assert secret not in log.read_text()
    assert record["time"][:10] not in out.read_text()  # the time lives in the log only


def test_text_missing_code_beside_number_codes(tmp_path):
    cb = Codebook(
        title="mixed codes (invented)",
        variables=(
            Variable(
                "light",
                "nominal",
                categories=(Category(1, "Day"), Category(2, "Night")),
                missing=(MissingCode("unknown", "not stated"),),
            ),
        ),
    )
    recs = [
        {"unit": "R1", "coder": "ann", "variable": "light", "value": 1},
        {"unit": "R1", "coder": "bob", "variable": "light", "value": 1},
        {"unit": "R2", "coder": "ann", "variable": "light", "value": None, "missing": "unknown"},
        {"unit": "R2", "coder": "bob", "variable": "light", "value": None, "missing": "unknown"},
    ]
    r = merge(Codings.from_records(cb, recs))
    # the missing code goes to light_missing (text, as the codebook's missing code is text)
    assert r.frame["light"].isna().tolist() == [False, True]
    assert r.frame["light"].iloc[0] == 1
    assert r.frame["light_missing"].isna().tolist() == [True, False]
    assert r.frame["light_missing"].iloc[1] == "unknown"
    assert r.frame["light_status"].tolist() == ["agreed", "agreed"]
    write_merged(r, tmp_path / "m.parquet")
    assert pd.read_parquet(tmp_path / "m.parquet")["light_missing"].iloc[1] == "unknown"


@settings(max_examples=40, deadline=None)
@given(
    st.lists(
        st.tuples(codes, st.sampled_from([(1,), (1, 3)]), st.sampled_from([1, 2, None])),
        min_size=1,
        max_size=6,
    ),
    st.lists(
        st.tuples(codes, st.sampled_from([(1,), (1, 3)]), st.sampled_from([1, 2, None])),
        min_size=6,
        max_size=6,
    ),
    st.permutations(["ann", "bob", "cai"]),
    st.sampled_from(["unanimous", "majority"]),
)
def test_merge_does_not_depend_on_coder_names_or_row_order(first, second, names, rule):
    """Property (house style 8): renaming coders or shuffling rows leaves the dataset unchanged."""
    rows = {
        "ann": {f"R{i}": (*v, 5.0) for i, v in enumerate(first)},
        "bob": {f"R{i}": (*v, 5.0) for i, v in enumerate(second)},
        "cai": {f"R{i}": (*v, 5.0) for i, v in enumerate(reversed(second))},
    }
    base = merge(make(rows), rule=rule)
    renamed = {new: rows[old] for old, new in zip(["ann", "bob", "cai"], names, strict=True)}
    shuffled = make(renamed)
    shuffled = type(shuffled).from_records(CB, shuffled.frame.iloc[::-1].reset_index(drop=True))
    other = merge(shuffled, rule=rule)
    pd.testing.assert_frame_equal(base.frame, other.frame)
    assert base.status_counts == other.status_counts


def test_a_single_coder_gives_single_or_not_applicable():
    r = merge(make({"ann": {"R1": (1, (1,), None, 5.0), "R2": (2, (3,), 1, None)}}))
    assert r.frame["species_status"].tolist() == ["single", "single"]
    assert r.frame["spray_worked_status"].tolist() == ["not_applicable", "single"]
    assert r.frame["distance_m_status"].tolist() == ["single", "unresolved"]  # a blank


def test_merged_row_that_breaks_the_skip_logic_is_reported():
    # Both coders used spray (3) and said it worked; the adjudicator then drops spray from R1's
    # actions but the agreed spray_worked value stays: the final row contradicts the codebook's
    # applies_when, which each coder's own sheet obeyed.
    c = make(
        {
            "ann": {"R1": (1, (1, 3), 1, 10.0), "R2": (1, (3,), 1, 4.0)},
            "bob": {"R1": (1, (2, 3), 1, 10.0), "R2": (1, (3,), 1, 4.0)},
        }
    )
    decisions = Decisions({("R1", "actions"): decision((1,), ("value", (1,)), "1")})
    r = merge(c, decisions)
    assert status(r, "R1", "actions") == ("adjudicated", "1")
    assert status(r, "R1", "spray_worked") == ("agreed", 1)
    found = [(p.code, p.severity, p.unit, p.variable) for p in r.problems]
    assert found == [("merged-skip-logic", "warning", "R1", "spray_worked")]
    assert "is not one of 3" in next(iter(r.problems)).message
