"""Regression tests from using coderel as a careful, slightly adversarial user.

Each test names the command (or call) that showed the defect. Fixtures are built in ``tmp_path``;
no input file may change, and bad input gives a message with a place and a way out, never a
traceback.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from typer.testing import CliRunner

from coderel.cli import app

runner = CliRunner()

SMALL_CODEBOOK = """\
title: Small test (invented)
version: "0.1"
unit: id
text_columns: [text]
variables:
  - name: mood
    level: nominal
    categories:
      - {code: pos, label: Positive}
      - {code: neg, label: Negative}
      - {code: neu, label: Neutral}
  - name: flag
    level: nominal
    categories:
      - {code: 0, label: "No"}
      - {code: 1, label: "Yes"}
"""


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _write_codebook(folder: Path) -> Path:
    cb = folder / "cb.yaml"
    cb.write_text(SMALL_CODEBOOK, encoding="utf-8")
    return cb


# ---- coderel codebook schema -o cb.yaml overwrote the codebook with the JSON Schema ------------
def test_schema_refuses_a_non_json_output_and_leaves_the_file(tmp_path):
    cb = _write_codebook(tmp_path)
    before = _sha(cb)
    result = runner.invoke(app, ["codebook", "schema", "-o", str(cb)])
    assert result.exit_code == 2
    assert "cb.yaml" in result.output
    assert ".json" in result.output
    assert _sha(cb) == before
    ok = runner.invoke(app, ["codebook", "schema", "-o", str(tmp_path / "s.json")])
    assert ok.exit_code == 0
    assert (tmp_path / "s.json").read_text("utf-8").lstrip().startswith("{")


def _sheets(folder: Path, coders: dict[str, list[tuple[str, str, int]]]) -> Path:
    """One CSV per coder: ``coders[name]`` is a list of (id, mood, flag) rows."""
    data = folder / "sheets"
    data.mkdir()
    for name, rows in coders.items():
        lines = ["id,text,mood,flag", *(f"{u},report {u},{m},{f}" for u, m, f in rows)]
        (data / f"{name}.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return data


def _codings(table: dict[str, list[tuple]], coders=("a", "b")):
    from coderel.codebook import Category, Codebook, Variable
    from coderel.codings import Codings

    variables = tuple(
        Variable(name, "nominal", categories=(Category(0, "no"), Category(1, "yes")))
        for name in table
    )
    cb = Codebook(title="t", version="1", variables=variables)
    records = [
        {"unit": f"u{u:03d}", "coder": coders[c], "variable": name, "value": value}
        for name, rows in table.items()
        for u, row in enumerate(rows)
        for c, value in enumerate(row)
    ]
    return Codings.from_records(cb, records)


# ---- agree: perfect agreement on 12 units printed "1.000 [1.000, 1.000]" ------------------------
def test_perfect_agreement_gives_no_collapsed_interval_and_says_why():
    from coderel.agree import PERFECT_AGREEMENT, agreement

    # 12 units, both coders agree everywhere, both categories used.
    rows = [(0, 0)] * 8 + [(1, 1)] * 4
    v = agreement(_codings({"f": rows}), replicates=200).variable("f")
    alpha = v.coefficients["krippendorff_alpha"]
    assert alpha.estimate == 1.0
    assert alpha.ci is None
    assert alpha.reason == PERFECT_AGREEMENT
    assert v.coefficients["percent_agreement"].ci is None
    assert v.alpha_below_min is None
    # Rule of three (Hanley & Lippman-Hand 1983, JAMA 249(13)): 0 events in n=12 -> 3/12 = 25%.
    assert any("agreed on every one of the 12 units" in n and "25%" in n for n in v.notes)
    # 3/200 = 1.5%, with one decimal below 10%.
    big = agreement(_codings({"f": [(0, 0)] * 150 + [(1, 1)] * 50}), replicates=50).variable("f")
    assert any("up to about 1.5% of units" in n for n in big.notes)
    # One disagreement: an ordinary interval again.
    rows[0] = (0, 1)
    v = agreement(_codings({"f": rows}), replicates=200).variable("f")
    assert v.coefficients["krippendorff_alpha"].ci is not None
    assert v.coefficients["krippendorff_alpha"].reason is None


# ---- agree --replicates 2 printed 95% intervals that did not hold the estimate -----------------
def test_too_few_replicates_give_no_interval():
    from coderel.agree import TOO_FEW_REPLICATES, agreement, min_replicates

    # 2 / (1 - .95) = 40: the fewest replicates with one in each 2.5% tail.
    assert min_replicates(0.95) == 40
    rows = [(0, 0), (0, 1), (1, 1), (1, 0), (0, 0), (1, 1)] * 3
    codings = _codings({"f": rows})
    for reps in (1, 2, 39):
        v = agreement(codings, replicates=reps).variable("f")
        alpha = v.coefficients["krippendorff_alpha"]
        assert alpha.estimate is not None
        assert alpha.ci is None
        assert alpha.reason == TOO_FEW_REPLICATES
        assert any("too few for a 95% interval" in n for n in v.notes)
    v = agreement(codings, replicates=40).variable("f")
    assert v.coefficients["krippendorff_alpha"].ci is not None
    v = agreement(codings, replicates=0).variable("f")
    assert v.coefficients["krippendorff_alpha"].reason is None
    assert not any("replicate" in n for n in v.notes)


def _methods(markdown: str) -> str:
    part = markdown.split("## Methods paragraph", 1)[1]
    return next(line for line in part.splitlines() if line.startswith("> "))


# ---- report with one coder: "One coders independently coded ... intervals were obtained" ------
def test_methods_paragraph_with_one_coder(tmp_path):
    cb = _write_codebook(tmp_path)
    rows = [(f"u{i}", "pos" if i % 2 else "neg", i % 2) for i in range(12)]
    data = _sheets(tmp_path, {"ana": rows})
    out = tmp_path / "r.md"
    result = runner.invoke(
        app, ["report", "-c", str(cb), str(data), "--replicates", "100", "-o", str(out)]
    )
    assert result.exit_code == 0, result.output
    text = _methods(out.read_text("utf-8"))
    assert text.startswith("> One coder coded 12 units")
    assert "could not be assessed" in text
    assert "confidence intervals" not in text
    assert "coders independently" not in text
    assert "· 1 coder ·" in out.read_text("utf-8").split("\n\n", 2)[1]


# ---- report --replicates 2: the paragraph claimed bootstrap intervals that were not given -------
def test_methods_paragraph_says_why_no_interval(tmp_path):
    cb = _write_codebook(tmp_path)
    moods = ["pos", "neg", "neu"]
    a = [(f"u{i}", moods[i % 3], i % 2) for i in range(12)]
    b = [(u, moods[(i + 1) % 3] if i % 4 == 0 else m, f) for i, (u, m, f) in enumerate(a)]
    data = _sheets(tmp_path, {"ana": a, "ben": b})
    out = tmp_path / "r.md"
    args = ["report", "-c", str(cb), str(data), "-o", str(out), "--replicates"]
    assert runner.invoke(app, [*args, "2"]).exit_code == 0
    text = _methods(out.read_text("utf-8"))
    assert "confidence intervals were obtained" not in text
    assert "mood: too few bootstrap replicates were drawn" in text
    assert "flag: the coders agreed on every unit" in text
    assert runner.invoke(app, [*args, "200"]).exit_code == 0
    text = _methods(out.read_text("utf-8"))
    assert "confidence intervals were obtained by bootstrapping" in text
    assert "No interval is given for flag: the coders agreed on every unit" in text


# ---- report with a CJK coder name and label: matplotlib's missing-glyph warning on stderr (and,
# ---- with warnings as errors, exit 4) -------------------------------------------------------------
def test_report_with_cjk_and_unicode_names(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        SMALL_CODEBOOK.replace("label: Neutral", "label: 中立").replace(
            "title: Small test (invented)", "title: Små test ✓ (invented)"
        ),
        encoding="utf-8",
    )
    a = [(f"u{i}", ["pos", "neg", "neu"][i % 3], i % 2) for i in range(12)]
    b = [(u, "neu" if i % 5 == 0 else m, f) for i, (u, m, f) in enumerate(a)]
    data = _sheets(tmp_path, {"李": a, "Ünal": b})
    out = tmp_path / "r.html"
    result = runner.invoke(
        app, ["report", "-c", str(cb), str(data), "--replicates", "50", "-o", str(out)]
    )
    assert result.exit_code == 0, result.output
    assert "Warning" not in result.output
    html = out.read_text("utf-8")
    assert "李" in html
    assert "中立" in html


# ---- validate: "001" in one sheet and 1 (a number) in another gave 2 x 12 partial-unit warnings
# ---- with no word on the likely cause --------------------------------------------------------------
def test_unit_ids_differing_in_leading_zeros_are_pointed_out(tmp_path):
    from openpyxl import Workbook

    cb = _write_codebook(tmp_path)
    data = tmp_path / "sheets"
    data.mkdir()
    lines = ["id;text;mood;flag", *(f"{i:03d};report;pos;0" for i in range(1, 4))]
    # A BOM, semicolons and CRLF line ends, as a spreadsheet program may save them.
    (data / "ana.csv").write_bytes(("\ufeff" + "\r\n".join(lines) + "\r\n").encode("utf-8"))
    wb = Workbook()
    ws = wb.active
    ws.append(["id", "text", "mood", "flag"])
    for i in range(1, 4):
        ws.append([i, "report", "pos", 0])
    wb.save(data / "ben.xlsx")
    before = {p.name: _sha(p) for p in data.iterdir()}
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 0, result.output
    problems = json.loads(result.stdout)["problems"]
    partial = {p["unit"]: p for p in problems if p["code"] == "partial-unit"}
    assert set(partial) == {"001", "002", "003", "1", "2", "3"}
    assert "'1' differs only in leading zeros" in partial["001"]["hint"]
    assert "'003' differs only in leading zeros" in partial["3"]["hint"]
    assert {p.name: _sha(p) for p in data.iterdir()} == before


def test_loose_unit_id():
    from coderel.io.table_checks import _loose_id

    assert _loose_id("ENC-007") == _loose_id("enc-7") == "enc-7"
    assert _loose_id("001") == _loose_id("1") == "1"
    assert _loose_id("100") == "100"
    assert _loose_id("0") == "0"
    assert _loose_id("A 10") == _loose_id("a10")
    assert _loose_id("12.0") == _loose_id("012") == "12"
    assert _loose_id("12.5") == "12.5"


# ---- adjudicate run twice: invalid decisions ('banana', 77) were counted as "decided" ----------
def test_adjudicate_twice_invalid_decisions_stay_open(tmp_path):
    from openpyxl import load_workbook
    from openpyxl.utils import get_column_letter

    cb = _write_codebook(tmp_path)
    a = [("u1", "pos", 0), ("u2", "neg", 1), ("u3", "neu", 0)]
    b = [("u1", "neg", 0), ("u2", "neg", 0), ("u3", "neu", 0)]
    data = _sheets(tmp_path, {"ana": a, "ben": b})
    out = tmp_path / "adj.xlsx"
    args = ["adjudicate", "-c", str(cb), str(data), "-o", str(out), "--json"]
    first = runner.invoke(app, args)
    assert first.exit_code == 0, first.output
    assert json.loads(first.stdout)["open"] == 2
    wb = load_workbook(out)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    col = header.index("decision") + 1
    keys = {ws.cell(r, header.index("key") + 1).value: r for r in range(2, ws.max_row + 1)}
    ws.cell(keys["u1|mood"], col).value = "banana"
    ws.cell(keys["u2|flag"], col).value = 1
    wb.save(out)
    # ben changes his mind on u1 (the disagreement disappears) and codes u3 differently (new one).
    b = [("u1", "pos", 0), ("u2", "neg", 0), ("u3", "pos", 0)]
    (data / "ben.csv").unlink()
    lines = ["id,text,mood,flag", *(f"{u},report {u},{m},{f}" for u, m, f in b)]
    (data / "ben.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    sheets = {p.name: _sha(p) for p in data.iterdir()}
    second = runner.invoke(app, args)
    assert second.exit_code == 0, second.output
    summary = json.loads(second.stdout)
    assert summary["moved"] == 1  # u1|mood (with its invalid decision) is no longer needed
    assert summary["decided"] == 1
    assert summary["open"] == 1
    # Now the invalid decision sits on a cell that is still open: it is an error, not "decided".
    wb = load_workbook(out)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    col = header.index("decision") + 1
    keys = {ws.cell(r, header.index("key") + 1).value: r for r in range(2, ws.max_row + 1)}
    ws.cell(keys["u3|mood"], col).value = "banana"
    wb.save(out)
    third = runner.invoke(app, args)
    assert third.exit_code == 1
    summary = json.loads(third.stdout)
    assert summary["decided"] == 1
    assert summary["open"] == 1
    per = {r["variable"]: r for r in summary["per_variable"]}
    assert per["mood"]["decided"] == 0
    assert per["mood"]["open"] == 1
    bad = [p for p in summary["problems"] if p["code"] == "bad-decision"]
    assert [(p["unit"], p["sheet"]) for p in bad] == [("u3", "to decide")]
    assert bad[0]["cell"] == f"{get_column_letter(col)}{keys['u3|mood']}"
    assert {p.name: _sha(p) for p in data.iterdir()} == sheets


# ---- validate: a coder who left a whole variable blank (and a variable no one coded) passed with
# ---- no word; agree then quietly rested on the other coders -------------------------------------
def test_blank_variable_is_reported(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        SMALL_CODEBOOK
        + "  - name: never\n    level: nominal\n    categories: [{code: a, label: A}]\n",
        encoding="utf-8",
    )
    data = tmp_path / "sheets"
    data.mkdir()
    rows = {"ana": ["pos", "neg", "neu"], "ben": ["", "", ""], "cai": ["pos", "neg", "pos"]}
    for coder, moods in rows.items():
        lines = ["id,text,mood,flag,never"]
        lines += [f"u{i},report,{m},{i % 2}," for i, m in enumerate(moods)]
        (data / f"{coder}.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    # A sheet not yet begun is not reported variable by variable.
    (data / "dee.csv").write_text("id,text,mood,flag,never\nu0,,,,\nu1,,,,\n", encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 0, result.output
    blank = [p for p in json.loads(result.stdout)["problems"] if p["code"] == "blank-variable"]
    assert [(p["coder"], p["variable"], p["file"]) for p in blank] == [
        (None, "never", None),
        ("ben", "mood", "ben.csv"),
    ]
    assert blank[0]["severity"] == "warning"
    assert "no coder coded never" in blank[0]["message"]
    assert "ben left mood blank on all 3 units" in blank[1]["message"]


# ---- coderel agree ... | head -2: the table form exited 1 (rich's own broken-pipe exit), which
# ---- coderel reserves for data problems; the JSON form already exited 0 ------------------------------
def test_table_into_a_closed_pipe_exits_zero():
    import subprocess
    import sys

    root = Path(__file__).resolve().parents[1]
    exe = Path(sys.executable).with_name("coderel")
    args = ["agree", "-c", str(root / "sample_codebooks/wildlife_encounters.yaml")]
    proc = subprocess.Popen(
        [str(exe), *args, str(root / "demo/sheets"), "--replicates", "0", "--pairs"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    proc.stdout.read(10)  # like `| head -c 10`: read a little, then close
    proc.stdout.close()
    err = proc.stderr.read().decode()
    proc.stderr.close()
    assert proc.wait(timeout=60) == 0
    assert "Traceback" not in err
    assert "bug in coderel" not in err


# ---- validate on a CSV with a quote never closed: the rows after it vanished with 0 errors -------
def test_unclosed_quote_in_csv_is_an_error(tmp_path):
    cb = _write_codebook(tmp_path)
    data = tmp_path / "sheets"
    data.mkdir()
    text = 'id,text,mood,flag\nu1,fine,pos,0\nu2,"never closed,neg,1\nu3,x,neu,0\n'
    (data / "ana.csv").write_text(text, encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 1, result.output
    (problem,) = [p for p in json.loads(result.stdout)["problems"] if p["severity"] == "error"]
    assert problem["code"] == "unclosed-quote"
    assert problem["file"] == "ana.csv"
    assert problem["line"] == 3
    # Quotes that are closed, doubled or inside an unquoted cell are fine.
    ok = 'id,text,mood,flag\nu1,"a ""b"", c\nd",pos,0\nu2,5\'11" tall,neg,1\n'
    (data / "ana.csv").write_text(ok, encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 0, result.output


def test_open_quote_scanner_follows_the_csv_module():
    import csv
    import io

    from coderel.io.text_tables import _open_quote_line

    cases = {
        'a,"b\nc': 1,
        'a,b\n"c,d\ne\n': 2,
        'a,"b""c",d\n': None,
        'a,b"c,d\n': None,
        '"a\nb",c\n': None,
        'a;"b\n': 1,
    }
    for text, line in cases.items():
        assert _open_quote_line(text, ";" if ";" in text else ",") == line, text
        # The csv module in strict mode agrees: it fails at the end of the data exactly then.
        delimiter = ";" if ";" in text else ","
        try:
            list(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=True))
            failed = False
        except csv.Error as exc:
            failed = "unexpected end of data" in str(exc)
        assert failed == (line is not None), text


# ---- validate on a tab-separated .csv: one column named 'id\ttext\t...' ------------------------
def test_tab_separated_csv_is_read(tmp_path):
    cb = _write_codebook(tmp_path)
    data = tmp_path / "sheets"
    data.mkdir()
    (data / "ana.csv").write_text("id\ttext\tmood\tflag\nu1\tx\tpos\t0\n", encoding="utf-8")
    (data / "ben.csv").write_text("id,text,mood,flag\nu1,x,pos,0\n", encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["problems"] == []


# ---- a CSV cell's place read "ana.csv!C3:3", like a range ------------------------------------------
def test_csv_cell_place_names_cell_and_line():
    from coderel.problems import make_problem

    p = make_problem("not-a-number", "m", file="ana.csv", cell="C3", line=3)
    assert p.where() == "ana.csv!C3 (line 3)"
    assert make_problem("encoding", "m", file="a.csv", line=2).where() == "a.csv:2"
    assert make_problem("codebook-field", "m", file="cb.yaml", line=7).where() == "cb.yaml:7"


def test_unclosed_quote_line_with_form_feed_and_line_separator_in_cells(tmp_path):
    # str.splitlines would also break at \x0c and \u2028; the csv reader does not.
    cb = _write_codebook(tmp_path)
    data = tmp_path / "sheets"
    data.mkdir()
    text = 'id,text,mood,flag\nu1,"a\x0cb\u2028c ""q""",pos,0\nu2,x,neg,1\n'
    (data / "ana.csv").write_text(text, encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 0, result.output
    (data / "ana.csv").write_text(text + 'u3,"open\x0c,neu,0\n', encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    problems = json.loads(result.stdout)["problems"]
    assert [(p["code"], p["line"]) for p in problems if p["severity"] == "error"] == [
        ("unclosed-quote", 4)
    ]
    # the quote swallowed the rest of u3's row, so u3 holds no value: not coded by ana
    assert [p["message"] for p in problems if p["code"] == "uncoded-unit"] == [
        "ana left 1 unit blank (no value for any variable): u3; it counts as not coded by ana"
    ]


# ---- report with thresholds per variable: the methods paragraph and summary named .800/.667 only,
# ---- and the cautions said ".800 and .667" even when the codebook set .900/.700 for all ----------
def test_report_names_the_codebooks_own_thresholds(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        SMALL_CODEBOOK.replace(
            "  - name: flag\n", "  - name: flag\n    thresholds: {reliable: 0.9, tentative: 0.7}\n"
        ),
        encoding="utf-8",
    )
    moods = ["pos", "neg", "neu"]
    a = [(f"u{i}", moods[i % 3], i % 2) for i in range(12)]
    b = [
        (u, moods[(i + 1) % 3] if i % 4 == 0 else m, 1 - f if i == 3 else f)
        for i, (u, m, f) in enumerate(a)
    ]
    data = _sheets(tmp_path, {"ana": a, "ben": b})
    out = tmp_path / "r.md"
    args = ["report", "-c", str(cb), str(data), "--replicates", "0", "-o", str(out)]
    assert runner.invoke(app, args).exit_code == 0
    md = out.read_text("utf-8")
    assert "(the codebook sets its own thresholds for flag, .900 and .700)" in _methods(md)
    assert "| Reliable | 0 (α ≥ .800; flag by the codebook's own thresholds) |" in md
    # Project-wide thresholds of .900/.700: the cautions name them.
    cb.write_text(
        SMALL_CODEBOOK.replace(
            "unit: id\n", "unit: id\nthresholds: {reliable: 0.9, tentative: 0.7}\n"
        ),
        encoding="utf-8",
    )
    assert runner.invoke(app, args).exit_code == 0
    md = out.read_text("utf-8")
    assert "The thresholds .900 and .700 are conventions" in md
    assert "own thresholds" not in md


# ---- coderel template -o out/ana.xlsx made a folder named ana.xlsx holding the workbooks ---------
def test_template_output_that_looks_like_a_file_is_refused(tmp_path):
    cb = _write_codebook(tmp_path)
    target = tmp_path / "out" / "ana.xlsx"
    result = runner.invoke(app, ["template", "-c", str(cb), "--coders", "ana", "-o", str(target)])
    assert result.exit_code == 2
    assert "looks like a file name" in result.output
    assert not (tmp_path / "out").exists()
    ok = runner.invoke(
        app, ["template", "-c", str(cb), "--coders", "ana", "-o", str(tmp_path / "t")]
    )
    assert ok.exit_code == 0
    assert (tmp_path / "t" / "ana.xlsx").is_file()


# ---- coderel agree --seed -5: internal error (numpy's ValueError), exit 4 -------------------------
def test_negative_seed_is_a_usage_error(tmp_path):
    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"ana": [("u1", "pos", 0)], "ben": [("u1", "neg", 0)]})
    for command in ("agree", "report"):
        args = [command, "-c", str(cb), str(data), "--seed", "-5", "-o", str(tmp_path / "r.md")]
        result = runner.invoke(app, args[:-2] if command == "agree" else args)
        assert result.exit_code == 2, result.output
        assert "--seed" in result.output
        assert "bug in coderel" not in result.output


