"""Every count in the report from one place (issue 9, item 14).

Before, the summary said "80 (80 coded by every coder)" while coders had skipped units, the methods
paragraph said "coded 80 units" and did not mention adjudication. Now the summary table, the methods
paragraph and the adjudication table read the same figures (``Summary``, ``Adjudication``), which
come from the codings and the merge. Expected counts follow from the construction of the data.
"""

from __future__ import annotations

from coderel.agree import agreement
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.merge import merge
from coderel.report import build_report
from coderel.report.html import render_html
from coderel.report.sections import summary_rows

CB = Codebook(
    title="counts (invented)",
    unit="report_id",
    variables=(
        Variable("species", "nominal", categories=tuple(Category(i, f"c{i}") for i in (1, 2, 3))),
        Variable("mood", "ordinal", categories=tuple(Category(i, f"m{i}") for i in (1, 2, 3))),
    ),
)


def codings() -> Codings:
    records = []
    for i in range(12):
        unit = f"U{i + 1}"
        for coder in ("ana", "ben", "cai"):
            if coder == "cai" and i >= 10:
                continue  # cai skipped U11 and U12
            species = 1 + i % 3
            if coder == "cai" and i in (0, 1):
                species = 1 + (i + 1) % 3  # cai is outvoted on U1 and U2
            records.append({"unit": unit, "coder": coder, "variable": "species", "value": species})
            mood = 1 + i % 3
            if coder == "ben" and i == 3:
                mood = 3 if mood != 3 else 1  # one more disagreement: outvoted by ana and cai
            records.append({"unit": unit, "coder": coder, "variable": "mood", "value": mood})
    return Codings.from_records(CB, records)


def test_summary_methods_and_adjudication_share_their_counts():
    c = codings()
    merged = merge(c, rule="majority")
    content = build_report(c, agreement(c, replicates=0), merged)
    s = content.summary
    assert (s.units, s.units_all_coders) == (12, 10)
    assert s.units_per_coder == (("ana", 12), ("ben", 12), ("cai", 10))
    units = dict(summary_rows(content))["Units"]
    assert units == "12 (10 coded by every coder: ana 12, ben 12, cai 10)"
    paragraph = content.methods.paragraph
    assert "coded 12 units" in paragraph
    assert "10 of the units were coded by every coder (ana 12, ben 12, cai 10)" in paragraph
    totals = merged.totals()
    assert (totals["majority"], totals["agreed"]) == (3, 21)
    assert content.adjudication.cells == merged.cells == 24
    assert (
        "Of the 24 cells (units × variables) of the final dataset, 21 were agreed by every coder "
        "who coded the unit and 3 were settled by a majority of the coders (rule: a majority"
    ) in paragraph
    html = render_html(content)
    assert "10 coded by every coder: ana 12, ben 12, cai 10" in html


def test_no_per_coder_list_when_every_coder_coded_every_unit():
    records = [
        {"unit": f"U{i}", "coder": c, "variable": v, "value": 1 + i % 3}
        for i in range(12)
        for c in ("ana", "ben")
        for v in ("species", "mood")
    ]
    c = Codings.from_records(CB, records)
    content = build_report(c, agreement(c, replicates=0))
    assert dict(summary_rows(content))["Units"] == "12 (12 coded by every coder)"
    assert "of the units were coded by every coder" not in content.methods.paragraph
    assert "cells (units × variables)" not in content.methods.paragraph  # no merge, no sentence


def test_adjudication_sentence_reads_right_for_every_status():
    from coderel.report.methods_text import adjudication_sentence
    from coderel.report.model import Adjudication

    adj = Adjudication(
        rule="unanimous",
        totals=(("agreed", 1315), ("adjudicated", 510), ("unresolved", 1), ("not_applicable", 175)),
        by_variable=(),
        tolerance=(("visitor_distance_m", 10.0),),
    )
    assert adjudication_sentence(adj) == (
        "Of the 2,001 cells (units × variables) of the final dataset, 1,315 were agreed by every "
        "coder who coded the unit, 510 were decided by an adjudicator, 1 remains unresolved, and "
        "175 did not apply by the codebook's skip logic (rule: only unanimous values were "
        "accepted without an adjudicator; numbers within 10 for visitor_distance_m counted as "
        "agreeing)."
    )
