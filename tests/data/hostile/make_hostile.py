"""Write the hostile-input corpus: bombs, crashes and odd names, each small on disk or made here.

Every case is a function that writes its file(s) into a folder and returns the arguments of one
coderel command; ``CASES`` gives, beside each, the exit code and the problem codes expected (see
tests/test_hostile.py, which runs every case in a subprocess under a memory cap and a time limit).
Large inputs are generated here at test time, never committed. The workbooks are written part by
part with :mod:`zipfile` (as a spreadsheet program stores them: ECMA-376 Part 1, SpreadsheetML),
so that a sheet of a million rows takes seconds to write and a declared range costs nothing.

Run ``python make_hostile.py FOLDER`` to write every case into FOLDER for a look by hand.
"""

from __future__ import annotations

import functools
import random
import sys
import zipfile
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
CODEBOOK = HERE / "codebook.yaml"
HEADER = ("report_id", "narrative", "animal", "distance_m")
NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
SHEET_TYPE = REL_NS + "/worksheet"


# ---- workbooks, part by part ------------------------------------------------------------------
def _col(n: int) -> str:
    name = ""
    while n:
        n, rem = divmod(n - 1, 26)
        name = chr(65 + rem) + name
    return name


def _cell(ref: str, value: object) -> str:
    if isinstance(value, int | float) and not isinstance(value, bool):
        return f'<c r="{ref}"><v>{value}</v></c>'
    if isinstance(value, RawNumber):
        return f'<c r="{ref}"><v>{value.digits}</v></c>'
    text = str(value).replace("&", "&amp;").replace("<", "&lt;")
    return f'<c r="{ref}" t="inlineStr"><is><t>{text}</t></is></c>'


@dataclass(frozen=True)
class RawNumber:
    """A number cell written digit for digit (longer than any float)."""

    digits: str


def _rows(rows: Iterable[Iterable[object]], first: int = 1) -> Iterator[str]:
    for r, row in enumerate(rows, start=first):
        cells = "".join(_cell(f"{_col(c)}{r}", v) for c, v in enumerate(row, start=1))
        yield f'<row r="{r}">{cells}</row>'


@dataclass
class Sheet:
    name: str
    rows: Callable[[], Iterator[str]]
    state: str = "visible"
    extra: str = ""  # XML after sheetData (mergeCells ...)
    dimension: str | None = None


def write_workbook(path: Path, sheets: list[Sheet]) -> Path:
    """A minimal .xlsx: content types, relationships, workbook, and each sheet streamed."""
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED, compresslevel=6) as z:
        overrides = "".join(
            f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="application/'
            'vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            for i in range(1, len(sheets) + 1)
        )
        z.writestr(
            "[Content_Types].xml",
            '<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.openxmlformats.org'
            '/package/2006/content-types"><Default Extension="rels" ContentType="application/'
            'vnd.openxmlformats-package.relationships+xml"/><Default Extension="xml" '
            'ContentType="application/xml"/><Override PartName="/xl/workbook.xml" ContentType='
            '"application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
            + overrides
            + "</Types>",
        )
        z.writestr(
            "_rels/.rels",
            f'<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="{PKG_REL}">'
            f'<Relationship Id="rId1" Type="{REL_NS}/officeDocument" Target="xl/workbook.xml"/>'
            "</Relationships>",
        )
        entries = "".join(
            f'<sheet name="{s.name}" sheetId="{i}" state="{s.state}" r:id="rId{i}"/>'
            for i, s in enumerate(sheets, start=1)
        )
        z.writestr(
            "xl/workbook.xml",
            f'<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="{NS}" xmlns:r="{REL_NS}">'
            f"<sheets>{entries}</sheets></workbook>",
        )
        rels = "".join(
            f'<Relationship Id="rId{i}" Type="{SHEET_TYPE}" Target="worksheets/sheet{i}.xml"/>'
            for i in range(1, len(sheets) + 1)
        )
        z.writestr(
            "xl/_rels/workbook.xml.rels",
            f'<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="{PKG_REL}">{rels}'
            "</Relationships>",
        )
        for i, s in enumerate(sheets, start=1):
            with z.open(f"xl/worksheets/sheet{i}.xml", "w", force_zip64=True) as fh:
                dim = f'<dimension ref="{s.dimension}"/>' if s.dimension else ""
                fh.write(
                    f'<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="{NS}">{dim}'
                    "<sheetData>".encode()
                )
                buffer: list[str] = []
                for row in s.rows():
                    buffer.append(row)
                    if len(buffer) >= 5000:
                        fh.write("".join(buffer).encode())
                        buffer.clear()
                fh.write("".join(buffer).encode())
                fh.write(f"</sheetData>{s.extra}</worksheet>".encode())
    return path