# ---- Python API: agreement() took replicates=-1, interval_method="foo"; ci_level=1 divided by zero;
# ---- read_codings(cb, "sheets") read the folders 's', 'h', 'e', ... -----------------------------
def test_agreement_settings_are_checked_and_one_path_is_read(tmp_path):
    import pytest

    import coderel
    from coderel.agree import agreement
    from coderel.errors import UsageError

    cb_path = _write_codebook(tmp_path)
    rows = [(f"u{i}", "pos", i % 2) for i in range(3)]
    data = _sheets(tmp_path, {"ana": rows, "ben": rows})
    cb = coderel.load_codebook(cb_path)
    codings = coderel.read_codings(cb, str(data))
    assert list(codings.coders) == ["ana", "ben"]
    assert list(coderel.read_codings(cb, data / "ana.csv").coders) == ["ana"]
    bad = [
        {"replicates": -1},
        {"replicates": 2.5},
        {"seed": -5},
        {"ci_level": 1.0},
        {"ci_level": 0},
        {"ci_level": 95},
        {"interval_method": "normal"},
    ]
    for kwargs in bad:
        with pytest.raises(UsageError):
            agreement(codings, **{"replicates": 10, **kwargs})
    assert agreement(codings, replicates=0, ci_level=0.9).ci_level == 0.9


