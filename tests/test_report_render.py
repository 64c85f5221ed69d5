"""The report in its three forms (HTML, Markdown, xlsx) for the invented demo project.

Oracles from outside the project: the HTML Living Standard and the Content Security Policy Level 3
specification (W3C) for what a page may fetch; the `krippendorff` package (Castro, 2017) for the
alpha the report prints; APA 7th ed. section 6.36 for the journal-style numbers (no leading zero).
"""

from __future__ import annotations

import json
import re
import shutil
from html import escape
from pathlib import Path

import krippendorff
import numpy as np
import pytest
from openpyxl import load_workbook
from typer.testing import CliRunner

from coderel.agree import agreement
from coderel.cli import app
from coderel.codebook.load import load_codebook
from coderel.io.read import read_codings
from coderel.report import build_report, write_report
from coderel.report.html import CSP, render_html
from coderel.report.markdown import render_markdown
from coderel.report.sections import SECTIONS, section_frames, sections

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
SHEETS = ROOT / "demo" / "sheets"
#: The demo's decisions, shipped beside the sample codebook.
DECISIONS = ROOT / "sample_decisions" / "wildlife_encounters.xlsx"
REPLICATES = 200
DATE = "2026-12-02"
runner = CliRunner()

#: Attributes through which an HTML page can make the browser fetch something.
FETCHING = re.compile(r"""\b(?:src|href|action|poster|data|srcset)\s*=\s*["']?\s*https?:""", re.I)


def _content(codebook_path: Path = CB, *, decisions: bool = True):
    import datetime as dt

    from coderel.adjudicate import read_decisions
    from coderel.merge import merge

    cb = load_codebook(codebook_path)
    codings = read_codings(cb, [SHEETS])
    result = agreement(codings, replicates=REPLICATES)
    merged = merge(codings, read_decisions(DECISIONS, cb)) if decisions else None
    when = dt.datetime(2026, 12, 2, tzinfo=dt.UTC)
    return codings, build_report(codings, result, merged, generated=when)


@pytest.fixture(scope="module")
def demo():
    return _content()


@pytest.fixture(scope="module")
def demo_html(demo):
    return render_html(demo[1])


def test_html_has_every_section_and_every_variable(demo, demo_html):
    _, content = demo
    # Every section but those of the protocol (training, rounds: only with --key, --round) and
    # Stability (only with a second occasion; tests/test_numeric_cli.py has one).
    assert {s.key for s in SECTIONS} - {s.key for s in sections(content)} == {
        "training",
        "rounds",
        "stability",
    }
    for section in sections(content):
        assert f'<section id="{section.key}"' in demo_html, section.key
    assert content.adjudication is not None  # the demo's decisions file gives the progress part
    for row in content.table:
        assert demo_html.count(f'id="{row.row_id}"') == 1, row.variable
        assert demo_html.count(f'id="{row.chart_id}"') == 1, row.variable
    for panel in content.categories:
        if panel.matrix is not None:
            assert f'id="{panel.heatmap_id}"' in demo_html
    # Ids must be unique in one page (HTML Living Standard, "the id attribute").
    ids = re.findall(r'\sid="([^"]+)"', demo_html)
    assert len(ids) == len(set(ids))


def test_html_fetches_nothing(demo_html):
    # CSP Level 3: default-src 'none' blocks every fetch not allowed by a more specific directive.
    assert f'<meta http-equiv="Content-Security-Policy" content="{CSP}">' in demo_html
    assert "default-src 'none'" in CSP
    assert "img-src data:" in CSP
    assert not FETCHING.search(demo_html)
    assert "<script" not in demo_html.lower()
    assert "@import" not in demo_html
    assert not re.search(r"""url\(\s*["']?(?!#)""", demo_html)  # only url(#local) references


