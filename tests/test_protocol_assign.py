"""``coderel assign``, and the whole front half: plan -> draw -> assign -> templates -> filled
sheets -> validate -> agree -> adjudicate -> merge -> report.

Balance is checked as a property of the design (every coder gets every reliability unit; other
units' counts per coder differ by at most one; rotating pairs share units within one of each
other). The sample size in the end-to-end test is Krippendorff's (2004, *Content Analysis*, 2nd
ed., ch. 11.4, Table 11.2) formula at p_c = .5, p = .05, alpha_min = .667: 60 units (computed
from the formula, not read from the table).
"""

from __future__ import annotations

import csv
import json
import random
from itertools import combinations

import numpy as np
import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from coderel.cli import app
from coderel.errors import UsageError
from coderel.protocol.assign import assign_units
from coderel.protocol.sample_size import minimum_units

runner = CliRunner()


@settings(max_examples=150, deadline=None)
@given(
    n_corpus=st.integers(min_value=0, max_value=300),
    n_coders=st.integers(min_value=2, max_value=6),
    per_unit=st.integers(min_value=1, max_value=3),
    seed=st.integers(min_value=0, max_value=2**32),
    data=st.data(),
)
def test_assignment_is_balanced(n_corpus, n_coders, per_unit, seed, data):
    per_unit = min(per_unit, n_coders)
    corpus = [f"U{i:04d}" for i in range(n_corpus)]
    rel = data.draw(st.lists(st.sampled_from(corpus), unique=True)) if corpus else []
    coders = [f"c{i}" for i in range(n_coders)]
    a = assign_units(corpus, rel, coders, seed, per_unit=per_unit)
    for c in coders:
        assert set(rel) <= set(a.lists[c])
        assert len(set(a.lists[c])) == len(a.lists[c])
    own = [a.load(c) - len(rel) for c in coders]
    assert max(own) - min(own) <= 1
    # Every remaining unit is coded by exactly per_unit coders.
    coverage = {u: 0 for u in corpus if u not in set(rel)}
    for c in coders:
        for u in a.lists[c]:
            if u in coverage:
                coverage[u] += 1
    assert set(coverage.values()) <= {per_unit}
    assert sum(own) == per_unit * len(coverage)
    if per_unit > 1:
        counts = list(a.groups.values())
        assert len(counts) == len(list(combinations(coders, per_unit)))
        assert max(counts) - min(counts) <= 1
        assert a.balance()["units_per_group"]["spread"] <= 1


def test_same_seed_and_sets_give_same_lists_in_any_order():
    corpus = [f"U{i:03d}" for i in range(90)]
    rel = corpus[::9]
    shuffled = corpus[:]
    random.Random(2).shuffle(shuffled)
    a = assign_units(corpus, rel, ["ana", "ben", "cai"], 5, blend=True)
    b = assign_units(shuffled, rel[::-1], ["cai", "ana", "ben"], 5, blend=True)
    assert a.lists == b.lists
    assert assign_units(corpus, rel, ["ana", "ben", "cai"], 6, blend=True).lists != a.lists


def test_without_blend_reliability_units_come_first_and_blend_mixes_them():
    corpus = [f"U{i:03d}" for i in range(60)]
    rel = corpus[:10]
    plain = assign_units(corpus, rel, ["ana", "ben"], 1)
    assert plain.lists["ana"][:10] == tuple(rel)
    blended = assign_units(corpus, rel, ["ana", "ben"], 1, blend=True)
    assert set(blended.lists["ana"]) == set(plain.lists["ana"])
    assert blended.lists["ana"][:10] != tuple(rel)


@pytest.mark.parametrize(
    ("corpus", "rel", "coders", "per_unit", "words"),
    [
        (["a", "b"], ["c"], ["x", "y"], 1, "not in the corpus"),
        (["a", "b"], ["a"], ["x"], 1, "two or more coders"),
        (["a", "b"], ["a"], ["x", "y"], 3, "--per-unit"),
        (["a", "b"], ["a"], ["x", "x"], 1, "given twice"),
    ],
)
def test_bad_designs_are_usage_errors(corpus, rel, coders, per_unit, words):
    with pytest.raises(UsageError, match=words):
        assign_units(corpus, rel, coders, 1, per_unit=per_unit)


CODEBOOK = """\
title: Front-half test (invented)
unit: unit_id
variables:
  - name: animal
    level: nominal
    categories: [{code: 1, label: Bear}, {code: 2, label: Elk}, {code: 3, label: Cougar},
                 {code: 4, label: Other}]
  - name: behaviour
    level: ordinal
    categories: [{code: 1, label: Calm}, {code: 2, label: Alert}, {code: 3, label: Agitated}]
  - name: distance_m
    level: ratio
    range: [0, 500]
"""


def _fill(path, truth, rng):
    wb = openpyxl.load_workbook(path)
    ws = wb["coding"]
    header = [c.value for c in ws[1]]
    for row in ws.iter_rows(min_row=2):
        unit = row[0].value
        if unit is None:
            break
        t = truth[unit]
        values = {
            "animal": t[0] if rng.random() < 0.9 else int(rng.integers(1, 5)),
            "behaviour": t[1] if rng.random() < 0.85 else int(rng.integers(1, 4)),
            "distance_m": int(max(0, t[2] + rng.integers(-3, 4))),
        }
        for name, value in values.items():
            row[header.index(name)].value = value
    wb.save(path)