# ---- coderel agree --replicates 2000000 on a small machine: MemoryError, "a bug in coderel", exit 4
def test_out_of_memory_bootstrap_is_a_usage_error(tmp_path, monkeypatch):
    import coderel.agree.driver

    def no_memory(*_args, **_kwargs):
        raise MemoryError

    monkeypatch.setattr(coderel.agree.driver, "make_weights", no_memory)
    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"ana": [("u1", "pos", 0)], "ben": [("u1", "neg", 0)]})
    result = runner.invoke(app, ["agree", "-c", str(cb), str(data), "--replicates", "2000000"])
    assert result.exit_code == 2, result.output
    assert "not enough memory for 2,000,000 bootstrap replicates" in result.output
    assert "bug in coderel" not in result.output


# ---- coderel merge ... -o notes.txt/m.csv where notes.txt is a file: FileExistsError, exit 4 -------
def test_output_under_a_file_or_onto_a_folder_is_a_usage_error(tmp_path):
    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"ana": [("u1", "pos", 0)], "ben": [("u1", "pos", 0)]})
    (tmp_path / "notes.txt").write_text("mine\n", encoding="utf-8")
    (tmp_path / "folder.csv").mkdir()
    cases = [
        ["merge", "-o", str(tmp_path / "notes.txt" / "m.csv")],
        ["merge", "-o", str(tmp_path / "folder.csv")],
        ["adjudicate", "-o", str(tmp_path / "notes.txt" / "a.xlsx")],
        ["validate", "-o", str(tmp_path / "notes.txt" / "p.csv")],
        ["report", "--replicates", "0", "-o", str(tmp_path / "notes.txt" / "r.html")],
    ]
    for command, *options in cases:
        result = runner.invoke(app, [command, "-c", str(cb), str(data), *options])
        assert result.exit_code == 2, (command, result.output)
        assert "cannot write" in result.output
        assert "bug in coderel" not in result.output
    assert (tmp_path / "notes.txt").read_text("utf-8") == "mine\n"
    assert list((tmp_path / "folder.csv").iterdir()) == []


