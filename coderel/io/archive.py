"""Safety checks on an input file before any parser opens it.

An ``.xlsx`` workbook is a zip archive of XML parts. Before openpyxl reads one we check, from the
zip's central directory only (nothing is decompressed), that:

* the file is not larger than :attr:`Limits.max_file_bytes`;
* it is a zip at all: a legacy ``.xls`` workbook and a password-protected ``.xlsx`` are both OLE2
  compound files (magic ``D0 CF 11 E0``), which coderel does not read;
* the directory is readable (a truncated or corrupt zip is refused);
* it holds at most :attr:`Limits.max_entries` entries;
* the declared uncompressed size stays within :attr:`Limits.max_uncompressed_bytes` and no large
  entry expands more than :attr:`Limits.max_ratio` times (a "zip bomb");
* it has the parts of a workbook (``[Content_Types].xml`` and ``xl/workbook.xml``);
* it holds at most :attr:`Limits.max_sheets` worksheets.

The same :class:`Limits` bound what the readers build afterwards (rows, columns, cells, the
length of one CSV field) and what a Parquet file declares in its footer (rows, uncompressed
size), so that every file coderel reads, coders' sheets and decisions files alike, is answered
within a bounded memory and time. ``docs/limits.md`` lists every limit with its default; each
can be raised for one run with an environment variable ``CODEREL_<NAME>``
(``CODEREL_MAX_ROWS=2000000``).

Each refusal raises :class:`coderel.errors.InputRefused` with a message that names the file's
problem and the formats coderel reads; the reader turns it into an ``input-refused`` problem so
that every file is still reported together. XML inside the archive is parsed by openpyxl through
defusedxml (see :mod:`coderel.io.xlsx`), which stops entity-expansion attacks.
"""

from __future__ import annotations

import os
import re
import zipfile
from dataclasses import dataclass, fields, replace
from pathlib import Path

from coderel.errors import InputRefused, UsageError

OLE2_MAGIC = bytes.fromhex("D0CF11E0A1B11AE1")
ZIP_MAGIC = b"PK\x03\x04"
PARQUET_MAGIC = b"PAR1"
SUPPORTED = "coderel reads .xlsx workbooks, UTF-8 .csv files and .parquet files"


@dataclass(frozen=True, slots=True)
class Limits:
    """Safety limits for input files (generous for coding sheets, small for attacks).

    Each field can be set for one run with the environment variable ``CODEREL_`` + its name in
    capitals (``CODEREL_MAX_ROWS=2000000``); see :meth:`from_env` and ``docs/limits.md``.
    """

    #: Largest input file on disk.
    max_file_bytes: int = 100 * 1024 * 1024
    #: Most entries in a workbook's zip archive.
    max_entries: int = 10_000
    #: Largest total of a workbook's parts when unpacked (all parts together), and the largest
    #: uncompressed size a Parquet file may declare.
    max_uncompressed_bytes: int = 512 * 1024 * 1024
    #: Most a part larger than ``ratio_floor_bytes`` may expand when unpacked.
    max_ratio: float = 200.0
    #: Entries smaller than this are never refused for their ratio (tiny XML compresses well).
    ratio_floor_bytes: int = 1024 * 1024
    #: Most worksheets in one workbook (hidden ones included).
    max_sheets: int = 100
    #: Most rows in one sheet or file (a spreadsheet program's own limit is 1,048,576).
    max_rows: int = 1_048_576
    #: Most columns in one row (a spreadsheet program's own limit is 16,384).
    max_columns: int = 16_384
    #: Most cells (rows x columns) kept from one sheet or file.
    max_cells: int = 2_000_000
    #: Longest text in one CSV field, in characters.
    max_field_chars: int = 1_000_000

    @classmethod
    def from_env(cls, environ: dict[str, str] | None = None) -> Limits:
        """The defaults, with each ``CODEREL_<FIELD>`` found in the environment applied.

        Raises
        ------
        UsageError
            When such a variable does not hold a positive number.
        """
        env = os.environ if environ is None else environ
        changes: dict[str, int | float] = {}
        for f in fields(cls):
            raw = env.get("CODEREL_" + f.name.upper())
            if raw is None:
                continue
            text = raw.strip().replace("_", "")
            if not re.fullmatch(r"[0-9]{1,15}(\.[0-9]{1,6})?", text) or float(text) <= 0:
                raise UsageError(
                    f"CODEREL_{f.name.upper()}={raw[:40]!r} is not a positive number; "
                    "see docs/limits.md"
                )
            changes[f.name] = float(text) if f.type == "float" else int(float(text))
        return replace(cls(), **changes)