def _coded(n: int) -> Callable[[], Iterator[str]]:
    """Header and ``n`` valid rows (one coder's sheet)."""

    def rows() -> Iterator[str]:
        body = ((f"R-{i}", "", 1 + i % 2, 10 * (i % 100)) for i in range(1, n + 1))
        yield from _rows([HEADER])
        yield from _rows(body, first=2)

    return rows


# ---- the cases ------------------------------------------------------------------------------
def merged_everywhere(folder: Path) -> list[str]:
    """Item 1: a 5 KB workbook whose merged range and dimension cover the whole sheet."""
    sheet = Sheet(
        "ana",
        _coded(3),
        dimension="A1:XFD1048576",
        extra='<mergeCells count="1"><mergeCell ref="A2:XFD1048576"/></mergeCells>',
    )
    return _validate(write_workbook(folder / "ana.xlsx", [sheet]))


def _filler(rows: int, cells: int = 20) -> Callable[[], Iterator[str]]:
    """Rows of number cells without addresses (allowed: the parser counts them), written fast.

    A thousand different rows repeat, a period longer than deflate's 32 KB window, so the
    sheet compresses like real data (not past the zip-bomb ratio).
    """
    pool = _pool(cells)

    def make() -> Iterator[str]:
        for i in range(rows):
            yield pool[i % 1000]

    return make


@functools.lru_cache(maxsize=4)
def _pool(cells: int) -> tuple[str, ...]:
    """A thousand rows of ``cells`` random numbers (made once: 950 sheets share them)."""
    rng = random.Random(12)
    return tuple(
        "<row>" + "".join(f"<c><v>{rng.random():.15f}</v></c>" for _ in range(cells)) + "</row>"
        for _ in range(1000)
    )


def many_hidden_sheets(folder: Path) -> list[str]:
    """Item 4: 950 hidden sheets (every one would be parsed by a normal load)."""
    sheets = [Sheet("ana", _coded(3))] + [
        Sheet(f"h{i}", _filler(40), state="hidden") for i in range(950)
    ]
    return _validate(write_workbook(folder / "ana.xlsx", sheets))


def heavy_hidden_sheets(folder: Path) -> list[str]:
    """Item 4: under the sheet limit, 30 hidden sheets of about 5 MB of XML each are not read."""
    sheets = [Sheet("ana", _coded(3))] + [
        Sheet(f"h{i}", _filler(6000), state="hidden") for i in range(30)
    ]
    return _validate(write_workbook(folder / "ana.xlsx", sheets))


def million_rows(folder: Path) -> list[str]:
    """Item 5: a valid workbook of 1,048,576 rows x 4 columns (a spreadsheet's last row)."""
    return _validate(write_workbook(folder / "ana.xlsx", [Sheet("ana", _coded(1_048_575))]))


def rows_past_limit(folder: Path) -> list[str]:
    """A row past the row limit (a spreadsheet program cannot write row 1,048,577)."""

    def rows() -> Iterator[str]:
        yield from _coded(2)()
        yield from _rows([("R-x", "", 1, 1)], first=1_048_577)

    return _validate(write_workbook(folder / "ana.xlsx", [Sheet("ana", rows)]))


def long_numbers_xlsx(folder: Path) -> list[str]:
    """Item 8: 400- and 5,000-digit numbers in cells of a workbook (and a unit ID of 5,000)."""

    def rows() -> Iterator[str]:
        yield from _rows([HEADER])
        yield from _rows(
            [
                ("R-1", "", 1, RawNumber("9" * 400)),
                ("R-2", "", RawNumber("1" * 5000), 5),
                (RawNumber("7" * 5000), "", 1, 5),
            ],
            first=2,
        )

    return _validate(write_workbook(folder / "ana.xlsx", [Sheet("ana", rows)]))


