"""Cells grouped once and classified on arrays, and a merge settled a variable at a time.

:func:`coderel.adjudicate.cell_table.cell_table`, :func:`coderel.merge.summary.variable_cells`
(the merge's per-unit summaries) and :func:`coderel.merge.settlement.settle_cells` restructure
work that :func:`coderel.adjudicate.tokens.classify` and
:func:`coderel.merge.cells.decide_cell` define for one cell. The oracle here is that definition,
applied cell by cell to the tokens each coder's rows give (a coder's later row for a cell replaces
the earlier one): on random long tables with repeated rows, coders who find a variable does not
apply, blanks, missing codes and numbers written as whole floats, both must give every cell the
same kind, the same token, the same status and the same final value.
"""

from __future__ import annotations

import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from coderel.adjudicate import Decision, classify
from coderel.adjudicate.cell_table import KINDS, cell_table
from coderel.adjudicate.rules import Settling
from coderel.codebook import Category, Codebook, MissingCode, Variable
from coderel.codings import Codings
from coderel.merge import merge
from coderel.merge.cells import decide_cell
from coderel.merge.settlement import settle_cells
from coderel.merge.summary import row_index, variable_cells
from tests.token_oracle import tokens_row_by_row

CB = Codebook(
    title="cell table test (invented)",
    unit="unit",
    variables=(
        Variable(
            "trail",
            "nominal",
            categories=(Category(1, "Ridge"), Category(2, "Lake"), Category(3, "Moor")),
            missing=(MissingCode(99, "cannot be coded"),),
        ),
        Variable("rangers", "ratio", integer=True, missing=(MissingCode(999),)),
    ),
)

#: One coder's row for a cell: (value, missing code, does the variable apply).
_entry = st.one_of(
    st.tuples(st.sampled_from([1, 2, 3, 1.0, 2.0, None]), st.just(None), st.just(True)),
    st.tuples(st.just(None), st.sampled_from([99, 999]), st.just(True)),
    st.tuples(st.sampled_from([1, 2, None]), st.just(None), st.just(False)),
)
_rows = st.lists(
    st.tuples(
        st.sampled_from(["U1", "U2", "U10", "U3"]),
        st.sampled_from(["ann", "bob", "cai"]),
        st.sampled_from(["trail", "rangers", "elsewhere"]),  # a variable the codebook lacks
        _entry,
    ),
    min_size=0,
    max_size=40,
)


def _codings(rows) -> Codings:
    records = [
        {
            "unit": unit,
            "coder": coder,
            "variable": name,
            "value": value,
            "missing": missing,
            "applies": applies,
        }
        for unit, coder, name, (value, missing, applies) in rows
    ]
    if not records:
        columns = ["unit", "coder", "variable", "value", "missing", "applies"]
        return Codings.from_records(CB, pd.DataFrame(columns=columns, dtype=object))
    return Codings.from_records(CB, records)


@settings(max_examples=150, deadline=None)
@given(_rows)
def test_kinds_and_tokens_match_classify_cell_by_cell(rows):
    codings = _codings(rows)
    table = cell_table(codings)
    oracle = tokens_row_by_row(codings)
    assert list(zip(table.unit, table.variable, strict=True)) == list(oracle)
    for i, (key, tokens) in enumerate(oracle.items()):
        assert table.tokens(i) == tokens
        assert table.kind(i) == classify(tokens) == KINDS[table.kind_code[i]]
        assert table.coders[i] == len(tokens)
        assert table.index[key] == i
        if classify(tokens) is None:
            # the token a set of the cell's tokens keeps: 2 and 2.0 are equal, not the same
            assert repr(table.token(i)) == repr(next(iter(set(tokens.values()))))


@settings(max_examples=150, deadline=None)
@given(_rows)
def test_per_unit_summaries_match_classify_cell_by_cell(rows):
    codings = _codings(rows)
    oracle = tokens_row_by_row(codings)
    ix = row_index(codings)
    assert ix.units == sorted({u for u, *_ in rows}, key=lambda u: (len(u), u))  # U1 U2 U3 U10
    for var in CB.variables:
        cells = variable_cells(var, ix)
        for u, unit in enumerate(ix.units):
            tokens = oracle.get((unit, var.name), {})
            # the same tokens, coders in the order of their first rows: 2 and 2.0 kept apart
            assert repr(cells.cell_tokens(u)) == repr(tokens)
            assert KINDS[cells.kind[u]] == (classify(tokens) if tokens else None)
            assert cells.per_unit[u] == len(tokens)
            if tokens and classify(tokens) is None:
                kept = next(iter(set(tokens.values())))
                assert repr(cells.tokens[cells.token[u]]) == repr(kept)


@settings(max_examples=150, deadline=None)
@given(
    _rows,
    st.sampled_from(["unanimous", "majority"]),
    st.sampled_from([{}, {"rangers": 1.0}]),
    st.sets(st.sampled_from(["U1", "U2", "U10", "U3"])),
)
def test_a_variable_settled_at_once_matches_decide_cell(rows, rule, tolerance, decided):
    codings = _codings(rows)
    settling = Settling(rule, tolerance)
    oracle = tokens_row_by_row(codings)
    ix = row_index(codings)
    units = ix.units
    for var in CB.variables:
        decision = Decision(value=2, token=("value", 2), text="2")
        decisions = {u: decision for u, unit in enumerate(units) if unit in decided}
        settled = settle_cells(variable_cells(var, ix), decisions, settling)
        statuses, finals, used = settled.statuses(), settled.finals(), settled.used.tolist()
        for u, unit in enumerate(units):
            tokens = oracle.get((unit, var.name), {})
            status, token, was_used = decide_cell(var, tokens, settling, decisions.get(u))
            assert (statuses[u], repr(finals[u]), u in used) == (status, repr(token), was_used)


def test_each_unit_has_its_own_cells():
    rows = [
        ("U2", "ann", "rangers", (4, None, True)),
        ("U1", "ann", "trail", (1, None, True)),
        ("U2", "bob", "trail", (2, None, True)),
        ("U9", "ann", "elsewhere", (1, None, True)),
    ]
    ix = row_index(_codings(rows))
    assert ix.units == ["U1", "U2", "U9"]  # U9 has rows, of a variable the codebook lacks
    trail, rangers = (variable_cells(v, ix) for v in CB.variables)
    assert [trail.cell_tokens(u) for u in range(3)] == [
        {"ann": ("value", 1)},
        {"bob": ("value", 2)},
        {},
    ]
    assert [rangers.cell_tokens(u) for u in range(3)] == [{}, {"ann": ("value", 4)}, {}]


def test_merge_of_an_empty_table_has_no_rows():
    result = merge(_codings([]))
    assert result.units == 0
    assert result.unresolved == ()
