"""What every command shares: options, consoles, JSON output, problem tables and exit codes.

Data (tables, JSON) go to stdout; messages go to stderr. Colour and progress bars appear only on
a terminal (and never when ``NO_COLOR`` is set). Errors never show local variables or input
values: narrative reports can hold personal details.
"""

from __future__ import annotations

import functools
import json
import math
import os
import re
import sys
import threading
import traceback
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, Literal, TypeVar

import typer
from rich.console import Console
from rich.table import Table
from rich.text import Text

from coderel.errors import (
    CodebookError,
    CoderelError,
    DataProblems,
    ExitCode,
    InputRefused,
    UsageError,
)
from coderel.io.atomic import FULL_DISK_ERRORS
from coderel.problems import Problems

if TYPE_CHECKING:
    from coderel.codings import Codings

F = TypeVar("F", bound=Callable[..., Any])

# ---- shared option types -------------------------------------------------------------------
CodebookOption = Annotated[
    Path,
    typer.Option("--codebook", "-c", help="Codebook file (.yaml, .yml, or Frictionless .json)."),
]
DataArgument = Annotated[
    list[Path],
    typer.Argument(help="Coders' sheets: files (.xlsx, .csv, .parquet) or folders holding them."),
]
JsonOption = Annotated[
    bool, typer.Option("--json", help="Print machine-readable JSON on stdout instead of a table.")
]
SeedOption = Annotated[
    int, typer.Option("--seed", min=0, help="Seed of the bootstrap (reproducible).")
]
ReplicatesOption = Annotated[
    int, typer.Option("--replicates", min=0, help="Bootstrap replicates (0: no intervals).")
]
TableOutOption = Annotated[
    Path | None,
    typer.Option("--out", "-o", help="Write the table (.csv, .xlsx or .parquet)."),
]
IntervalOption = Annotated[
    Literal["bca", "percentile"],
    typer.Option("--interval", help="bca (bias-corrected and accelerated) or percentile."),
]
MemoryOption = Annotated[
    str | None,
    typer.Option(
        "--memory",
        help="Memory for the bootstrap's blocks of units, e.g. 2GB or 512MB (default: a sixty-"
        "fourth of the machine's memory, between 128MB and 256MB).",
    ),
]
DecisionsOption = Annotated[
    Path | None,
    typer.Option("--decisions", help="An adjudication list with decisions (.xlsx or .csv)."),
]
RuleOption = Annotated[
    Literal["unanimous", "majority"],
    typer.Option(
        "--rule",
        help="unanimous: every coder agrees; majority: more than half of the coders who coded "
        "the unit agree.",
    ),
]
ToleranceOption = Annotated[
    list[str] | None,
    typer.Option(
        "--tolerance",
        help="VARIABLE=NUMBER (repeatable): numbers of an interval or ratio variable that differ "
        "by at most NUMBER count as agreeing for adjudication and merge (final value: their "
        "median); agreement coefficients are unchanged.",
    ),
]
DEFAULT_SEED = 20261202
DEFAULT_REPLICATES = 2000


def _is_terminal(stream: Any) -> bool:
    return bool(getattr(stream, "isatty", lambda: False)())


#: Terminal control sequences (CSI such as ``ESC [ 2 J``, OSC such as a window title or a
#: hyperlink, other ESC pairs) and single control characters other than line break and tab.
_CONTROL = re.compile(
    r"\x1b\[[0-?]*[ -/]*[@-~]"  # CSI
    r"|\x1b\][^\x07\x1b]*(?:\x07|\x1b\\)?"  # OSC, ended by BEL or ST
    r"|\x1b[@-Z\\-_]?"  # other escapes (and a lone ESC)
    r"|[\x00-\x08\x0b-\x1f\x7f-\x9f]"
)


