"""Writing output tables as csv, xlsx or parquet: atomic, neutralised and byte-reproducible.

* Every write goes through :mod:`coderel.io.atomic` (temporary file + rename), so a crash mid-write
  leaves the previous output intact.
* Text cells written to csv and xlsx are neutralised with :mod:`coderel.io.safe_text` (a leading
  ``'`` before ``= + - @``, tab or carriage return); parquet keeps the stored value unchanged.
* The same table written twice gives the same bytes: workbook properties carry a fixed date and the
  xlsx zip members a fixed time stamp.
"""

from __future__ import annotations

import datetime as _dt
import io
import os
import re
import zipfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any, Literal

import pandas as pd
from openpyxl import Workbook
from openpyxl.styles import Alignment, Font

from coderel.errors import UsageError
from coderel.io.atomic import atomic_path, write_text
from coderel.io.safe_text import neutralise, neutralise_frame

TableFormat = Literal["csv", "xlsx", "parquet"]
TABLE_FORMATS: tuple[str, ...] = ("csv", "xlsx", "parquet")

#: The date written into workbook properties, so that outputs are byte-identical across runs.
FIXED_TIME = _dt.datetime(2000, 1, 1, 0, 0, 0)
_ZIP_TIME = (1980, 1, 1, 0, 0, 0)
_CORE_TIME = re.compile(rb"(<dcterms:(created|modified)[^>]*>)[^<]*(</dcterms:\2>)")


def table_format(path: str | os.PathLike[str]) -> TableFormat:
    """The output form named by a path's extension; :class:`UsageError` for any other."""
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in TABLE_FORMATS:
        raise UsageError(
            f"cannot write {Path(path).name!r}: the output must end in .csv, .xlsx or .parquet"
        )
    return suffix  # type: ignore[return-value]


def csv_text(frame: pd.DataFrame) -> str:
    """A frame as neutralised CSV text (UTF-8, ``\\n`` line endings, no index)."""
    return neutralise_frame(frame).to_csv(index=False, lineterminator="\n")


def write_csv(frame: pd.DataFrame, path: str | os.PathLike[str]) -> None:
    """Write ``frame`` as CSV atomically, text cells neutralised."""
    write_text(path, csv_text(frame))