def _decided_csv_list(tmp_path: Path) -> tuple[Path, Path, Path]:
    """A two-coder project with one disagreement and a CSV list whose decision is filled in."""
    import csv

    cb = _write_codebook(tmp_path)
    data = _sheets(
        tmp_path,
        {"ana": [("u1", "pos", 0), ("u2", "neg", 1)], "ben": [("u1", "neg", 0), ("u2", "neg", 1)]},
    )
    listing = tmp_path / "adj.csv"
    result = runner.invoke(app, ["adjudicate", "-c", str(cb), str(data), "-o", str(listing)])
    assert result.exit_code == 0, result.output
    with listing.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    rows[1][rows[0].index("decision")] = "neg"
    return cb, data, rows


# ---- the adjudication list as CSV, saved again by a spreadsheet program with semicolons: merge
# ---- found "no unit, variable or decision column", and adjudicate kept 0 decisions and wrote over
# ---- the adjudicator's file ------------------------------------------------------------------------
def test_semicolon_adjudication_list_keeps_its_decisions(tmp_path):
    import csv

    cb, data, rows = _decided_csv_list(tmp_path)
    listing = tmp_path / "adj.csv"
    with listing.open("w", encoding="utf-8-sig", newline="") as fh:
        csv.writer(fh, delimiter=";", lineterminator="\r\n").writerows(rows)
    out = tmp_path / "m.csv"
    merged = runner.invoke(
        app,
        [
            "merge",
            "-c",
            str(cb),
            str(data),
            "--decisions",
            str(listing),
            "-o",
            str(out),
            "--strict",
        ],
    )
    assert merged.exit_code == 0, merged.output
    assert "u1,neg,adjudicated" in out.read_text("utf-8")
    again = runner.invoke(
        app, ["adjudicate", "-c", str(cb), str(data), "-o", str(listing), "--json"]
    )
    assert again.exit_code == 0, again.output
    summary = json.loads(again.stdout)
    assert (summary["kept"], summary["decided"]) == (1, 1)