def _csv(path: Path, lines: Iterable[str]) -> Path:
    with open(path, "w", encoding="utf-8", newline="") as fh:
        for line in lines:
            fh.write(line + "\n")
    return path


def _csv_rows(n: int) -> Iterator[str]:
    yield ",".join(HEADER)
    for i in range(1, n + 1):
        yield f"R-{i},,{1 + i % 2},{i % 100}"


def comma_row(folder: Path) -> list[str]:
    """Item 2: 20,000 short rows, then one row with 20,000 commas (line 20,002)."""
    lines = [*_csv_rows(20_000), "R-x,,1,5" + "," * 20_000]
    return _validate(_csv(folder / "ana.csv", lines))


def ragged_row(folder: Path) -> list[str]:
    """Item 2: under the column limit, a row of 5,000 commas (line 2,002) and one with a value
    past the header (line 2,004): each a located problem, no row widened."""
    lines = [*_csv_rows(2_000), "R-x,,1,5" + "," * 5_000, "R-y,,1,5", "R-z,,1,5,lost"]
    return _validate(_csv(folder / "ana.csv", lines))


def wide_row(folder: Path) -> list[str]:
    """Item 2: one row of 20,000 filled cells, past the column limit: a located problem."""
    lines = [*_csv_rows(200), "R-x,,1,5," + ",".join(["x"] * 20_000)]
    return _validate(_csv(folder / "ana.csv", lines))


def comma_square(folder: Path) -> list[str]:
    """Item 2: 3,000 rows of 3,000 commas each (44 KB)."""
    lines = [",".join(HEADER)] + [f"R-{i},,1,5" + "," * 3000 for i in range(3000)]
    return _validate(_csv(folder / "ana.csv", lines))


def long_narrative(folder: Path) -> list[str]:
    """Item 9: a narrative of 300,000 characters (past the csv module's 131,072)."""
    text = "The elk stood still. " * 15_000
    lines = [",".join(HEADER), f'R-1,"{text}",1,5', "R-2,,2,6"]
    return _validate(_csv(folder / "ana.csv", lines))


def huge_field(folder: Path) -> list[str]:
    """Item 9: one field of 3,000,000 characters, past the field limit: refused with its line."""
    lines = [",".join(HEADER), "R-1,,1,5", f'R-2,"{"z" * 3_000_000}",1,5']
    return _validate(_csv(folder / "ana.csv", lines))


def long_numbers_csv(folder: Path) -> list[str]:
    """Item 8: 400- and 5,000-digit numbers and an overflowing exponent in a CSV sheet."""
    lines = [
        ",".join(HEADER),
        f"R-1,,1,{'9' * 400}",
        f"R-2,,{'1' * 5000},5",
        "R-3,,1e999,5",
        f"R-4,,1,{'4' * 5000}",
    ]
    return _validate(_csv(folder / "ana.csv", lines))