def write_parquet(frame: pd.DataFrame, path: str | os.PathLike[str]) -> None:
    """Write ``frame`` as parquet atomically; values are stored exactly as they are."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.Table.from_pandas(frame, preserve_index=False)
    with atomic_path(path) as tmp:
        pq.write_table(table, tmp, compression="snappy")


def cell_value(value: Any) -> Any:
    """A value ready for an openpyxl cell: ``None`` for missing, neutralised text, plain numbers."""
    if value is None:
        return None
    if type(value) is str:  # the commonest cell, none of the checks below applies to it
        return _fit_cell(neutralise(value))
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        value = value.item()
    if isinstance(value, tuple | list):
        value = ";".join(str(v) for v in value)
    if isinstance(value, bool | int | float):
        return value
    return _fit_cell(neutralise(str(value)))


#: The most characters a spreadsheet cell holds (Excel's limit; openpyxl cuts longer text).
MAX_CELL_TEXT = 32767
_CUT_NOTE = (
    " … [cut: the spreadsheet cell limit is 32,767 characters; the full text is in the input]"
)
#: Control characters that XML 1.0, and so xlsx, cannot hold (openpyxl raises on them).
_XML_ILLEGAL = re.compile(r"[\x00-\x08\x0e-\x1f]")


def _fit_cell(text: str) -> str:
    """Text an xlsx cell can hold: a line break for vertical tab and form feed (as word
    processors export line and page breaks), U+FFFD for other control characters, and a
    visible note where text is cut to :data:`MAX_CELL_TEXT` characters."""
    text = _XML_ILLEGAL.sub("\ufffd", text.replace("\x0b", "\n").replace("\x0c", "\n"))
    if len(text) > MAX_CELL_TEXT:
        text = text[: MAX_CELL_TEXT - len(_CUT_NOTE)] + _CUT_NOTE
    return text


#: The most rows a sheet of a workbook holds (ECMA-376 Part 1, 18.3.1.73: ``r`` up to
#: 1,048,576), the header included.
SHEET_ROWS = 1_048_576


def check_sheet_rows(rows: int, path: str | os.PathLike[str], sheet: str) -> None:
    """Refuse (:class:`UsageError`, nothing written) a sheet of ``rows`` rows below its header
    that a workbook cannot hold: a writer would drop the rows past the limit, or write a file
    that spreadsheet programs do not open."""
    if rows + 1 > SHEET_ROWS:
        raise UsageError(
            f"cannot write {Path(path).name!r}: its sheet {sheet!r} would have {rows:,} rows, "
            f"more than a workbook sheet holds ({SHEET_ROWS - 1:,} below the header); write it "
            "as .csv (or .parquet for a dataset) instead"
        )


def fill_sheet(ws: Any, frame: pd.DataFrame, *, freeze: str = "A2", width: int = 60) -> None:
    """Write ``frame`` into an openpyxl worksheet: bold frozen header, neutralised cells."""
    ws.append([cell_value(str(c)) for c in frame.columns])
    for cell in ws[1]:
        cell.font = Font(bold=True)
    for row in frame.itertuples(index=False, name=None):
        ws.append([cell_value(v) for v in row])
    ws.freeze_panes = freeze
    for idx, col in enumerate(frame.columns, start=1):
        letter = ws.cell(row=1, column=idx).column_letter
        sample = [len(str(v)) for v in frame[col].head(200) if v is not None]
        longest = max([len(str(col)), *sample])
        ws.column_dimensions[letter].width = min(max(8, longest + 2), width)
        if longest > width:
            for (cell,) in ws.iter_rows(min_row=2, min_col=idx, max_col=idx):
                cell.alignment = Alignment(wrap_text=True, vertical="top")


def workbook_bytes(wb: Workbook) -> bytes:
    """A workbook's xlsx bytes with fixed time stamps, so equal content gives equal bytes."""
    wb.properties.created = FIXED_TIME
    wb.properties.modified = FIXED_TIME
    wb.properties.creator = "coderel"
    buffer = io.BytesIO()
    wb.save(buffer)
    return normalise_xlsx(buffer.getvalue())


def save_workbook(wb: Workbook, path: str | os.PathLike[str]) -> None:
    """Save a workbook atomically with fixed time stamps, so equal content gives equal bytes."""
    data = workbook_bytes(wb)
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)


def normalise_xlsx(data: bytes) -> bytes:
    """Rewrite an xlsx archive with fixed member times and fixed created/modified dates."""
    stamp = FIXED_TIME.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    out = io.BytesIO()
    with (
        zipfile.ZipFile(io.BytesIO(data)) as src,
        zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst,
    ):
        for info in src.infolist():
            content = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                content = _CORE_TIME.sub(rb"\g<1>" + stamp + rb"\g<3>", content)
            member = zipfile.ZipInfo(info.filename, date_time=_ZIP_TIME)
            member.compress_type = zipfile.ZIP_DEFLATED
            member.external_attr = 0o600 << 16
            dst.writestr(member, content)
    return out.getvalue()


def write_xlsx(sheets: Mapping[str, pd.DataFrame], path: str | os.PathLike[str]) -> None:
    """Write one sheet per frame (in mapping order) to an xlsx file, atomically and neutralised."""
    for name, frame in sheets.items():
        check_sheet_rows(len(frame), path, name)
    wb = Workbook()
    wb.remove(wb.active)
    for name, frame in sheets.items():
        fill_sheet(wb.create_sheet(title=name), frame)
    save_workbook(wb, path)


def write_table(
    frame: pd.DataFrame,
    path: str | os.PathLike[str],
    *,
    extra_sheets: Mapping[str, pd.DataFrame] | None = None,
    sheet: str = "data",
) -> TableFormat:
    """Write ``frame`` in the form named by ``path``'s extension; return that form.

    ``extra_sheets`` are added after the main sheet in xlsx and ignored by csv and parquet.
    """
    form = table_format(path)
    if form == "csv":
        write_csv(frame, path)
    elif form == "parquet":
        write_parquet(frame, path)
    else:
        write_xlsx({sheet: frame, **(extra_sheets or {})}, path)
    return form