def test_adjudicate_refuses_to_replace_a_list_it_cannot_read(tmp_path):
    cb, data, _ = _decided_csv_list(tmp_path)
    listing = tmp_path / "adj.csv"
    listing.write_text("foo;bar\n1;2\n", encoding="utf-8")  # header lost, decisions unreadable
    before = _sha(listing)
    result = runner.invoke(app, ["adjudicate", "-c", str(cb), str(data), "-o", str(listing)])
    assert result.exit_code == 3, result.output
    assert "nothing was written" in result.output
    assert _sha(listing) == before


# ---- coderel adjudicate ... -o adj.xlsx with a narrative holding control characters (a bell, a
# ---- vertical tab from a word processor): openpyxl's IllegalCharacterError, exit 4; and a narrative
# ---- over 32,767 characters was cut without a word ----------------------------------------------
def test_adjudication_workbook_takes_control_characters_and_long_text(tmp_path):
    from openpyxl import load_workbook

    from coderel.io.tables import MAX_CELL_TEXT

    cb = _write_codebook(tmp_path)
    data = tmp_path / "sheets"
    data.mkdir()
    long_text = "word " * 10000  # 50,000 characters
    (data / "ana.csv").write_text(
        f'id,text,mood,flag\nu1,"bell\x07 line\x0bbreak\x00",pos,0\nu2,"{long_text}",pos,0\n',
        encoding="utf-8",
    )
    (data / "ben.csv").write_text("id,text,mood,flag\nu1,x,neg,0\nu2,y,neg,0\n", encoding="utf-8")
    out = tmp_path / "adj.xlsx"
    result = runner.invoke(app, ["adjudicate", "-c", str(cb), str(data), "-o", str(out)])
    assert result.exit_code == 0, result.output
    ws = load_workbook(out)["to decide"]
    header = [c.value for c in ws[1]]
    texts = [ws.cell(r, header.index("text") + 1).value for r in (2, 3)]
    assert texts[0] == "bell\ufffd line\nbreak\ufffd"
    assert len(texts[1]) == MAX_CELL_TEXT
    assert texts[1].startswith("word word")
    assert texts[1].endswith("the full text is in the input]")
    # The CSV form keeps the whole text.
    csv_out = tmp_path / "adj.csv"
    assert (
        runner.invoke(app, ["adjudicate", "-c", str(cb), str(data), "-o", str(csv_out)]).exit_code
        == 0
    )
    assert long_text.strip() in csv_out.read_text("utf-8")


