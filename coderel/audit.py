"""The audit trail of merges: one JSON line per merge in ``<output>.audit.jsonl`` beside it.

Each line records when the merge ran (UTC), the coderel version, every input file with its SHA-256,
the codebook (title, version, SHA-256), the decisions file, the rule, the status counts, and every
adjudicated cell (unit, variable, the coders' values, the decision, adjudicator and note). The
time lives only in the log, never in the dataset, so the dataset itself stays byte-identical
across runs. Narrative text is never logged: the coders' values are codes and numbers, and the
record holds no text column of the sheets.

Each line is appended with one write while the log is locked (``flock``), so concurrent merges
onto the same output each add their line and none is lost; a write cut short (a full disk) is
undone, so the log never ends in half a line. :func:`write_audited` writes the dataset and its
line as one step under that lock: the previous dataset is kept (a hard link) until the line is
written, and put back if the line cannot be, so the dataset and its log cannot fall out of step.
Only ``kill -9`` between the two can leave a dataset without its line; the next merge finds that
the dataset's SHA-256 differs from the one its last line records and says so.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import fcntl
import json
import os
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from coderel._version import __version__
from coderel.codings import SourceFile
from coderel.errors import UsageError
from coderel.io.atomic import FULL_DISK_ERRORS, sha256_file
from coderel.merge import MergeResult

AUDIT_SUFFIX = ".audit.jsonl"


def audit_path(output: str | os.PathLike[str]) -> Path:
    """The log beside ``output``: ``merged.csv`` -> ``merged.csv.audit.jsonl``."""
    output = Path(output)
    return output.with_name(output.name + AUDIT_SUFFIX)


def _source(source: SourceFile) -> dict[str, Any]:
    return {"path": source.path, "sha256": source.sha256, "size": source.size}


def audit_record(
    result: MergeResult,
    output: str | os.PathLike[str],
    *,
    codebook_path: str | os.PathLike[str] | None = None,
    when: dt.datetime | None = None,
    spread: bool = False,
) -> dict[str, Any]:
    """The audit record of one merge, as a JSON-ready dict (see the module docstring)."""
    when = when or dt.datetime.now(dt.UTC)
    output = Path(output)
    cb = result.codebook
    codebook: dict[str, Any] = {"title": cb.title, "version": cb.version}
    if codebook_path is not None:
        codebook["path"] = str(codebook_path)
        codebook["sha256"] = sha256_file(codebook_path)
    return {
        "time": when.astimezone(dt.UTC).isoformat(timespec="seconds").replace("+00:00", "Z"),
        "coderel_version": __version__,
        "output": {
            "path": str(output),
            "sha256": sha256_file(output) if output.exists() else None,
        },
        "inputs": [_source(s) for s in result.sources],
        "decisions": None if result.decisions_source is None else _source(result.decisions_source),
        "codebook": codebook,
        "rule": result.rule,
        "tolerance": dict(result.tolerance),
        "spread": spread,
        "units": result.units,
        "variables": len(cb.variables),
        "status_totals": result.totals(),
        "status_counts": {v: dict(c) for v, c in result.status_counts.items()},
        "unresolved": len(result.unresolved),
        "stale_decisions": [dict(x) for x in result.stale],
        "adjudicated": [
            {
                "unit": a.unit,
                "variable": a.variable,
                "coders": dict(a.values),
                "decision": a.decision,
                "value": a.value,
                "adjudicator": a.adjudicator,
                "note": a.note,
            }
            for a in result.adjudicated
        ],
    }


def _plain(value: Any) -> Any:
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if hasattr(value, "item") and callable(value.item):
        return value.item()
    return value


def _line(record: dict[str, Any]) -> bytes:
    plain = _plain(record)
    text = json.dumps(plain, ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    try:
        return text.encode("utf-8") + b"\n"
    except UnicodeEncodeError:  # a path with bytes that are not UTF-8: escape them
        return json.dumps(plain, allow_nan=False, separators=(",", ":")).encode("ascii") + b"\n"


@contextlib.contextmanager
def locked_log(output: str | os.PathLike[str]) -> Iterator[int]:
    """Open the log beside ``output`` for appending and hold an exclusive lock on it.

    Yields the file descriptor; other merges onto the same output wait here.
    """
    log = audit_path(output)
    try:
        log.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(log, os.O_RDWR | os.O_APPEND | os.O_CREAT, 0o666)
    except OSError as exc:
        raise UsageError(
            f"cannot write the audit log {str(log)!r}: {exc.strerror or type(exc).__name__}"
        ) from None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield fd
    finally:
        os.close(fd)  # releases the lock


def _append(fd: int, log: Path, data: bytes) -> None:
    """Append ``data`` at the end of the locked log; undo a write cut short."""
    end = os.lseek(fd, 0, os.SEEK_END)
    if end and os.pread(fd, 1, end - 1) != b"\n":
        data = b"\n" + data  # a line someone left unfinished stays a line of its own
    try:
        written = 0
        while written < len(data):
            written += os.write(fd, data[written:])
        os.fsync(fd)
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.ftruncate(fd, end)
        if exc.errno in FULL_DISK_ERRORS:
            raise UsageError(
                f"cannot write the audit log {str(log)!r}: {exc.strerror}; nothing was changed "
                "(the dataset stays as it was); free some space and run again"
            ) from None
        raise


def append_audit(
    result: MergeResult,
    output: str | os.PathLike[str],
    *,
    codebook_path: str | os.PathLike[str] | None = None,
    when: dt.datetime | None = None,
    spread: bool = False,
) -> Path:
    """Append the record of a merge to the log beside ``output``; return the log's path."""
    record = audit_record(result, output, codebook_path=codebook_path, when=when, spread=spread)
    with locked_log(output) as fd:
        _append(fd, audit_path(output), _line(record))
    return audit_path(output)