def test_methods_paragraph_in_journal_style(demo, demo_html):
    codings, content = demo
    paragraph = content.methods.paragraph
    species = content.table[0]
    assert species.variable == "species"
    # Reference value: the krippendorff package on the same codings (nominal level).
    wide = codings.wide("species")
    codes = list(codings.codebook.variable("species").codes)
    data = np.array(
        [[np.nan if v is None else codes.index(v) for v in col] for col in wide.T.values]
    )
    ref = krippendorff.alpha(data, level_of_measurement="nominal", value_domain=range(len(codes)))
    text = f"{ref:.2f}".lstrip("0")  # APA 7th ed. 6.36: no leading zero for alpha
    assert f"species, α = {text}, 95% CI [" in paragraph
    assert "200 units" in paragraph
    assert "Three coders" in paragraph
    assert "Krippendorff, 2004" in paragraph
    assert "Hayes & Krippendorff, 2007" in paragraph
    # Issue 9, item 6: the interval resamples units only; the coders are fixed.
    assert "coders were treated as fixed" in paragraph
    assert "valid" in paragraph  # reliability is not validity
    # APA 7th ed. 6.32: counts compared with a number of 10 or more are numerals.
    main = [r for r in content.table if r.kind == "variable"]
    count = {v: sum(r.verdict == v for r in main) for v in ("reliable", "tentative")}
    assert len(main) == 10
    assert f"Of 10 variables, {count['reliable']} reached α ≥ .800, " in paragraph
    assert f"{count['tentative']} reached only α ≥ .667" in paragraph
    assert escape(paragraph) in demo_html
    # The set distance of the multi-select variable and the skip logic are named, with sources.
    assert "multi-select variable actions" in paragraph
    assert "Jaccard, 1912" in paragraph
    assert any(ref.startswith("Jaccard, P. (1912)") for ref in content.methods.references)
    assert "The variable spray_worked was coded only where" in paragraph


def test_text_from_the_codebook_is_escaped(tmp_path):
    evil = tmp_path / "codebook.yaml"
    text = CB.read_text(encoding="utf-8")
    text = text.replace("label: Black bear", 'label: "<script>alert(1)</script>"', 1)
    text = text.replace("label: Animal species", 'label: "=HYPERLINK(1) <b>&amp;"', 1)
    evil.write_text(text, encoding="utf-8")
    _, content = _content(evil, decisions=False)
    html = render_html(content)
    assert "<script" not in html.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "<b>" not in html
    assert "&lt;b&gt;&amp;amp;" in html
    md = render_markdown(content, {})
    assert "<script" not in md
    assert "&lt;script&gt;" in md
    frames = section_frames(content)
    labels = set(frames["agreement"]["label"])
    assert "=HYPERLINK(1) <b>&amp;" in labels  # the frame holds the text; the writer neutralises
    out = tmp_path / "r.xlsx"
    write_report(content, out)
    ws = load_workbook(out)["agreement"]
    cells = [c.value for row in ws.iter_rows() for c in row]
    assert "'=HYPERLINK(1) <b>&amp;" in cells  # OWASP CSV-injection rule: leading quote


def test_no_narrative_text_in_any_form(demo, demo_html, tmp_path):
    codings, content = demo
    texts = [t for t in codings.texts["text"] if isinstance(t, str) and len(t) > 30][:50]
    assert texts
    md = render_markdown(content, {})
    frames = section_frames(content)
    flat = " ".join(str(v) for f in frames.values() for v in f.to_numpy().ravel())
    for t in texts:
        snippet = t[:30]
        assert snippet not in demo_html
        assert snippet not in md
        assert snippet not in flat


def test_markdown_has_sections_and_svg_files_beside_it(demo, tmp_path):
    _, content = demo
    written = write_report(content, tmp_path / "report.md")
    md_path = tmp_path / "report.md"
    assert written[0] == md_path
    md = md_path.read_text(encoding="utf-8")
    for section in sections(content):
        assert f"## {section.title}" in md, section.key
    links = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", md)
    assert "report-charts/chart-intervals.svg" in links
    assert len(links) >= 2
    for link in links:
        svg = tmp_path / link
        assert svg.is_file(), link
        head = svg.read_text(encoding="utf-8")[:400]
        assert head.startswith("<?xml")
        assert "<svg" in head
    assert not FETCHING.search(md)


