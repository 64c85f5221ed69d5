"""One spelling for the keys of every JSON document (issue 9, item 17): snake_case, our own
names (``alpha_chosen_or_not``, not another program's ``binary_alpha``; ``no_longer_needed``, not
``"no longer needed"``), and the problem code ``spreadsheet-error``."""

from __future__ import annotations

import re
from pathlib import Path

from coderel.adjudicate import build_adjudication
from coderel.agree import agreement
from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings
from coderel.problems import PROBLEM_CODES

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
KEY = re.compile(r"^[a-z][a-z0-9_]*$")


def _keys(doc, where="$"):
    """Every (path, key) of the nested dicts in ``doc``."""
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield where, k
            yield from _keys(v, f"{where}.{k}")
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _keys(v, f"{where}[{i}]")


def test_agree_and_adjudicate_json_keys_are_snake_case():
    codings = read_codings(load_codebook(CB), [SHEETS])
    docs = {
        "agree": agreement(codings, replicates=0).to_dict(pairs=True),
        "adjudicate": build_adjudication(codings).to_dict(),
    }
    for name, doc in docs.items():
        bad = [(w, k) for w, k in _keys(doc) if isinstance(k, str) and not KEY.match(k)]
        assert not bad, (name, bad[:5])
    actions = docs["agree"]["variables"]
    per_category = next(v for v in actions if v["variable"] == "actions")["category_agreement"]
    assert all("alpha_chosen_or_not" in c and "binary_alpha" not in c for c in per_category)
    assert all("no_longer_needed" in r for r in docs["adjudicate"]["per_variable"])


def test_problem_code_for_a_spreadsheet_error_value():
    assert "spreadsheet-error" in PROBLEM_CODES
    assert "excel-error" not in PROBLEM_CODES