# ---- coderel agree --json with a refused sheet or a missing codebook: stdout was empty, so a script
# ---- reading the JSON had nothing to parse -----------------------------------------------------------
def test_json_on_stdout_when_a_command_stops(tmp_path):
    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"ana": [("u1", "pos", 0)]})
    (data / "ben.xlsx").write_bytes(b"not a zip archive")
    result = runner.invoke(app, ["agree", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 3
    doc = json.loads(result.stdout)
    assert doc["exit_code"] == 3
    assert [p["code"] for p in doc["problems"]] == ["input-refused"]
    assert doc["problems"][0]["file"] == "ben.xlsx"
    result = runner.invoke(
        app,
        [
            "merge",
            "-c",
            str(tmp_path / "nope.yaml"),
            str(data),
            "-o",
            str(tmp_path / "m.csv"),
            "--json",
        ],
    )
    assert result.exit_code == 2
    doc = json.loads(result.stdout)
    assert doc["exit_code"] == 2
    assert "nope.yaml" in doc["error"]
    # Without --json, stdout stays empty (messages go to stderr).
    result = runner.invoke(app, ["agree", "-c", str(cb), str(data)])
    assert result.exit_code == 3
    assert result.stdout == ""


# ---- coderel agree with one coder: eleven "only 0 units" notes and no word on the reason ----------
def test_agree_with_one_coder_says_why_in_one_line(tmp_path):
    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"ana": [(f"u{i}", "pos", i % 2) for i in range(5)]})
    result = runner.invoke(app, ["agree", "-c", str(cb), str(data), "--replicates", "0"])
    assert result.exit_code == 0, result.output
    assert "only 1 coder(s) (ana): agreement needs at least two coders" in result.output


# ---- coderel template --coders con,ana. wrote con.xlsx and ana..xlsx: Windows cannot create the first
# ---- (a device name) and drops the trailing dot of the second, so the coder's name would change ----
def test_template_refuses_names_windows_cannot_hold(tmp_path):
    cb = _write_codebook(tmp_path)
    for name in ("con", "NUL", "com1", "ana."):
        result = runner.invoke(
            app, ["template", "-c", str(cb), "--coders", name, "-o", str(tmp_path / "t")]
        )
        assert result.exit_code == 2, name
        assert "cannot be a file name" in result.output
    assert not (tmp_path / "t").exists()
    ok = runner.invoke(
        app, ["template", "-c", str(cb), "--coders", "console,nula", "-o", str(tmp_path / "t")]
    )
    assert ok.exit_code == 0, ok.output