def _run(*args):
    result = runner.invoke(app, [str(a) for a in args])
    return result


def test_front_half_end_to_end(tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1800000000")
    cb = tmp_path / "codebook.yaml"
    cb.write_text(CODEBOOK, encoding="utf-8")
    rng = np.random.default_rng(4)
    corpus = tmp_path / "corpus.csv"
    with open(corpus, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["unit_id", "district"])
        for i in range(80):
            w.writerow([f"E-{i:03d}", "North" if i % 4 else "South"])
    # 1. plan: Krippendorff (2004) formula at p_c = .5, p = .05, alpha_min = .667.
    r = _run("plan", "-c", cb, "--smallest-share", "0.5", "--alpha-min", "0.667", "--json")
    assert r.exit_code == 0, r.output
    plan = tmp_path / "plan.json"
    plan.write_text(r.stdout, encoding="utf-8")
    assert json.loads(r.stdout)["recommendation"] == minimum_units(0.667, 0.5) == 60
    # 2. draw 60 of 80, stratified.
    rel = tmp_path / "reliability.txt"
    r = _run("draw", corpus, "-c", cb, "--plan", plan, "--strata", "district", "--seed", "8",
             "-o", rel)  # fmt: skip
    assert r.exit_code == 0, r.output
    assert len(rel.read_text().split()) == 60
    # 3. assign to three coders, with workbooks.
    out = tmp_path / "assignment"
    books = tmp_path / "books"
    r = _run("assign", corpus, "-c", cb, "-r", rel, "--coders", "ana,ben,cai", "--seed", "3",
             "-o", out, "--templates", books, "--json")  # fmt: skip
    assert r.exit_code == 0, r.output
    manifest = json.loads(r.stdout)
    assert sorted(p["own"] for p in manifest["per_coder"]) == [6, 7, 7]
    assert [t["file"] for t in manifest["templates"]] == ["ana.xlsx", "ben.xlsx", "cai.xlsx"]
    for coder in ("ana", "ben", "cai"):
        ws = openpyxl.load_workbook(books / f"{coder}.xlsx")["coding"]
        prefilled = [c.value for c in ws["A"][1:] if c.value is not None]
        assert prefilled == (out / f"units-{coder}.txt").read_text().split()
    # 4. coders fill their sheets.
    truth = {
        f"E-{i:03d}": (int(rng.integers(1, 5)), int(rng.integers(1, 4)), int(rng.integers(0, 400)))
        for i in range(80)
    }
    for coder in ("ana", "ben", "cai"):
        _fill(books / f"{coder}.xlsx", truth, rng)
    # 5. validate, agree.
    r = _run("validate", "-c", cb, books)
    assert r.exit_code == 0, r.output
    r = _run("agree", "-c", cb, books, "--replicates", "200", "--json")
    assert r.exit_code == 0, r.output
    agreement = json.loads(r.stdout)
    assert agreement["single_coded_units"] == 20
    assert {v["units"] for v in agreement["variables"]} == {60}
    assert "20 unit(s) coded by one coder only were left out" in r.output
    r = _run("agree", "-c", cb, books, "--replicates", "0", "--json", "--units",
             out / "reliability-units.txt")  # fmt: skip
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["single_coded_units"] == 0
    # 6. adjudicate, merge, report.
    r = _run("adjudicate", "-c", cb, books, "-o", tmp_path / "adjudication.xlsx")
    assert r.exit_code == 0, r.output
    merged = tmp_path / "merged.csv"
    r = _run("merge", "-c", cb, books, "-o", merged)
    assert r.exit_code == 0, r.output
    with open(merged, encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 80
    statuses = {v for row in rows for k, v in row.items() if k.endswith("status")}
    assert "single" in statuses
    report = tmp_path / "report.md"
    r = _run("report", "-c", cb, books, "-o", report, "--replicates", "200")
    assert r.exit_code == 0, r.output
    assert "20 coded by one coder only, left out of agreement" in report.read_text("utf-8")


@pytest.mark.parametrize(
    ("extra", "words"),
    [
        (["--seed", "x1"], "whole number"),
        (["--seed", "1", "--per-unit", "4"], "--per-unit"),
        (["--seed", "1", "--templates", "books"], "needs the codebook"),
    ],
)
def test_cli_bad_input_is_a_message_and_usage_exit(tmp_path, extra, words):
    corpus = tmp_path / "corpus.txt"
    corpus.write_text("".join(f"U{i}\n" for i in range(10)), encoding="utf-8")
    rel = tmp_path / "rel.txt"
    rel.write_text("U1\nU2\n", encoding="utf-8")
    r = _run("assign", corpus, "-r", rel, "--coders", "ana,ben", "-o", tmp_path / "out", *extra)
    assert r.exit_code == 2, r.output
    assert words in r.output
    assert "Traceback" not in r.output
    assert not (tmp_path / "out").exists()


def test_last_round_of_pairs_is_balanced_too():
    # Found by hypothesis: 279 units beyond the reliability sample, 6 coders in 15 pairs; the
    # last round's 9 units need a 3-regular choice of pairs, which plain greedy missed.
    corpus = [f"U{i:04d}" for i in range(280)]
    a = assign_units(corpus, ["U0000"], [f"c{i}" for i in range(6)], 1, per_unit=2)
    own = [a.load(c) - 1 for c in a.coders]
    assert own == [93] * 6
