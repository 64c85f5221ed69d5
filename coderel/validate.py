"""Validation of coders' sheets against the codebook: every problem, with its place and a hint."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from coderel.codebook import Codebook
from coderel.codings import Codings
from coderel.problems import Problems
from coderel.progress import Progress


@dataclass(frozen=True)
class ValidationResult:
    """The outcome of checking coders' sheets: the problems found and what was read."""

    codings: Codings

    @property
    def problems(self) -> Problems:
        return self.codings.problems

    @property
    def ok(self) -> bool:
        """True when no error was found (warnings are allowed)."""
        return not self.problems.errors

    @property
    def refused(self) -> bool:
        """True when a file was refused outright (encrypted, legacy, corrupt, over a limit)."""
        return bool(self.problems.refused)

    def summary(self) -> dict[str, Any]:
        return {
            "files": [Path(s.path).name for s in self.codings.sources],
            "coders": self.codings.coders,
            "units": len(self.codings.units),
            "errors": len(self.problems.errors),
            "warnings": len(self.problems.warnings),
        }

    def to_frame(self) -> pd.DataFrame:
        return self.problems.to_frame()

    def to_dict(self) -> dict[str, Any]:
        return {**self.problems.to_dict(), "summary": self.summary()}


def validate(
    codebook: Codebook, paths: Sequence[str | Path], *, progress: Progress | None = None
) -> ValidationResult:
    """Read every sheet and collect all problems; input files are only read, never changed.

    Sheets made from an earlier codebook version are recoded by the codebook's ``recode`` block
    (:func:`coderel.io.versions.read_versioned`), or warned about when there is none.
    ``progress`` is told of each phase (:mod:`coderel.progress`).
    """
    from coderel.io.versions import read_versioned

    return ValidationResult(read_versioned(codebook, paths, progress=progress))