def test_xlsx_has_one_sheet_per_section(demo, tmp_path):
    _, content = demo
    out = tmp_path / "report.xlsx"
    write_report(content, out)
    wb = load_workbook(out)
    expected = [sheet for s in sections(content) for sheet in s.sheets]
    assert wb.sheetnames == expected
    ws = wb["agreement"]
    header = [c.value for c in ws[1]]
    assert header[:4] == ["variable", "label", "kind", "level"]
    names = [r[0].value for r in ws.iter_rows(min_row=2)]
    assert names == [r.variable for r in content.table]
    alpha_col = header.index("alpha")
    first = [c.value for c in ws[2]]
    assert first[alpha_col] == pytest.approx(content.table[0].alpha.estimate)


def test_same_inputs_same_bytes(demo, tmp_path):
    _, content = demo
    a = write_report(content, tmp_path / "a" / "report.html", ["html", "md", "xlsx"])
    b = write_report(content, tmp_path / "b" / "report.html", ["html", "md", "xlsx"])
    assert [p.name for p in a] == [p.name for p in b]
    for pa, pb in zip(a, b, strict=True):
        assert pa.read_bytes() == pb.read_bytes(), pa.name


def _digests() -> dict[str, str]:
    import hashlib

    files = [CB, DECISIONS, *sorted(SHEETS.iterdir())]
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in files}


def test_cli_writes_three_forms_and_prints_paths(tmp_path):
    out = tmp_path / "report.html"
    before = _digests()
    result = runner.invoke(
        app,
        [
            "report",
            "--codebook",
            str(CB),
            str(SHEETS),
            "--decisions",
            str(DECISIONS),
            "--replicates",
            str(REPLICATES),
            "--format",
            "html,md,xlsx",
            "--date",
            DATE,
            "-o",
            str(out),
        ],
    )
    assert result.exit_code == 0, result.stderr
    assert _digests() == before  # inputs are never changed
    assert not list(tmp_path.rglob("*.tmp"))  # no temporary file left behind
    printed = result.stdout.split()
    for name in ("report.html", "report.md", "report.xlsx"):
        assert str(tmp_path / name) in printed
        assert (tmp_path / name).is_file()
    html = out.read_text(encoding="utf-8")
    assert "2026-12-02 00:00:00 UTC" in html
    assert "SHA-256" in html
    assert DECISIONS.name in html
    assert "wildlife_encounters.yaml" in html


def test_cli_json_and_source_date_epoch(tmp_path):
    result = runner.invoke(
        app,
        ["report", "--codebook", str(CB), str(SHEETS), "--replicates", "50", "--json"],
        env={"SOURCE_DATE_EPOCH": "1764633600"},  # 2025-12-02 00:00:00 UTC
    )
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["reproducibility"]["generated_utc"] == "2025-12-02 00:00:00 UTC"
    assert data["reproducibility"]["replicates"] == 50
    assert data["methods"]["paragraph"].startswith("Three coders")
    assert data["adjudication"] is None


def test_cli_refuses_bad_outputs(tmp_path):
    shutil.copy(ROOT / "demo" / "sheets" / "coder_ana.xlsx", tmp_path / "coder_ana.xlsx")
    base = ["report", "--codebook", str(CB), str(tmp_path / "coder_ana.xlsx")]
    bad_ext = runner.invoke(app, [*base, "-o", str(tmp_path / "r.pdf")])
    assert bad_ext.exit_code == 2
    over_input = runner.invoke(app, [*base, "-o", str(tmp_path / "coder_ana.xlsx")])
    assert over_input.exit_code == 2
    nothing = runner.invoke(app, base)
    assert nothing.exit_code == 2
    assert not (tmp_path / "r.pdf").exists()
    assert (tmp_path / "coder_ana.xlsx").read_bytes() == (SHEETS / "coder_ana.xlsx").read_bytes()


