"""Exit codes and the exceptions that carry them to the command line.

Every command of coderel exits with one of these codes:

* 0 - success, nothing to report;
* 1 - data problems found (validation errors, unresolved cells under ``--strict``);
* 2 - usage error (wrong option, missing file argument);
* 3 - input refused (unreadable, encrypted, legacy format, over a safety limit);
* 4 - internal error (a bug in coderel: please report it, without your data).
"""

from __future__ import annotations

from enum import IntEnum
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from coderel.problems import Problems


class ExitCode(IntEnum):
    """Process exit codes shared by every command."""

    OK = 0
    DATA_PROBLEMS = 1
    USAGE = 2
    INPUT_REFUSED = 3
    INTERNAL = 4


class CoderelError(Exception):
    """Base class of the errors coderel raises on purpose (never a bug)."""

    exit_code: ExitCode = ExitCode.INTERNAL


class UsageError(CoderelError):
    """The command was called wrongly (an option's value, an output path equal to an input)."""

    exit_code = ExitCode.USAGE


class InputRefused(CoderelError):
    """An input file cannot or must not be read (encrypted, legacy, corrupt, over a limit)."""

    exit_code = ExitCode.INPUT_REFUSED

    def __init__(self, message: str, *, problems: Problems | None = None) -> None:
        super().__init__(message)
        self.problems = problems


class CodebookError(CoderelError):
    """The codebook is broken; ``problems`` lists every problem found, each with its line."""

    exit_code = ExitCode.DATA_PROBLEMS

    def __init__(self, message: str, *, problems: Problems) -> None:
        super().__init__(message)
        self.problems = problems


class DataProblems(CoderelError):
    """Input data hold errors that stop the command; ``problems`` lists all of them."""

    exit_code = ExitCode.DATA_PROBLEMS

    def __init__(self, message: str, *, problems: Problems) -> None:
        super().__init__(message)
        self.problems = problems