def shown(text: object, encoding: str | None = None) -> str:
    """Text from the data made safe for a terminal: every control sequence or character is
    replaced by its escaped form (``\\x1b``), so that a unit ID cannot move the cursor, clear
    the screen or set a window title. Characters a terminal's encoding cannot show become
    ``\\uXXXX`` escapes (a file name with a byte that is not UTF-8, non-Latin names on an
    ASCII terminal)."""
    out = _CONTROL.sub(lambda m: m.group(0).encode("unicode_escape").decode("ascii"), str(text))
    encoding = encoding or getattr(sys.stdout, "encoding", None) or "utf-8"
    try:
        out.encode(encoding)
    except (UnicodeEncodeError, LookupError):
        out = out.encode(encoding, "backslashreplace").decode(encoding, "replace")
    except UnicodeError:
        out = out.encode("ascii", "backslashreplace").decode("ascii")
    return out


class _SafeConsole(Console):
    """A console that never reads markup in text: user data (``[/]`` in a unit ID) is printed as
    it is, control sequences are escaped (:func:`shown`). Colour is given with ``style=``."""

    def render_str(self, text: str, **kwargs: Any) -> Any:
        kwargs.update(markup=False, emoji=False)
        return super().render_str(shown(text, getattr(self.file, "encoding", None)), **kwargs)


class _DataConsole(_SafeConsole):
    """A console whose closed pipe ends the command like any other (exit 0, see handle_errors).

    rich's own handling exits with 1, which coderel reserves for data problems.
    """

    def on_broken_pipe(self) -> None:
        self.quiet = True
        raise BrokenPipeError


def _console(stream: Any, kind: type[Console] = _SafeConsole) -> Console:
    """Plain text, 200 columns wide, when ``stream`` is not a terminal or NO_COLOR is set."""
    plain = not _is_terminal(stream) or "NO_COLOR" in os.environ
    return kind(
        file=stream,
        no_color=plain,
        highlight=False,
        soft_wrap=plain,
        width=200 if plain else None,
    )


def out_console() -> Console:
    """Console for data on stdout."""
    return _console(sys.stdout, _DataConsole)


def err_console() -> Console:
    """Console for messages on stderr."""
    return _console(sys.stderr)