def test_markdown_text_cannot_become_html_or_a_link():
    from coderel.report.markdown import md

    assert md("[x](javascript:alert(1))") == "[x]\\(javascript:alert(1))"
    assert md("<img src=x>") == "&lt;img src=x&gt;"
    assert md("a|b *c*\nd") == "a\\|b \\*c\\* d"


def test_undefined_alpha_is_said_in_words_not_as_a_number(codebook):
    """Alpha is 0/0 when every pairable value is the same (Krippendorff, 2011, p. 3: D_e = 0)."""
    import datetime as dt

    from coderel.codings import Codings

    records = [
        {"unit": f"U{u}", "coder": c, "variable": var, "value": value}
        for u in range(12)
        for c in ("a", "b")
        for var, value in (("animal", 1), ("behaviour", u % 3 + 1))
    ]
    codings = Codings.from_records(codebook, records)
    result = agreement(codings, replicates=50)
    content = build_report(codings, result, generated=dt.datetime(2026, 1, 1, tzinfo=dt.UTC))
    animal = next(r for r in content.table if r.variable == "animal")
    assert animal.alpha.estimate is None
    assert animal.verdict == "undefined"
    paragraph = content.methods.paragraph
    assert "Alpha was undefined for animal" in paragraph
    assert "every pairable value is the same" in paragraph
    assert "behaviour, α = 1.00" in paragraph
    html = render_html(content)
    assert 'id="row-animal"' in html
    assert 'id="chart-animal"' in html  # the chart says "undefined" where the dot would be
    assert "no-variation" not in html  # the engine's slug is put into words
    assert "2 coders" in html


def test_coder_panel_pairwise_alpha_against_the_krippendorff_package(demo):
    # Each pair's mean alpha averages, over the variables, the two coders' alpha at the variable's
    # level; recomputed here with the krippendorff package for the two single-choice ordinal and
    # nominal variables and the numeric ones (multi-select is left to the engine's own tests).
    codings, content = demo
    c = content.coders
    i, j = c.coders.index("coder_ana"), c.coders.index("coder_cai")
    assert c.pair_alpha[i][j] == c.pair_alpha[j][i]
    values = []
    for var in codings.codebook.variables:
        wide = codings.wide(var.name)
        if var.applies_when is not None:
            applies = codings.for_variable(var.name).pivot(
                index="unit", columns="coder", values="applies"
            )
            wide = wide.where(applies.reindex_like(wide).astype(object) != False, None)  # noqa: E712
        pair = wide[["coder_ana", "coder_cai"]]
        if var.multiple:
            values.append(None)  # Jaccard distance: checked in tests/test_stats_properties.py
            continue
        if var.is_categorical:
            codes = list(var.codes)
            data = [[np.nan if v is None else codes.index(v) for v in pair[col]] for col in pair]
            domain = range(len(codes))
        else:
            data = [[np.nan if v is None else float(v) for v in pair[col]] for col in pair]
            domain = None
        values.append(
            krippendorff.alpha(
                np.array(data, dtype=float), level_of_measurement=var.level, value_domain=domain
            )
        )
    engine = {
        v.variable: p.krippendorff_alpha
        for v in agreement(codings, replicates=0).variables
        if v.kind == "variable"
        for p in v.pairs
        if (p.coder_a, p.coder_b) == ("coder_ana", "coder_cai")
    }
    names = [v.name for v in codings.codebook.variables]
    for name, ref in zip(names, values, strict=True):
        if ref is not None:
            assert engine[name] == pytest.approx(ref, abs=1e-9), name
    assert c.pair_alpha[i][j] == pytest.approx(np.mean(list(engine.values())), abs=1e-12)