# ---- template with unit IDs like -002 or +3 (neutralised to '-002 in the workbook) read back as
# ---- "'-002", so the template's units matched no other sheet -----------------------------------------
def test_template_unit_ids_that_look_like_formulas_read_back_unchanged(tmp_path):
    from openpyxl import load_workbook

    cb = _write_codebook(tmp_path)
    units = tmp_path / "units.txt"
    units.write_bytes("\ufeffu1\r\n-002\r\n+3\r\n@x\r\n=A1\r\n".encode())
    t = tmp_path / "t"
    args = ["template", "-c", str(cb), "--coders", "ana", "-o", str(t), "--units", str(units)]
    assert runner.invoke(app, args).exit_code == 0
    wb = load_workbook(t / "ana.xlsx")
    ws = wb["coding"]
    for r in range(2, 7):
        ws.cell(r, 3).value = "pos"
        ws.cell(r, 4).value = 0
    wb.save(t / "ana.xlsx")
    lines = ["id,text,mood,flag", *(f"{u},x,pos,0" for u in ["u1", "-002", "+3", "@x", "=A1"])]
    (t / "ben.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(t), "--json"])
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["problems"] == []


# ---- a unit ID typed as 1-3 and turned into a date by the spreadsheet read silently as
# ---- "2026-01-03T00:00:00", matching neither the text "1-3" nor the date typed as text -------------
def test_unit_id_held_as_a_date_is_pointed_out(tmp_path):
    import datetime as dt

    from openpyxl import Workbook

    cb = _write_codebook(tmp_path)
    data = tmp_path / "sheets"
    data.mkdir()
    wb = Workbook()
    ws = wb.active
    ws.append(["id", "text", "mood", "flag"])
    ws.append([dt.datetime(2026, 1, 3), "x", "pos", 0])
    ws.append(["u2", "x", "pos", 0])
    wb.save(data / "ana.xlsx")
    (data / "ben.csv").write_text(
        "id,text,mood,flag\n2026-01-03,x,pos,0\nu2,x,pos,0\n", encoding="utf-8"
    )
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    assert result.exit_code == 0, result.output
    problems = json.loads(result.stdout)["problems"]
    assert [(p["code"], p["unit"], p["cell"]) for p in problems] == [
        ("date-unit-id", "2026-01-03", "A2")
    ]
    assert problems[0]["severity"] == "warning"


# ---- merge -o sheets/merged.xlsx, then agree on sheets/: the merged dataset (and its labels sheet)
# ---- were read as two more coders, and alpha rose (species .957 -> .974 on the demo) ------------------
def test_own_outputs_in_the_sheets_folder_are_not_read_as_coders(tmp_path):
    cb = _write_codebook(tmp_path)
    moods = ["pos", "neg", "neu"]
    a = [(f"u{i}", moods[i % 3], i % 2) for i in range(12)]
    b = [(u, moods[(i + 1) % 3] if i % 4 == 0 else m, f) for i, (u, m, f) in enumerate(a)]
    data = _sheets(tmp_path, {"ana": a, "ben": b})
    base = json.loads(
        runner.invoke(
            app, ["agree", "-c", str(cb), str(data), "--replicates", "0", "--json"]
        ).stdout
    )
    outputs = [
        ["merge", "-o", "merged.xlsx"],
        ["merge", "-o", "merged.csv"],
        ["merge", "-o", "merged.parquet"],
        ["adjudicate", "-o", "adj.xlsx"],
        ["adjudicate", "-o", "adj.csv"],
        ["agree", "--replicates", "0", "-o", "agreement.xlsx"],
        ["agree", "--replicates", "0", "-o", "agreement.csv"],
        ["validate", "-o", "problems.csv"],
        ["report", "--replicates", "0", "-o", "report.xlsx"],
    ]
    for command, *options in outputs:
        target = tmp_path / "out" / options[-1]
        result = runner.invoke(app, [command, "-c", str(cb), str(data), *options[:-1], str(target)])
        assert result.exit_code in (0, 1), (command, result.output)
        (data / options[-1]).write_bytes(target.read_bytes())
    result = runner.invoke(app, ["agree", "-c", str(cb), str(data), "--replicates", "0", "--json"])
    assert result.exit_code == 0, result.output
    after = json.loads(result.stdout)
    assert after["coders"] == ["ana", "ben"]
    assert after["variables"] == base["variables"]
    assert "not read, written by coderel" in result.output
    problems = json.loads(
        runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"]).stdout
    )
    skipped = sorted(p["file"] for p in problems["problems"] if p["code"] == "own-output")
    assert skipped == sorted(o[-1] for o in outputs)


# ---- coderel agree on 3 units: no interval, but the verdict said "reliable" (and the report
# ---- counted it among the reliable variables) -------------------------------------------------------
def test_no_verdict_on_a_handful_of_units(tmp_path):
    from coderel.agree import MIN_UNITS_FOR_INTERVAL, agreement

    v = agreement(_codings({"f": [(0, 0), (1, 1), (0, 0)]}), replicates=100).variable("f")
    assert v.coefficients["krippendorff_alpha"].estimate == 1.0
    assert v.verdict == "too few units"
    rows = [(0, 0), (1, 1)] * (MIN_UNITS_FOR_INTERVAL // 2) + [(0, 1)]
    assert agreement(_codings({"f": rows}), replicates=0).variable("f").verdict != "too few units"
    cb = _write_codebook(tmp_path)
    data = _sheets(
        tmp_path,
        {"ana": [("u1", "pos", 0), ("u2", "neg", 1)], "ben": [("u1", "pos", 0), ("u2", "neg", 1)]},
    )
    out = tmp_path / "r.md"
    result = runner.invoke(
        app, ["report", "-c", str(cb), str(data), "--replicates", "0", "-o", str(out)]
    )
    assert result.exit_code == 0, result.output
    md = out.read_text("utf-8")
    assert "| Reliable | 0 (α ≥ .800) |" in md
    assert "| Too few units | 2 (" in md
    text = _methods(md)
    assert "No verdict is given for mood and flag" in text
    assert "reached α ≥" not in text


def test_no_blank_variable_warning_where_skip_logic_says_it_never_applies(tmp_path):
    cb = tmp_path / "cb.yaml"
    cb.write_text(
        SMALL_CODEBOOK
        + "  - name: why\n    level: nominal\n    applies_when: {variable: flag, includes: [1]}\n"
        "    categories: [{code: a, label: A}, {code: b, label: B}]\n",
        encoding="utf-8",
    )
    data = tmp_path / "sheets"
    data.mkdir()
    (data / "ana.csv").write_text(
        "id,text,mood,flag,why\nu1,x,pos,0,\nu2,x,neg,0,\n", encoding="utf-8"
    )
    (data / "ben.csv").write_text(
        "id,text,mood,flag,why\nu1,x,pos,1,a\nu2,x,neg,1,b\n", encoding="utf-8"
    )
    result = runner.invoke(app, ["validate", "-c", str(cb), str(data), "--json"])
    codes = [p["code"] for p in json.loads(result.stdout)["problems"]]
    assert "blank-variable" not in codes


# ---- a decision typed as "7 = Moose" (7 is "Other animal", Moose is 6) was taken as 7 silently ----
def test_decision_whose_code_and_label_disagree_is_refused():
    from coderel.adjudicate import parse_decision
    from coderel.codebook import Category, MissingCode, Variable

    var = Variable(
        "animal",
        "nominal",
        categories=(Category(6, "Moose"), Category(7, "Other animal")),
        missing=(MissingCode(99, "cannot be coded"),),
    )
    token, reason = parse_decision(var, "7 = Moose")
    assert token is None
    assert "code 7 is 'Other animal'" in reason
    assert parse_decision(var, "6 = moose")[0] == ("value", 6)  # case and spaces do not matter
    assert parse_decision(var, "7 =  Other  Animal")[0] == ("value", 7)
    assert parse_decision(var, "99 = cannot be coded")[0] == ("missing", 99)
    assert parse_decision(var, "Moose")[0] == ("value", 6)


# ---- agree -o res.csv --pairs also writes res-pairs.csv: it wrote over a coder's sheet of that name
def test_agree_pairs_file_never_overwrites_an_input(tmp_path):
    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"res-pairs": [("u1", "pos", 0)], "ben": [("u1", "pos", 0)]})
    sheet = data / "res-pairs.csv"
    before = _sha(sheet)
    args = [
        "agree",
        "-c",
        str(cb),
        str(data),
        "--replicates",
        "0",
        "--pairs",
        "-o",
        str(data / "res.csv"),
    ]
    result = runner.invoke(app, args)
    assert result.exit_code == 2
    assert "res-pairs.csv" in result.output
    assert _sha(sheet) == before
    assert not (data / "res.csv").exists()