def _env_limits() -> tuple[Limits, str | None]:
    try:
        return Limits.from_env(), None
    except UsageError as exc:
        return Limits(), str(exc)


#: The limits in force: the defaults, raised or lowered by ``CODEREL_<NAME>`` variables.
DEFAULT_LIMITS, _ENV_ERROR = _env_limits()


def check_env() -> None:
    """Raise :class:`UsageError` when a ``CODEREL_<NAME>`` limit variable is malformed."""
    if _ENV_ERROR is not None:
        raise UsageError(_ENV_ERROR)


def raise_hint(name: str) -> str:
    """How to raise one limit: the environment variable that sets it."""
    return f"set CODEREL_{name.upper()} to raise this limit (docs/limits.md)"


def shown_name(path: Path) -> str:
    """The file's name as valid text: bytes that are not UTF-8 (kept by Python as lone
    surrogates) are written as ``\\xff`` escapes, so the name can be printed and saved."""
    return path.name.encode("utf-8", "surrogateescape").decode("utf-8", "backslashreplace")


def text_name(path: Path) -> str:
    """The file's name; refuse a name that is not UTF-8 text (it would reach every output).

    Raises
    ------
    InputRefused
        Naming the file with its odd bytes escaped.
    """
    try:
        path.name.encode("utf-8")
    except UnicodeEncodeError:
        raise InputRefused(
            f"the file name {shown_name(path)!r} is not UTF-8 text (a byte another system "
            "wrote); rename the file"
        ) from None
    return path.name


def _mb(n: int) -> str:
    return f"{n / (1024 * 1024):.0f} MB"


def check_size(path: Path, limits: Limits = DEFAULT_LIMITS) -> int:
    """Return the file's size; refuse it when over :attr:`Limits.max_file_bytes`."""
    check_env()
    size = path.stat().st_size
    if size > limits.max_file_bytes:
        raise InputRefused(
            f"{path.name} is {_mb(size)}, over the limit of {_mb(limits.max_file_bytes)} "
            f"for one input file; split it into smaller files, or {raise_hint('max_file_bytes')}"
        )
    return size


def describe_ole2(head: bytes, path: Path) -> str:
    """A refusal message for an OLE2 compound file: encrypted workbook or legacy .xls."""
    if "EncryptedPackage".encode("utf-16-le") in head:
        return (
            f"{path.name} is a password-protected (encrypted) workbook; remove the password "
            f"in your spreadsheet program and save as .xlsx ({SUPPORTED})"
        )
    return (
        f"{path.name} is a legacy .xls workbook (or another OLE2 file); open it in your "
        f"spreadsheet program and save it as .xlsx ({SUPPORTED})"
    )


def check_workbook(path: Path, limits: Limits = DEFAULT_LIMITS) -> None:
    """Refuse a workbook that is not a safe, well-formed ``.xlsx`` zip (see module docstring).

    Raises
    ------
    InputRefused
        With a message naming the reason and the supported formats.
    """
    check_size(path, limits)
    with open(path, "rb") as fh:
        head = fh.read(8)
        if head == OLE2_MAGIC:
            fh.seek(0)
            raise InputRefused(describe_ole2(fh.read(limits.max_file_bytes), path))
    if not head.startswith(ZIP_MAGIC):
        raise InputRefused(f"{path.name} is not an .xlsx workbook (not a zip archive); {SUPPORTED}")
    try:
        with zipfile.ZipFile(path) as archive:
            infos = archive.infolist()
    except (zipfile.BadZipFile, OSError, ValueError, EOFError):
        raise InputRefused(
            f"{path.name} is a damaged workbook (its zip directory cannot be read); "
            "open and re-save it in your spreadsheet program"
        ) from None
    if len(infos) > limits.max_entries:
        raise InputRefused(
            f"{path.name} holds {len(infos)} archive entries, over the limit of "
            f"{limits.max_entries}; this is not an ordinary coding sheet"
        )
    total = 0
    for info in infos:
        total += info.file_size
        if info.file_size > limits.ratio_floor_bytes and info.file_size > limits.max_ratio * max(
            info.compress_size, 1
        ):
            ratio = info.file_size // max(info.compress_size, 1)
            raise InputRefused(
                f"{path.name} has a part that expands {ratio}"
                f" times when unpacked (limit {limits.max_ratio:.0f}); refused as a possible "
                "zip bomb"
            )
    if total > limits.max_uncompressed_bytes:
        raise InputRefused(
            f"{path.name} unpacks to {_mb(total)}, over the limit of "
            f"{_mb(limits.max_uncompressed_bytes)}; refused as a possible zip bomb "
            f"({raise_hint('max_uncompressed_bytes')})"
        )
    names = {info.filename for info in infos}
    if "[Content_Types].xml" not in names or "xl/workbook.xml" not in names:
        raise InputRefused(f"{path.name} is a zip archive but not an .xlsx workbook; {SUPPORTED}")
    sheets = sum(1 for n in names if _SHEET_PART.fullmatch(n))
    if sheets > limits.max_sheets:
        raise InputRefused(
            f"{path.name} holds {sheets} worksheets, over the limit of {limits.max_sheets}; "
            f"this is not an ordinary coding workbook ({raise_hint('max_sheets')})"
        )


