"""Load a codebook from YAML (our format) or JSON (Frictionless Table Schema) with every problem.

The YAML file is parsed with :func:`yaml.compose` and the safe loader, so every value keeps the
line it came from; nothing in the file is ever executed. The checks do not stop at the first
problem: :func:`codebook_problems` returns all of them (a duplicate name, an unknown level, a
condition on a variable the codebook lacks ...), each with its file, line, a stable code from
:data:`coderel.problems.PROBLEM_CODES` and a hint. :func:`load_codebook` raises
:class:`coderel.errors.CodebookError` carrying that list when any of them is an error.

The file's shape is documented in ``docs/codebook.md``; ``codebook.schema.json`` beside this module
is a JSON Schema of the same shape for editors.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from coderel.codebook.build import CodebookBuilder, codebook_from_data
from coderel.codebook.checks import MAX_CODE_LENGTH
from coderel.codebook.frictionless import table_schema_problems
from coderel.codebook.model import Codebook
from coderel.codebook.nodes import compose_yaml, too_deep_problem
from coderel.errors import CodebookError, InputRefused, UsageError
from coderel.problems import Problems

__all__ = [
    "MAX_CODEBOOK_BYTES",
    "MAX_CODE_LENGTH",
    "codebook_from_data",
    "codebook_json_schema",
    "codebook_problems",
    "load_codebook",
    "parse_codebook_yaml",
]

#: A codebook file larger than this is refused (a codebook is a few kilobytes).
MAX_CODEBOOK_BYTES = 2_000_000

YAML_SUFFIXES = (".yaml", ".yml")
JSON_SUFFIXES = (".json",)


# ---- entry points ---------------------------------------------------------------------------
def load_codebook(path: str | os.PathLike[str]) -> Codebook:
    """Read and check a codebook file (``.yaml``/``.yml`` or Frictionless ``.json``).

    Parameters
    ----------
    path
        The codebook file. YAML files follow ``docs/codebook.md``; JSON files are Frictionless
        Table Schemas such as those written by
        :func:`coderel.codebook.frictionless.write_table_schema`.

    Returns
    -------
    Codebook
        The codebook, with ``source`` set to the path.

    Raises
    ------
    CodebookError
        When the file holds any error; ``problems`` lists every problem found, with lines.
    UsageError
        When the file does not exist or has another suffix.
    InputRefused
        When the file is too large to be a codebook.
    """
    codebook, problems = _load(Path(path))
    if codebook is None or problems.errors:
        n = len(problems.errors)
        raise CodebookError(
            f"the codebook {Path(path).name} has {n} error(s); nothing was done",
            problems=problems,
        )
    return codebook


def codebook_problems(path: str | os.PathLike[str]) -> Problems:
    """Every problem (errors and warnings) of a codebook file, without raising for them."""
    return _load(Path(path))[1]


def _load(path: Path) -> tuple[Codebook | None, Problems]:
    suffix = path.suffix.lower()
    if suffix not in YAML_SUFFIXES + JSON_SUFFIXES:
        raise UsageError(
            f"the codebook {path.name!r} is neither .yaml/.yml nor a Frictionless .json file"
        )
    if not path.is_file():
        raise UsageError(f"no codebook file {str(path)!r}")
    size = path.stat().st_size
    if size > MAX_CODEBOOK_BYTES:
        raise InputRefused(
            f"the codebook {path.name} is {size} bytes; a codebook over "
            f"{MAX_CODEBOOK_BYTES} bytes is refused"
        )
    data = path.read_bytes()
    problems = Problems()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        problems.add(
            "codebook-syntax",
            "the codebook is not UTF-8 text",
            hint="save the file as UTF-8",
            file=path.name,
            line=line,
        )
        return None, problems
    if suffix in JSON_SUFFIXES:
        try:
            schema = json.loads(text)
        except json.JSONDecodeError as exc:
            problems.add(
                "codebook-syntax",
                f"the file is not valid JSON: {exc.msg}",
                hint="check brackets, commas and quotes near this line",
                file=path.name,
                line=exc.lineno,
            )
            return None, problems
        except RecursionError:
            too_deep_problem(problems, path.name, None)
            return None, problems
        except ValueError:  # an integer of more than 4,300 digits
            problems.add(
                "codebook-syntax",
                "the file holds a number too long to read",
                hint="codes are whole numbers or short text; numbers have at most 300 digits",
                file=path.name,
            )
            return None, problems
        return table_schema_problems(schema, source=str(path), file=path.name)
    return parse_codebook_yaml(text, file=path.name, source=str(path))


def parse_codebook_yaml(
    text: str, *, file: str | None = None, source: str | None = None
) -> tuple[Codebook | None, Problems]:
    """Parse YAML text in the codebook format; return the codebook (or ``None``) and all problems.

    The codebook is ``None`` when any problem is an error.
    """
    problems = Problems()
    root = compose_yaml(text, problems, file)
    if root is None:
        return None, problems
    codebook = CodebookBuilder(problems, file).build(root, source=source)
    return (None if problems.errors else codebook), _by_line(problems)


def _by_line(problems: Problems) -> Problems:
    """Problems in the order of the file's lines (stable for problems on one line)."""
    return Problems(sorted(problems, key=lambda p: p.line or 0))


def codebook_json_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of the YAML codebook, shipped as package data."""
    from importlib.resources import files

    text = files("coderel.codebook").joinpath("codebook.schema.json").read_text("utf-8")
    return json.loads(text)