def out_of_step(output: str | os.PathLike[str]) -> bool:
    """Does the dataset differ from the one the last line of its log records?

    True when a merge was cut off between writing the dataset and its line (``kill -9``), or
    the dataset was changed by hand; False when they match or either is missing.
    """
    output = Path(output)
    records = read_audit(output)
    if not records or not output.exists():
        return False
    recorded = (records[-1].get("output") or {}).get("sha256")
    return recorded is not None and recorded != sha256_file(output)


def _keep_previous(output: Path) -> Path | None:
    """A hard link to the current dataset (no copy of its bytes), or a copy where links fail."""
    if not output.is_file():
        return None
    keep = output.with_name(f".{output.name}.{os.getpid()}-previous.tmp")
    with contextlib.suppress(FileNotFoundError):
        keep.unlink()
    try:
        os.link(output, keep)
    except OSError:
        import shutil

        shutil.copy2(output, keep)
    return keep


def write_audited(
    result: MergeResult,
    output: str | os.PathLike[str],
    write: Callable[[], object],
    *,
    codebook_path: str | os.PathLike[str] | None = None,
    when: dt.datetime | None = None,
    spread: bool = False,
) -> tuple[Path, bool]:
    """Write the dataset with ``write()`` and append its audit line, as one step.

    Under the log's lock: the previous dataset is kept aside, the new one written (atomically,
    by ``write``), then its line appended. When the line cannot be written the previous dataset
    is put back (or the new one removed when there was none), so a dataset never stands without
    its line. Returns the log's path and whether the dataset found on disk was out of step with
    its log before this merge (:func:`out_of_step`).
    """
    output = Path(output)
    if output.is_dir():
        raise UsageError(f"cannot write {str(output)!r}: it is a folder; name a file")
    log = audit_path(output)
    with locked_log(output) as fd:
        was_out_of_step = out_of_step(output)
        previous = _keep_previous(output)
        try:
            write()
            record = audit_record(
                result, output, codebook_path=codebook_path, when=when, spread=spread
            )
            _append(fd, log, _line(record))
        except BaseException:
            if previous is not None:
                if output.exists() and os.path.samefile(previous, output):
                    previous.unlink()  # the dataset was not replaced (rename would do nothing)
                else:
                    os.replace(previous, output)
            else:
                with contextlib.suppress(FileNotFoundError):
                    output.unlink()
            raise
        if previous is not None:
            with contextlib.suppress(FileNotFoundError):
                previous.unlink()
    return log, was_out_of_step


def read_audit(output: str | os.PathLike[str]) -> list[dict[str, Any]]:
    """Every record of the log beside ``output``, oldest first (empty when there is none)."""
    log = audit_path(output)
    if not log.exists():
        return []
    return [json.loads(line) for line in log.read_text(encoding="utf-8").splitlines() if line]


__all__ = [
    "AUDIT_SUFFIX",
    "append_audit",
    "audit_path",
    "audit_record",
    "locked_log",
    "out_of_step",
    "read_audit",
    "write_audited",
]
