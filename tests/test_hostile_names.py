"""Odd names survive every round trip (issue 12, items 19 and 20).

A variable or text column whose name starts like a formula (``-v``, ``=x``, ``+y``, ``@z``) is
written neutralised (``'-v``) in a template's header; the filled template must still pass
``validate`` unchanged. Report ids of names that read alike (``a b`` and ``a-b``, names in other
scripts) must differ, or one variable's panel would show another's chart.
"""

from __future__ import annotations

import collections
import datetime as dt
import io
import re

import openpyxl
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from coderel.agree import agreement
from coderel.codebook import Category, Codebook, Variable
from coderel.codings import Codings
from coderel.io.read import read_codings
from coderel.report import build_report
from coderel.report.html import render_html
from coderel.report.model import _slug
from coderel.template import template_bytes

_LEAD = st.sampled_from(["-", "=", "+", "@", "'", " ", "", "Ж", "#"])
_BODY = st.text(
    alphabet=st.characters(whitelist_categories=("Lu", "Ll", "Nd"), whitelist_characters="-_ .=+@"),
    min_size=1,
    max_size=12,
)


_NAME = (
    st.tuples(_LEAD, _BODY)
    .map(lambda t: (t[0] + t[1]).strip())
    .filter(lambda n: bool(n) and not n.startswith("'") and n.casefold() != "coder")
)


def _names():
    return st.lists(_NAME, min_size=3, max_size=3, unique_by=str.casefold)


@settings(
    max_examples=12,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.large_base_example],
)
@given(_names())
def test_filled_template_with_odd_names_passes_validate(tmp_path_factory, names):
    variable, text, unit = names
    cb = Codebook(
        title="odd names",
        unit=unit,
        text_columns=(text,),
        variables=(
            Variable(
                name=variable,
                level="nominal",
                categories=(Category(1, "Bear"), Category(2, "Elk")),
            ),
        ),
    )
    folder = tmp_path_factory.mktemp("odd")
    wb = openpyxl.load_workbook(io.BytesIO(template_bytes(cb, "ana", ["R-1", "R-2"])))
    ws = wb["coding"]
    ws["B2"], ws["C2"], ws["B3"], ws["C3"] = "a narrative", 1, "another", 2
    wb.save(folder / "ana.xlsx")
    codings = read_codings(cb, [folder / "ana.xlsx"])
    assert [p.code for p in codings.problems.errors] == []
    assert sorted(codings.frame["value"].tolist()) == [1, 2]


def test_report_ids_of_names_that_read_alike_differ():
    names = ["a b", "a-b", "a_b", "a  b", "Ξένη", "Анна", "比", "species [applies]", "species"]
    slugs = [_slug(n) for n in names]
    assert len(set(slugs)) == len(names)
    assert _slug("species") == "species"  # a plain name keeps its readable id
    for s in slugs:
        assert s.isascii()
        assert all(ch.isalnum() or ch in "-_" for ch in s)


#: Names that read alike once made into ids: spaces and dashes, scripts other than Latin.
ALIKE = ["a b", "a-b", "a_b", "a  b", "Ξένη", "Анна", "比", "species", "species [applies]"]


def test_report_panels_of_names_that_read_alike_show_their_own_matrix():
    """Each variable gets its own confusion table (ann's codes down, bob's across: the variable's
    position k sets the counts, 10 + k agreeing on 1 and k + 1 confusions), and the report's
    panel for that variable must show exactly those counts, with ids found once in the page."""
    cb = Codebook(
        title="names that read alike",
        variables=tuple(
            Variable(n, "nominal", categories=(Category(1, "Bear"), Category(2, "Elk")))
            for n in ALIKE
        ),
    )
    records, expected = [], {}
    for k, name in enumerate(ALIKE):
        pairs = [(1, 1)] * (10 + k) + [(1, 2)] * (k + 1) + [(2, 2)] * 3
        expected[name] = [str(10 + k), str(k + 1), "0", "3"]  # rows ann 1, 2; columns bob 1, 2
        for u, (a, b) in enumerate(pairs):
            records.append({"unit": f"U{u}", "coder": "ann", "variable": name, "value": a})
            records.append({"unit": f"U{u}", "coder": "bob", "variable": name, "value": b})
    codings = Codings.from_records(cb, records)
    content = build_report(
        codings,
        agreement(codings, replicates=20),
        None,
        generated=dt.datetime(2026, 12, 2, tzinfo=dt.UTC),
    )
    html = render_html(content)
    ids = collections.Counter(re.findall(r'\bid="([^"]*)"', html))
    assert [i for i, n in ids.items() if n > 1] == []
    panels = {p.variable: p for p in content.categories}
    assert sorted(panels) == sorted(ALIKE)
    assert len({p.panel_id for p in panels.values()}) == len(ALIKE)
    assert len({p.heatmap_id for p in panels.values()}) == len(ALIKE)
    for name, panel in panels.items():
        start = html.index(f'<div class="panel" id="{panel.panel_id}">')
        figure = html[start : html.index("</figure>", start)]
        cells = re.findall(r'<g id="(heatmap-[^"]*)-(\d)-(\d)"', figure)
        assert {c[0] for c in cells} == {panel.heatmap_id}, name
        numbers = [t for t in re.findall(r"<text[^>]*>([^<]*)</text>", figure) if t.isdigit()]
        assert numbers == expected[name], name
