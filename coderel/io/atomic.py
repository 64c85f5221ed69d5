"""Safe writing: every output goes to a temporary file beside its target, then an atomic rename.

A crash or a kill mid-write therefore leaves the previous output intact, and an output path that
is also an input path is refused before anything is written. A full disk or a file-size limit
while writing is a :class:`coderel.errors.UsageError` that names the output (exit 2), never a
traceback; the old output stays as it was and the temporary file is removed.

Temporary files are named ``.NAME.PID-XXXXXXXX.tmp``. A process killed with ``kill -9`` cannot
remove its own; the next write to the same target removes those whose process no longer runs
(or, for a name without a process ID, that are older than a day).
"""

from __future__ import annotations

import contextlib
import errno
import glob
import hashlib
import os
import re
import tempfile
import time
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import IO

from coderel.errors import UsageError


def _mode_for(target: Path) -> int:
    """The mode a plain ``open(target, "w")`` would give: the old file's mode when it exists,
    else 0o666 less the umask (``mkstemp`` alone would leave every output private, 0o600)."""
    try:
        return target.stat().st_mode & 0o777
    except FileNotFoundError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path in the target's folder; rename it onto ``target`` on success.

    The temporary file is removed if the body raises, so a failed write leaves nothing behind and
    the old target untouched.
    """
    target = Path(target)
    if target.is_dir():
        raise UsageError(f"cannot write {str(target)!r}: it is a folder; name a file")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        remove_stale_temps(target)
        fd, tmp_name = tempfile.mkstemp(
            prefix=f".{target.name}.{os.getpid()}-", suffix=".tmp", dir=target.parent
        )
    except OSError as exc:
        raise _cannot_write(target, exc) from None
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        try:
            yield tmp
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
        except OSError as exc:
            if exc.errno not in FULL_DISK_ERRORS:
                raise
            raise _cannot_write(target, exc) from None
        os.chmod(tmp, _mode_for(target))
        try:
            os.replace(tmp, target)
        except OSError as exc:
            raise _cannot_write(target, exc) from None
    finally:
        if tmp.exists():
            tmp.unlink()


#: Errors of a write that ran out of room: no space, over a file-size limit or a quota, a
#: read-only or failing disk.
FULL_DISK_ERRORS = frozenset(
    getattr(errno, name)
    for name in ("ENOSPC", "EFBIG", "EDQUOT", "EROFS", "EIO")
    if hasattr(errno, name)
)
#: A temporary file of ours without a process ID is stale after this many seconds.
STALE_SECONDS = 24 * 3600
_TEMP = re.compile(r"\.(?P<name>.+)\.(?:(?P<pid>[0-9]+)-)?[A-Za-z0-9_]{6,}\.tmp")


def _running(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True  # someone else's process, or unknown: leave its file alone
    return True


def remove_stale_temps(target: str | os.PathLike[str]) -> list[Path]:
    """Remove temporary files a killed coderel left beside ``target``; return those removed.

    Only files of our own pattern for this target (``.NAME.PID-XXXXXXXX.tmp``) are touched:
    those whose process no longer runs, and (older names without a process ID) those
    unchanged for :data:`STALE_SECONDS`.
    """
    target = Path(target)
    removed: list[Path] = []
    try:
        candidates = list(target.parent.glob(f".{glob.escape(target.name)}.*.tmp"))
    except OSError:
        return removed
    now = time.time()
    for path in candidates:
        match = _TEMP.fullmatch(path.name)
        if match is None or match["name"] != target.name:
            continue
        try:
            if match["pid"] is not None:
                stale = int(match["pid"]) != os.getpid() and not _running(int(match["pid"]))
            else:
                stale = now - path.stat().st_mtime > STALE_SECONDS
            if stale:
                path.unlink()
                removed.append(path)
        except OSError:
            continue
    return removed


def _cannot_write(target: Path, exc: OSError) -> UsageError:
    """A write the file system refused (a folder in the path is a file, no permission, a full
    disk ...)."""
    why = exc.strerror or type(exc).__name__
    if isinstance(exc, FileExistsError | NotADirectoryError):
        why = "a part of the folder path is a file, not a folder"
    if exc.errno in FULL_DISK_ERRORS:
        return UsageError(
            f"cannot write {str(target)!r}: {why}; nothing was changed (an earlier version "
            "stays as it was); free some space or choose another output folder"
        )
    return UsageError(f"cannot write {str(target)!r}: {why}; choose another output path or folder")


def write_bytes(target: str | os.PathLike[str], data: bytes) -> None:
    """Write ``data`` to ``target`` atomically."""
    with atomic_path(target) as tmp:
        tmp.write_bytes(data)


def write_text(target: str | os.PathLike[str], text: str, encoding: str = "utf-8") -> None:
    """Write ``text`` to ``target`` atomically (``\\n`` line endings)."""
    write_bytes(target, text.encode(encoding))


def write_with(target: str | os.PathLike[str], writer: Callable[[Path], object]) -> None:
    """Call ``writer(tmp_path)`` to produce the file, then move it onto ``target`` atomically."""
    with atomic_path(target) as tmp:
        writer(tmp)


@contextlib.contextmanager
def open_atomic(target: str | os.PathLike[str], mode: str = "w") -> Iterator[IO]:
    """Open a temporary file for writing; it replaces ``target`` when the block ends cleanly."""
    with (
        atomic_path(target) as tmp,
        open(tmp, mode, encoding=None if "b" in mode else "utf-8") as fh,
    ):
        yield fh


def refuse_overwriting_inputs(
    outputs: Iterable[str | os.PathLike[str]], inputs: Iterable[str | os.PathLike[str]]
) -> None:
    """Raise :class:`UsageError` when an output path is one of the input files."""
    resolved_inputs = {Path(p).resolve() for p in inputs}
    for out in outputs:
        if Path(out).resolve() in resolved_inputs:
            raise UsageError(
                f"the output {Path(out).name!r} is also an input file; "
                "coderel never writes over its inputs - choose another output path"
            )


def sha256_file(path: str | os.PathLike[str]) -> str:
    """SHA-256 of a file's bytes, as hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
