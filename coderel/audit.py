"""The audit trail of merges: one JSON line per merge in ``<output>.audit.jsonl`` beside it.

Each line records when the merge ran (UTC), the coderel version, every input file with its SHA-256,
the codebook (title, version, SHA-256), the decisions file, the rule, the status counts, and every
adjudicated cell (unit, variable, the coders' values, the decision, adjudicator and note). The
time lives only in the log, never in the dataset, so the dataset itself stays byte-identical
across runs. Narrative text is never logged: the coders' values are codes and numbers, and the
record holds no text column of the sheets.

The log is appended by rewriting it atomically (:func:`coderel.io.atomic.append_line`), so a crash
never leaves half a line.
"""

from __future__ import annotations

import datetime as dt
import json
import os
from pathlib import Path
from typing import Any

from coderel._version import __version__
from coderel.codings import SourceFile
from coderel.io.atomic import append_line, sha256_file
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
    log = audit_path(output)
    line = json.dumps(_plain(record), ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    append_line(log, line)
    return log


def read_audit(output: str | os.PathLike[str]) -> list[dict[str, Any]]:
    """Every record of the log beside ``output``, oldest first (empty when there is none)."""
    log = audit_path(output)
    if not log.exists():
        return []
    return [json.loads(line) for line in log.read_text(encoding="utf-8").splitlines() if line]


__all__ = ["AUDIT_SUFFIX", "append_audit", "audit_path", "audit_record", "read_audit"]