#: Worksheet parts of a workbook (``xl/worksheets/sheet1.xml``); chart sheets live elsewhere.
_SHEET_PART = re.compile(r"xl/worksheets/[^/]+\.xml", re.IGNORECASE)


def check_parquet(path: Path, limits: Limits = DEFAULT_LIMITS) -> None:
    """Refuse a ``.parquet`` file that is over the size limit or lacks the Parquet magic bytes."""
    size = check_size(path, limits)
    with open(path, "rb") as fh:
        head = fh.read(4)
        fh.seek(max(size - 4, 0))
        tail = fh.read(4)
    if head != PARQUET_MAGIC or tail != PARQUET_MAGIC:
        raise InputRefused(f"{path.name} is not a Parquet file (damaged or misnamed); {SUPPORTED}")
    check_parquet_metadata(path, limits)


def check_parquet_metadata(path: Path, limits: Limits = DEFAULT_LIMITS) -> None:
    """Refuse a Parquet file whose footer declares too many rows, columns or bytes.

    Only the footer is read (no column data), so a file of a few hundred kilobytes that
    declares millions of constant rows is refused before it is expanded.
    """
    import pyarrow.parquet as pq

    try:
        meta = pq.read_metadata(path)
    except Exception as exc:  # pyarrow raises many types on damaged footers
        raise InputRefused(
            f"{path.name} cannot be read as Parquet ({type(exc).__name__})"
        ) from None
    if meta.num_rows > limits.max_rows:
        raise InputRefused(
            f"{path.name} declares {meta.num_rows} rows, over the limit of {limits.max_rows} "
            f"for one file; split it, or {raise_hint('max_rows')}"
        )
    if meta.num_columns > limits.max_columns:
        raise InputRefused(
            f"{path.name} declares {meta.num_columns} columns, over the limit of "
            f"{limits.max_columns} ({raise_hint('max_columns')})"
        )
    if meta.num_rows * max(meta.num_columns, 1) > limits.max_cells:
        raise InputRefused(
            f"{path.name} declares {meta.num_rows} rows x {meta.num_columns} columns, over the "
            f"limit of {limits.max_cells} cells for one file ({raise_hint('max_cells')})"
        )
    unpacked = sum(
        meta.row_group(i).column(j).total_uncompressed_size
        for i in range(meta.num_row_groups)
        for j in range(meta.num_columns)
    )
    if unpacked > limits.max_uncompressed_bytes:
        raise InputRefused(
            f"{path.name} unpacks to {_mb(unpacked)}, over the limit of "
            f"{_mb(limits.max_uncompressed_bytes)} ({raise_hint('max_uncompressed_bytes')})"
        )


def check_text(path: Path, limits: Limits = DEFAULT_LIMITS) -> None:
    """Refuse a ``.csv`` file over the size limit or that is really a workbook."""
    check_size(path, limits)
    with open(path, "rb") as fh:
        head = fh.read(8)
    if head == OLE2_MAGIC:
        with open(path, "rb") as fh:
            raise InputRefused(describe_ole2(fh.read(limits.max_file_bytes), path))
    if head.startswith(ZIP_MAGIC):
        raise InputRefused(
            f"{path.name} is a zip archive (probably a workbook) named .csv; rename it to .xlsx"
        )
