"""``coderel draw``: proportional allocation, reproducibility, bad input.

Proportional allocation: Cochran, W. G. (1977). *Sampling Techniques* (3rd ed.). Wiley, section
5.5: stratum h of N_h units out of N gets n_h = n N_h / N. Rounding by largest remainders keeps
every n_h within one unit of that exact share and the total at n (checked as properties).
"""

from __future__ import annotations

import csv
import json
import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from coderel.cli import app
from coderel.errors import UsageError
from coderel.protocol.draw import draw_units, proportional_allocation

runner = CliRunner()


@settings(max_examples=300, deadline=None)
@given(
    sizes=st.lists(st.integers(min_value=1, max_value=500), min_size=1, max_size=12),
    data=st.data(),
)
def test_allocation_within_one_unit_of_exact_share_and_total_right(sizes, data):
    total = sum(sizes)
    n = data.draw(st.integers(min_value=0, max_value=total))
    counts = proportional_allocation(sizes, n)
    assert sum(counts) == n
    for count, size in zip(counts, sizes, strict=True):
        exact = n * size / total  # Cochran (1977), 5.5: n_h = n N_h / N
        assert abs(count - exact) < 1
        assert 0 <= count <= size


@settings(max_examples=200, deadline=None)
@given(
    sizes=st.lists(st.integers(min_value=5, max_value=300), min_size=1, max_size=8),
    minimum=st.integers(min_value=0, max_value=5),
    data=st.data(),
)
def test_allocation_with_minimum_meets_it_and_keeps_total(sizes, minimum, data):
    total = sum(sizes)
    n = data.draw(st.integers(min_value=minimum * len(sizes), max_value=total))
    counts = proportional_allocation(sizes, n, minimum)
    assert sum(counts) == n
    assert all(minimum <= c <= s for c, s in zip(counts, sizes, strict=True))


def test_allocation_small_cases():
    # Exact shares 5, 3, 2: no rounding needed.
    assert proportional_allocation([50, 30, 20], 10) == [5, 3, 2]
    # Shares 3.33 each: the one unit left over goes to the first stratum (ties in order).
    assert proportional_allocation([5, 5, 5], 10) == [4, 3, 3]
    # Shares 9.5 and 0.5: with a minimum of 2 the small stratum gets 2, the other the rest.
    assert proportional_allocation([95, 5], 10, 2) == [8, 2]


def test_draw_depends_on_seed_and_id_set_only():
    ids = [f"U{i:03d}" for i in range(200)]
    shuffled = ids[:]
    random.Random(1).shuffle(shuffled)
    a = draw_units(ids, 30, 9)
    b = draw_units(shuffled, 30, 9)
    assert a.units == b.units
    assert len(set(a.units)) == 30
    assert set(a.units) <= set(ids)
    assert draw_units(ids, 30, 10).units != a.units
    strata = {u: ("A" if i % 3 else "B",) for i, u in enumerate(ids)}
    sa = draw_units(ids, 30, 9, strata=[strata[u] for u in ids], strata_columns=["g"])
    sb = draw_units(shuffled, 30, 9, strata=[strata[u] for u in shuffled], strata_columns=["g"])
    assert sa.units == sb.units
    assert [s.drawn for s in sa.strata] == [20, 10]  # 133 and 67 of 200: shares 19.95, 10.05


def _write_population(path, rows):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["report_id", "district"])
        w.writerows(rows)


def _population(n=120):
    return [(f"R-{i:04d}", ("North", "Lakes", "Ridge")[i % 3 if i % 7 else 0]) for i in range(n)]


