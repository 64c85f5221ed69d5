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
* it has the parts of a workbook (``[Content_Types].xml`` and ``xl/workbook.xml``).

Each refusal raises :class:`coderel.errors.InputRefused` with a message that names the file's
problem and the formats coderel reads; the reader turns it into an ``input-refused`` problem so
that every file is still reported together. XML inside the archive is parsed by openpyxl through
defusedxml (see :mod:`coderel.io.xlsx`), which stops entity-expansion attacks.
"""

from __future__ import annotations

import zipfile
from dataclasses import dataclass
from pathlib import Path

from coderel.errors import InputRefused

OLE2_MAGIC = bytes.fromhex("D0CF11E0A1B11AE1")
ZIP_MAGIC = b"PK\x03\x04"
PARQUET_MAGIC = b"PAR1"
SUPPORTED = "coderel reads .xlsx workbooks, UTF-8 .csv files and .parquet files"


@dataclass(frozen=True, slots=True)
class Limits:
    """Safety limits for input files (generous for coding sheets, small for attacks)."""

    max_file_bytes: int = 100 * 1024 * 1024
    max_entries: int = 10_000
    max_uncompressed_bytes: int = 1024 * 1024 * 1024
    max_ratio: float = 200.0
    #: Entries smaller than this are never refused for their ratio (tiny XML compresses well).
    ratio_floor_bytes: int = 1024 * 1024


DEFAULT_LIMITS = Limits()


def _mb(n: int) -> str:
    return f"{n / (1024 * 1024):.0f} MB"


def check_size(path: Path, limits: Limits = DEFAULT_LIMITS) -> int:
    """Return the file's size; refuse it when over :attr:`Limits.max_file_bytes`."""
    size = path.stat().st_size
    if size > limits.max_file_bytes:
        raise InputRefused(
            f"{path.name} is {_mb(size)}, over the limit of {_mb(limits.max_file_bytes)} "
            "for one input file; split it into smaller files"
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
            f"{_mb(limits.max_uncompressed_bytes)}; refused as a possible zip bomb"
        )
    names = {info.filename for info in infos}
    if "[Content_Types].xml" not in names or "xl/workbook.xml" not in names:
        raise InputRefused(f"{path.name} is a zip archive but not an .xlsx workbook; {SUPPORTED}")


def check_parquet(path: Path, limits: Limits = DEFAULT_LIMITS) -> None:
    """Refuse a ``.parquet`` file that is over the size limit or lacks the Parquet magic bytes."""
    size = check_size(path, limits)
    with open(path, "rb") as fh:
        head = fh.read(4)
        fh.seek(max(size - 4, 0))
        tail = fh.read(4)
    if head != PARQUET_MAGIC or tail != PARQUET_MAGIC:
        raise InputRefused(f"{path.name} is not a Parquet file (damaged or misnamed); {SUPPORTED}")


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
