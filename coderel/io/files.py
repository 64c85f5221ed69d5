"""Which files are read: folders expanded into their data files, in name order.

Hidden files and ``~$`` lock files are skipped; files that look like coding data in a format
coderel does not read (``.xls``, ``.ods``...) are kept, so that they are refused with a problem
rather than skipped without a word.
"""

from __future__ import annotations

from collections.abc import Sequence
from os import PathLike
from pathlib import Path

from coderel.errors import UsageError

DATA_SUFFIXES: tuple[str, ...] = (".xlsx", ".csv", ".parquet")
#: Files that look like coding data coderel cannot read: inside a folder they are refused
#: (exit 3) rather than skipped, so that no coder goes missing without a word.
UNREAD_SUFFIXES: tuple[str, ...] = (".xls", ".xlsm", ".xlsb", ".ods")


def collect_files(paths: Sequence[str | Path] | str | Path) -> list[Path]:
    """Expand folders into their data files (sorted, not recursive); keep files as given.

    One path may be given as it is (``"sheets"``), not only in a list.

    Raises
    ------
    UsageError
        When no path is given, a path does not exist, or a folder holds no data file.
    """
    if isinstance(paths, str | PathLike):  # one path, not a sequence of one-letter paths
        paths = [paths]
    if not paths:
        raise UsageError("give at least one coding sheet or folder (DATA)")
    files: list[Path] = []
    for raw in paths:
        path = Path(raw)
        if path.is_dir():
            found = sorted(
                p
                for p in path.iterdir()
                if (p.is_file() or (p.is_symlink() and not p.exists()))  # a dangling link too
                and p.suffix.lower() in DATA_SUFFIXES + UNREAD_SUFFIXES
                and not p.name.startswith(("~$", "."))
            )
            if not found:
                raise UsageError(f"the folder {path.name!r} holds no .xlsx, .csv or .parquet file")
            files.extend(found)
        elif path.is_file() or (path.is_symlink() and not path.exists()):  # refused when read
            files.append(path)
        else:
            raise UsageError(f"no such file or folder: {path.name!r}")
    unique: dict[Path, Path] = {}
    for f in files:
        unique.setdefault(f.resolve(), f)
    return list(unique.values())