# ---- a coder's sheet with a title row above the headers: eight errors, none naming the cause -----
def test_title_row_above_the_headers_is_named(tmp_path):
    from openpyxl import Workbook

    cb = _write_codebook(tmp_path)
    wb = Workbook()
    ws = wb.active
    ws.append(["Coding sheet of Ana, March"])
    ws.append([])
    ws.append(["id", "text", "mood", "flag"])
    ws.append(["u1", "x", "pos", 0])
    wb.save(tmp_path / "ana.xlsx")
    result = runner.invoke(app, ["validate", "-c", str(cb), str(tmp_path / "ana.xlsx"), "--json"])
    assert result.exit_code == 1
    (problem,) = [
        p for p in json.loads(result.stdout)["problems"] if p["code"] == "missing-unit-column"
    ]
    assert problem["hint"].startswith("the headers seem to be in row 3: delete the rows above")


# ---- Python API: write_templates(cb, "ana", out) took the name letter by letter ("'a' given twice")
def test_write_templates_takes_one_name_as_it_is(tmp_path):
    import coderel

    cb = coderel.load_codebook(_write_codebook(tmp_path))
    written = coderel.write_templates(cb, "ana", tmp_path / "t", ["u1"])
    assert [p.name for p in written] == ["ana.xlsx"]


# ---- the adjudicator added a column ('my comment') to the list: every decided row was reported as
# ---- a stale decision, and the next adjudicate run dropped the column with its text (now kept) ----
def test_column_added_to_the_list_is_neither_a_coder_nor_silently_dropped(tmp_path):
    from openpyxl import load_workbook

    cb = _write_codebook(tmp_path)
    data = _sheets(
        tmp_path,
        {"ana": [("u1", "pos", 0), ("u2", "neg", 1)], "ben": [("u1", "neg", 0), ("u2", "neg", 0)]},
    )
    listing = tmp_path / "adj.xlsx"
    args = ["adjudicate", "-c", str(cb), str(data), "-o", str(listing), "--json"]
    assert runner.invoke(app, args).exit_code == 0
    wb = load_workbook(listing)
    ws = wb["to decide"]
    header = [c.value for c in ws[1]]
    extra = ws.max_column + 1
    ws.cell(1, extra).value = "my comment"
    for r in range(2, ws.max_row + 1):
        ws.cell(r, header.index("decision") + 1).value = ws.cell(r, header.index("ana") + 1).value
    ws.cell(2, extra).value = "checked twice"
    wb.save(listing)
    # merge: the decisions are used, none is called stale because of the added column.
    out = tmp_path / "m.csv"
    merged = runner.invoke(
        app,
        ["merge", "-c", str(cb), str(data), "--decisions", str(listing), "-o", str(out), "--json"],
    )
    assert merged.exit_code == 0, merged.output
    doc = json.loads(merged.stdout)
    assert doc["totals"]["adjudicated"] == 2
    assert [p["code"] for p in doc["problems"]] == []
    # adjudicate again: the column is kept with its text (said once), decisions kept, none stale.
    again = runner.invoke(app, args)
    assert again.exit_code == 0, again.output
    doc = json.loads(again.stdout)
    assert doc["decided"] == 2
    assert [(p["code"], p["sheet"]) for p in doc["problems"]] == [("kept-column", "to decide")]
    assert doc["kept_columns"] == ["my comment"]
    ws = load_workbook(listing)["to decide"]
    header = [c.value for c in ws[1]]
    assert header[-1] == "my comment"
    assert [row[-1].value for row in ws.iter_rows(min_row=2)] == ["checked twice", None]


def test_renamed_main_sheet_of_the_list_says_how_to_recover(tmp_path):
    from openpyxl import load_workbook

    cb = _write_codebook(tmp_path)
    data = _sheets(tmp_path, {"ana": [("u1", "pos", 0)], "ben": [("u1", "neg", 0)]})
    listing = tmp_path / "adj.xlsx"
    args = ["adjudicate", "-c", str(cb), str(data), "-o", str(listing)]
    assert runner.invoke(app, args).exit_code == 0
    wb = load_workbook(listing)
    wb["to decide"].title = "Decisions"
    wb.save(listing)
    before = _sha(listing)
    result = runner.invoke(app, args)
    assert result.exit_code == 3
    assert "name its main sheet 'to decide' again" in result.output
    assert _sha(listing) == before