def constant_parquet(folder: Path) -> list[str]:
    """Item 3: a small parquet file of 30 million constant rows."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = 30_000_000
    zeros = pa.array(np.zeros(n, dtype=np.int8))
    table = pa.table(
        {
            name: pa.DictionaryArray.from_arrays(zeros, pa.array([value]))
            for name, value in (
                ("unit", "R-1"),
                ("coder", "ana"),
                ("variable", "animal"),
                ("value", "1"),
            )
        }
    )
    path = folder / "long.parquet"
    pq.write_table(table, path, row_group_size=5_000_000)
    return _validate(path)


def deep_codebook_flow(folder: Path) -> list[str]:
    """Item 10: a codebook of 50,000 nested brackets."""
    cb = folder / "deep.yaml"
    cb.write_text("title: t\nvariables: " + "[" * 50_000 + "]" * 50_000 + "\n", "utf-8")
    return ["codebook", "check", str(cb), "--json"]


def deep_codebook_blocks(folder: Path) -> list[str]:
    """Item 10: a codebook of 1,200 nested blocks."""
    cb = folder / "deep.yaml"
    body = "".join("  " * i + f"k{i}:\n" for i in range(1, 1201))
    cb.write_text("title: t\nvariables:\n  - name: v\n    level: ratio\nx:\n" + body, "utf-8")
    return ["codebook", "check", str(cb), "--json"]


def deep_codebook_json(folder: Path) -> list[str]:
    """Item 10: a Table Schema (JSON) codebook nested 100,000 levels deep."""
    cb = folder / "deep.json"
    cb.write_text('{"fields": ' + "[" * 100_000 + "]" * 100_000 + "}", "utf-8")
    return ["codebook", "check", str(cb), "--json"]


def long_numbers_codebook(folder: Path) -> list[str]:
    """Item 8: 400-digit range, threshold and missing code; a 5,000-digit code."""
    cb = folder / "cb.yaml"
    cb.write_text(
        "title: t\nthresholds: {reliable: " + "9" * 400 + "}\nvariables:\n"
        "  - name: size\n    level: ratio\n    range: [0, " + "9" * 400 + "]\n"
        "    missing: [" + "8" * 400 + "]\n"
        "  - name: kind\n    level: nominal\n    categories: [{code: "
        + "1" * 5000
        + ", label: a}]\n",
        "utf-8",
    )
    return ["codebook", "check", str(cb), "--json"]


def _validate(*paths: Path) -> list[str]:
    return ["validate", "-c", str(CODEBOOK), *map(str, paths), "--json"]


@dataclass(frozen=True)
class Case:
    """One hostile input: how to make it, what exit code and problem codes must come out."""

    make: Callable[[Path], list[str]]
    exit_code: int
    codes: frozenset[str] = field(default_factory=frozenset)
    #: Raise a limit for this case (environment variables, docs/limits.md).
    env: tuple[tuple[str, str], ...] = ()
    #: Seconds allowed (the machine is shared; a regression takes minutes, not seconds).
    seconds: int = 120
    #: (problem code, line) pairs that must be among the problems (a located problem).
    located: tuple[tuple[str, int], ...] = ()


CASES: dict[str, Case] = {
    "merged_everywhere": Case(merged_everywhere, 0, frozenset({"merged-cells"})),
    "many_hidden_sheets": Case(many_hidden_sheets, 3, frozenset({"input-refused"})),
    "rows_past_limit": Case(rows_past_limit, 3, frozenset({"input-refused"})),
    "long_numbers_xlsx": Case(long_numbers_xlsx, 1, frozenset({"number-too-long"})),
    "comma_row": Case(
        comma_row, 1, frozenset({"too-many-columns"}), located=(("too-many-columns", 20_002),)
    ),
    "ragged_row": Case(
        ragged_row,
        1,
        frozenset({"ragged-row"}),
        located=(("ragged-row", 2_002), ("ragged-row", 2_004)),
    ),
    "wide_row": Case(
        wide_row, 1, frozenset({"too-many-columns"}), located=(("too-many-columns", 202),)
    ),
    "comma_square": Case(comma_square, 1, frozenset({"ragged-row"}), located=(("ragged-row", 2),)),
    "long_narrative": Case(long_narrative, 0),
    "huge_field": Case(huge_field, 3, frozenset({"input-refused"})),
    "long_numbers_csv": Case(
        long_numbers_csv, 1, frozenset({"number-too-long", "not-in-codebook"})
    ),
    "constant_parquet": Case(constant_parquet, 3, frozenset({"input-refused"})),
    "deep_codebook_flow": Case(deep_codebook_flow, 1, frozenset({"codebook-syntax"})),
    "deep_codebook_blocks": Case(deep_codebook_blocks, 1, frozenset({"codebook-syntax"})),
    "deep_codebook_json": Case(deep_codebook_json, 1, frozenset({"codebook-syntax"})),
    "long_numbers_codebook": Case(
        long_numbers_codebook, 1, frozenset({"codebook-field", "bad-range"})
    ),
}

#: Cases that take long to write and read; run with CODEREL_SLOW_TESTS=1.
SLOW: dict[str, Case] = {
    # 30 hidden sheets of 5 MB of XML each (about a minute to write): never parsed
    "heavy_hidden_sheets": Case(heavy_hidden_sheets, 0, seconds=300),
    # 4 million cells: past the default cell limit, refused as soon as the stream passes it
    "million_rows": Case(million_rows, 3, frozenset({"input-refused"}), seconds=600),
}


def main(folder: str) -> None:
    root = Path(folder)
    for name, case in {**CASES, **SLOW}.items():
        sub = root / name
        sub.mkdir(parents=True, exist_ok=True)
        print(name, " ".join(case.make(sub)))


if __name__ == "__main__":
    main(sys.argv[1])
