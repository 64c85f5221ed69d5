"""Manifests: a JSON record of how a protocol output was made, written beside the output.

A manifest is byte-reproducible: keys are sorted, numbers plain, and its date is the time the
command ran in UTC unless the environment variable ``SOURCE_DATE_EPOCH`` (the convention of the
Reproducible Builds project, reproducible-builds.org/specs/source-date-epoch) fixes it, so that
two runs on the same inputs can be compared byte for byte.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import re
from typing import Any

from coderel._version import __version__
from coderel.errors import UsageError

DATE_VARIABLE = "SOURCE_DATE_EPOCH"


def created_at() -> str:
    """The manifest's date: ``SOURCE_DATE_EPOCH`` when set (seconds since 1970), else now."""
    raw = os.environ.get(DATE_VARIABLE)
    if raw is not None and raw.strip():
        try:
            stamp = dt.datetime.fromtimestamp(int(raw.strip()), tz=dt.UTC)
        except (ValueError, OverflowError, OSError):
            raise UsageError(
                f"{DATE_VARIABLE} must be a whole number of seconds since 1970-01-01, not {raw!r}"
            ) from None
    else:
        stamp = dt.datetime.now(tz=dt.UTC)
    return stamp.replace(microsecond=0).isoformat().replace("+00:00", "Z")


def digest_lines(lines: list[str]) -> str:
    """SHA-256 of lines joined as a text file writes them (UTF-8, one per line, final newline)."""
    return hashlib.sha256("".join(f"{x}\n" for x in lines).encode("utf-8")).hexdigest()


def unit_list_text(units: list[str]) -> str:
    """A unit list file's text: one ID a line, ``\\n`` endings (what ``template --units`` reads)."""
    return "".join(f"{u}\n" for u in units)


def manifest_text(body: dict[str, Any]) -> str:
    """The manifest as JSON text with the coderel version and date added; sorted keys."""
    full = {"coderel_version": __version__, "created": created_at(), **body}
    return json.dumps(full, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def parse_seed(seed: Any) -> int:
    """A seed as a whole number of 0 or more; :class:`UsageError` naming the value otherwise."""
    if isinstance(seed, bool):
        raise UsageError(f"the seed must be a whole number of 0 or more, not {seed!r}")
    if isinstance(seed, str):
        text = seed.strip()
        if not re.fullmatch(r"[0-9]+", text):
            raise UsageError(
                f"the seed must be a whole number of 0 or more (digits only), not {seed!r}"
            )
        return int(text)
    if isinstance(seed, int) and seed >= 0:
        return int(seed)
    raise UsageError(f"the seed must be a whole number of 0 or more, not {seed!r}")