def _draw(tmp_path, name, rows, *extra):
    (tmp_path / name).mkdir()
    pop = tmp_path / name / "population.csv"
    _write_population(pop, rows)
    out = tmp_path / name / "reliability.txt"
    result = runner.invoke(
        app,
        ["draw", str(pop), "--id", "report_id", "--size", "25", "--seed", "42", "-o", str(out),
         *extra],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    return out, out.with_name("reliability.manifest.json")


@pytest.mark.parametrize("strata", [[], ["--strata", "district", "--min-per-stratum", "3"]])
def test_same_seed_and_id_set_in_any_order_give_identical_files(tmp_path, monkeypatch, strata):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1800000000")
    rows = _population()
    shuffled = rows[:]
    random.Random(3).shuffle(shuffled)
    list_a, man_a = _draw(tmp_path, "a", rows, *strata)
    list_b, man_b = _draw(tmp_path, "b", shuffled, *strata)
    list_c, man_c = _draw(tmp_path, "c", rows, *strata)
    assert list_a.read_bytes() == list_b.read_bytes() == list_c.read_bytes()
    # Same file twice: byte-identical manifests.
    assert man_a.read_bytes() == man_c.read_bytes()
    # Reordered file: only the file's checksum differs; the ID-set digest is the same.
    da, db = json.loads(man_a.read_text()), json.loads(man_b.read_text())
    assert da["population"].pop("sha256") != db["population"].pop("sha256")
    assert da == db
    assert da["created"] == "2027-01-15T08:00:00Z"
    lines = list_a.read_text(encoding="utf-8").splitlines()
    assert len(lines) == 25
    assert lines == sorted(lines)


def test_exclude_leaves_out_earlier_units(tmp_path):
    rows = _population()
    first, _ = _draw(tmp_path, "first", rows)
    second, manifest = _draw(tmp_path, "second", rows, "--exclude", str(first))
    a = set(first.read_text().split())
    b = set(second.read_text().split())
    assert not a & b
    assert json.loads(manifest.read_text())["excluded"]["units_left_out"] == 25


def test_plan_json_gives_the_size(tmp_path):
    plan = tmp_path / "plan.json"
    plan.write_text(json.dumps({"recommendation": 17}), encoding="utf-8")
    pop = tmp_path / "pop.csv"
    _write_population(pop, _population())
    out = tmp_path / "r.txt"
    result = runner.invoke(
        app, ["draw", str(pop), "--id", "report_id", "--plan", str(plan), "--seed", "1", "-o",
              str(out), "--json"],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["size"] == 17
    assert len(out.read_text().split()) == 17


def test_seed_is_chosen_and_printed_when_missing(tmp_path):
    pop = tmp_path / "pop.csv"
    _write_population(pop, _population())
    out = tmp_path / "r.txt"
    result = runner.invoke(
        app, ["draw", str(pop), "--id", "report_id", "--share", "0.1", "-o", str(out)]
    )
    assert result.exit_code == 0, result.output
    assert "pass --seed" in result.output
    assert len(out.read_text().split()) == 12


@pytest.mark.parametrize(
    ("args", "code", "words"),
    [
        (["--size", "500"], 2, "larger than the population of 120"),
        (["--size", "10", "--strata", "distrct"], 2, "no stratum column 'distrct'"),
        (["--size", "60", "--strata", "district", "--min-per-stratum", "41"], 2, "fewer than the minimum"),
        (["--size", "10", "--seed", "1.5"], 2, "whole number"),
        (["--size", "10", "--seed", "abc"], 2, "whole number"),
        (["--size", "10", "--share", "0.1"], 2, "exactly one"),
        (["--size", "10", "--id", "unit"], 2, "no unit-ID column 'unit'"),
    ],
)  # fmt: skip
def test_bad_input_is_a_located_message_and_exit_code(tmp_path, args, code, words):
    pop = tmp_path / "pop.csv"
    _write_population(pop, _population())
    before = pop.read_bytes()
    out = tmp_path / "r.txt"
    base = ["draw", str(pop), "-o", str(out)]
    if "--id" not in args:
        base += ["--id", "report_id"]
    if "--seed" not in args:
        base += ["--seed", "1"]
    result = runner.invoke(app, [*base, *args])
    assert result.exit_code == code, result.output
    assert words in result.output
    assert "Traceback" not in result.output
    assert not out.exists()
    assert pop.read_bytes() == before


def test_duplicate_and_blank_ids_are_located(tmp_path):
    rows = [*_population(10), ("R-0003", "North"), ("", "Lakes")]
    pop = tmp_path / "pop.csv"
    _write_population(pop, rows)
    out = tmp_path / "r.txt"
    result = runner.invoke(
        app, ["draw", str(pop), "--id", "report_id", "--size", "3", "--seed", "1", "-o", str(out),
              "--json"],
    )  # fmt: skip
    assert result.exit_code == 1
    problems = json.loads(result.stdout)["problems"]
    found = {(p["code"], p["cell"]) for p in problems}
    # Header is row 1: R-0003 first on row 5, again on row 12; the blank ID on row 13.
    assert ("duplicate-listed-unit", "A12") in found
    assert ("missing-unit-id", "A13") in found
    assert not out.exists()


def test_library_refuses_bad_seed_and_size():
    with pytest.raises(UsageError):
        draw_units(["a", "b"], 3, 1)
    with pytest.raises(UsageError):
        draw_units(["a", "b"], 1, -1)
