"""Safe writing: every output goes to a temporary file beside its target, then an atomic rename.

A crash or a kill mid-write therefore leaves the previous output intact, and an output path that
is also an input path is refused before anything is written.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
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
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    except OSError as exc:
        raise _cannot_write(target, exc) from None
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        os.chmod(tmp, _mode_for(target))
        try:
            os.replace(tmp, target)
        except OSError as exc:
            raise _cannot_write(target, exc) from None
    finally:
        if tmp.exists():
            tmp.unlink()


def _cannot_write(target: Path, exc: OSError) -> UsageError:
    """A write the file system refused (a folder in the path is a file, no permission, ...)."""
    why = exc.strerror or type(exc).__name__
    if isinstance(exc, FileExistsError | NotADirectoryError):
        why = "a part of the folder path is a file, not a folder"
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


def append_line(target: str | os.PathLike[str], line: str) -> None:
    """Append one line to a log by rewriting it atomically (old content + new line)."""
    target = Path(target)
    old = target.read_bytes() if target.exists() else b""
    if old and not old.endswith(b"\n"):
        old += b"\n"
    write_bytes(target, old + line.rstrip("\n").encode("utf-8") + b"\n")


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