def _silence_stdout() -> None:
    """Point stdout at /dev/null so that Python's final flush does not fail again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass


#: Settings of this run of the command line, set by the root command (``coderel --quiet``).
_RUN = {"quiet": False}


def set_quiet(quiet: bool) -> None:
    """``--quiet``: no progress bars and no informational messages (errors and problems stay)."""
    _RUN["quiet"] = quiet


def is_quiet() -> bool:
    """Whether ``--quiet`` was given."""
    return _RUN["quiet"]


def show_progress() -> bool:
    """Progress bars only on an interactive terminal, and not with ``--quiet``."""
    return not _RUN["quiet"] and _is_terminal(sys.stderr) and "CI" not in os.environ


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_jsonable(v) for v in obj]
    if hasattr(obj, "item") and callable(obj.item):  # numpy scalars
        return _jsonable(obj.item())
    if isinstance(obj, Path):
        return str(obj)
    return obj


def emit_json(obj: Any) -> None:
    """Write ``obj`` as JSON on stdout (NaN and infinities become ``null``).

    Text stays readable (not ``\\u`` escaped) when stdout is UTF-8; on any other encoding
    everything outside ASCII is escaped, which every JSON reader decodes the same. Characters
    that are no Unicode text (a file name's byte that is not UTF-8) are escaped too.

    Raises
    ------
    UsageError
        When stdout cannot be written (``--json > /dev/full``: no space left).
    """
    encoding = (getattr(sys.stdout, "encoding", None) or "").lower().replace("-", "")
    data = _jsonable(obj)
    try:
        text = json.dumps(data, indent=2, ensure_ascii=encoding != "utf8", allow_nan=False)
        text.encode(encoding or "utf-8")
    except (UnicodeError, LookupError):  # lone surrogates from undecodable file names
        text = json.dumps(data, indent=2, ensure_ascii=True, allow_nan=False)
    try:
        sys.stdout.write(text)
        sys.stdout.write("\n")
        sys.stdout.flush()
    except BrokenPipeError:
        raise
    except OSError as exc:
        _silence_stdout()
        raise UsageError(
            f"cannot write to standard output: {exc.strerror or type(exc).__name__}"
        ) from None


def say(message: str, style: str | None = None) -> None:
    """A message for the person at the terminal (stderr); no markup is read in it.

    Errors, problems and warnings about the numbers use ``say``: ``--quiet`` never hides them.
    """
    err_console().print(message, style=style)


def inform(message: str) -> None:
    """An informational message on stderr (what was written where, counts read): ``--quiet``
    silences it."""
    if not _RUN["quiet"]:
        say(message)


#: A kind of problem (code) found more often than this for one coder is shown as one summary row
#: (design-wide warnings such as partial units in a crowd design); the full list is in --out.
SUMMARY_AFTER = 20


def _summary_rows(problems: Problems, limit: int) -> tuple[list[Any], int]:
    """Problems in order, with each (code, coder) group past ``limit`` folded into one row."""
    groups: dict[tuple[str, str | None], list[Any]] = {}
    for p in problems:
        groups.setdefault((p.code, p.coder), []).append(p)
    folded = 0
    shown: set[tuple[str, str | None]] = set()
    rows: list[Any] = []
    for p in problems:
        key = (p.code, p.coder)
        group = groups[key]
        if len(group) <= limit:
            rows.append(p)
        elif key not in shown:
            shown.add(key)
            rows.append(group)
            folded += len(group) - 1
    return rows, folded


def problems_table(
    problems: Problems, *, title: str | None = None, summarise: int | None = SUMMARY_AFTER
) -> Table:
    """A rich table of problems, one row each; a kind found more than ``summarise`` times for
    one coder becomes one row with its counts (``None``: never)."""
    table = Table(title=title, show_lines=False)
    for name in ("severity", "code", "where", "unit", "coder", "variable", "message", "hint"):
        table.add_column(name, overflow="fold")
    rows, _ = _summary_rows(problems, summarise) if summarise else (list(problems), 0)
    for row in rows:
        p = row[0] if isinstance(row, list) else row
        sev = Text("error", style="red") if p.severity == "error" else Text("warning", "yellow")
        if isinstance(row, list):
            units = len({q.unit for q in row if q.unit})
            variables = sorted({q.variable for q in row if q.variable})
            places = len({q.where() for q in row if q.where()})
            table.add_row(
                sev,
                p.code,
                f"{places:,} places" if places > 1 else p.where(),
                f"{units:,} units" if units > 1 else (p.unit or ""),
                p.coder or "",
                variables[0]
                if len(variables) == 1
                else (f"{len(variables)} variables" if variables else ""),
                f"{len(row):,} times, first: {p.message}",
                p.hint or "",
            )
            continue
        table.add_row(
            sev,
            p.code,
            p.where(),
            p.unit or "",
            p.coder or "",
            p.variable or "",
            p.message,
            p.hint or "",
        )
    return table


def folded_note(problems: Problems, limit: int = SUMMARY_AFTER) -> str | None:
    """The line that says problems were summarised and where the full list is, or None."""
    rows, folded = _summary_rows(problems, limit)
    if not folded:
        return None
    kinds = sum(isinstance(r, list) for r in rows)
    return (
        f"{kinds} kind(s) of problem found more than {limit} times are shown as one row each "
        "with their count; --out problems.csv (or --json) gives every one with its place"
    )


def print_problems(problems: Problems, *, to_stderr: bool = True) -> None:
    """Print problems as a table (stderr by default: they are messages, not the command's data)."""
    if not problems:
        return
    console = err_console() if to_stderr else out_console()
    console.print(problems_table(problems))
    note = folded_note(problems)
    if note:
        console.print(note)
    console.print(f"{len(problems.errors)} error(s), {len(problems.warnings)} warning(s).")


def _safe_traceback() -> str:
    """Frames of the current exception, with no message and no local variables."""
    etype, _, tb = sys.exc_info()
    frames = traceback.extract_tb(tb)
    lines = [f"  {Path(f.filename).name}:{f.lineno} in {f.name}" for f in frames[-6:]]
    name = etype.__name__ if etype else "Exception"
    return "\n".join([f"internal error ({name}) at:", *lines])


def handle_errors(func: F) -> F:
    """Map coderel's exceptions to messages and exit codes; hide values on internal errors.

    The command body returns an :class:`ExitCode` (or ``None`` for success).
    """

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        def json_error(exc: CoderelError, code: ExitCode, problems: Problems | None) -> None:
            # With --json, stdout still holds JSON when the command stops: scripts read it.
            if kwargs.get("json_out"):
                emit_json(
                    {
                        "error": str(exc),
                        "exit_code": int(code),
                        **(problems or Problems()).to_dict(),
                    }
                )

        try:
            code = func(*args, **kwargs)
        except (typer.Exit, typer.Abort):
            raise
        except (CodebookError, DataProblems) as exc:
            print_problems(exc.problems)
            say(str(exc), style="red")
            json_error(exc, exc.exit_code, exc.problems)
            raise typer.Exit(int(exc.exit_code)) from None
        except InputRefused as exc:
            if exc.problems:
                print_problems(exc.problems)
            say(f"input refused: {exc}", style="red")
            json_error(exc, ExitCode.INPUT_REFUSED, exc.problems)
            raise typer.Exit(int(ExitCode.INPUT_REFUSED)) from None
        except CoderelError as exc:
            say(f"error: {exc}", style="red")
            json_error(exc, exc.exit_code, None)
            raise typer.Exit(int(exc.exit_code)) from None
        except KeyboardInterrupt:
            say("interrupted; no output was changed")
            raise typer.Exit(130) from None
        except BrokenPipeError:
            # The reader of stdout went away (``coderel ... --json | head``): stop quietly.
            _silence_stdout()
            raise typer.Exit(int(ExitCode.OK)) from None
        except OSError as exc:
            if exc.errno not in FULL_DISK_ERRORS:
                _internal_error()
            # A disk that filled up (or a file-size limit) in a temporary file of a library:
            # the outputs are written atomically, so none was changed.
            where = f" {exc.filename!r}" if isinstance(exc.filename, str) else ""
            say(
                f"error: cannot write{where}: {exc.strerror or type(exc).__name__}; nothing "
                "was changed (earlier outputs stay as they were); free some space and run again",
                style="red",
            )
            raise typer.Exit(int(ExitCode.USAGE)) from None
        except Exception:
            _internal_error()
        raise typer.Exit(int(code or ExitCode.OK))

    return wrapper  # type: ignore[return-value]


def _internal_error() -> None:
    """Report the exception being handled as a bug (exit 4), without its message."""
    if os.environ.get("CODEREL_DEBUG"):
        traceback.print_exc()
    else:
        say(_safe_traceback())
        say(
            "This is a bug in coderel. Messages are withheld because they could quote "
            "your data; set CODEREL_DEBUG=1 to see them."
        )
    raise typer.Exit(int(ExitCode.INTERNAL)) from None


def check_table_output(out: Path | None, data: list[Path], codebook: Path) -> None:
    """Before any work: an ``--out`` table needs a known extension and must not be an input."""
    if out is None:
        return
    from coderel.io.atomic import refuse_overwriting_inputs
    from coderel.io.read import collect_files
    from coderel.io.tables import table_format

    table_format(out)
    refuse_overwriting_inputs([out], [*collect_files(data), codebook])


def read_project(codebook: Path, data: list[Path], *, errors_note: str) -> Codings:
    """The codebook and every coder's sheet, for a command that computes from them.

    A refused sheet stops the command (exit 3): going on without that coder would quietly change
    every number. Cells with errors count as blank; one message says how many and ``errors_note``
    says what that means for this command.
    """
    from coderel.codebook.load import load_codebook
    from coderel.io.versions import read_versioned

    cb = load_codebook(codebook)
    with delayed_progress("reading the sheets") as step:
        codings = read_versioned(cb, data, progress=step)
    tell_read_problems(codings.problems, errors_note=errors_note)
    return codings


def tell_read_problems(problems: Problems, *, errors_note: str) -> None:
    """Stop (exit 3) when a sheet was refused; say which files were skipped as coderel's own
    output and how many cells had errors (``errors_note``: what that means for the command)."""
    refused = problems.refused
    if refused:
        raise InputRefused(
            "nothing was computed or written: a sheet was refused, so its coder's values would "
            "be missing",
            problems=Problems(refused),
        )
    skipped = [p.file for p in problems if p.code == "own-output"]
    if skipped:
        say(
            f"not read, written by coderel (not coders' sheets): {', '.join(map(str, skipped))}; "
            "keep outputs out of the folder of coders' sheets"
        )
    errors = len(problems.errors)
    if errors:
        say(f"{errors} cell(s) with errors {errors_note}; run 'coderel validate' to see them")


#: Seconds a phase runs before its bar appears; ``CODEREL_PROGRESS_AFTER`` overrides it (tests
#: set 0 to see every phase at once).
PROGRESS_AFTER = 1.0


def _progress_after(after: float | None) -> float:
    value = os.environ.get("CODEREL_PROGRESS_AFTER")
    if value is not None:
        try:
            return max(0.0, float(value))
        except ValueError:
            pass
    return PROGRESS_AFTER if after is None else after


def _no_progress(done: int, total: int, phase: str | None = None) -> None:
    return None


@contextmanager
def delayed_progress(
    description: str, *, after: float | None = None
) -> Iterator[Callable[..., None]]:
    """A progress callback (see :mod:`coderel.progress`) for the phase ``description``.

    A rich progress bar appears on stderr once the phase has run ``after`` seconds (default
    :data:`PROGRESS_AFTER`), even when the work inside never calls the callback (a bar without
    a total, with the time elapsed), and only on an interactive terminal without ``--quiet``.
    ``progress(done, total, phase)`` renames the bar for a new phase; the bar is erased at the
    end. rich.progress is imported only when a bar is shown (``coderel --help`` stays light).
    """
    if not show_progress():
        yield _no_progress
        return
    lock = threading.Lock()
    state: dict[str, Any] = {"description": description, "done": 0, "total": None}

    def start() -> None:  # called with the lock held
        from rich.progress import (
            BarColumn,
            Progress,
            TaskProgressColumn,
            TextColumn,
            TimeElapsedColumn,
        )

        bar = Progress(
            TextColumn("{task.description}", markup=False),
            BarColumn(),
            TaskProgressColumn(),
            TimeElapsedColumn(),
            console=err_console(),
            transient=True,
        )
        bar.start()
        state["bar"] = bar
        state["task"] = bar.add_task(
            shown(state["description"]), total=state["total"], completed=state["done"]
        )
        bar.refresh()

    def on_time() -> None:
        with lock:
            if not state.get("stopped") and "bar" not in state:
                start()

    def update(done: int, total: int, phase: str | None = None) -> None:
        with lock:
            state.update(done=done, total=total)
            if phase == state["description"]:
                phase = None
            if phase is not None:
                state["description"] = phase
            bar = state.get("bar")
            if bar is None:
                return
            if phase is None:
                bar.update(state["task"], completed=done, total=total)
            else:
                bar.update(state["task"], completed=done, total=total, description=shown(phase))
                bar.refresh()

    delay = _progress_after(after)
    timer = threading.Timer(delay, on_time)
    timer.daemon = True
    if delay <= 0:
        on_time()
    else:
        timer.start()
    try:
        yield update
    finally:
        timer.cancel()
        with lock:
            state["stopped"] = True
            if "bar" in state:
                state["bar"].stop()
