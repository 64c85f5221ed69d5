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

import difflib
import json
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import yaml

from coderel.codebook.model import (
    CATEGORICAL_LEVELS,
    LEVELS,
    MULTI_SEPARATOR,
    Category,
    Code,
    Codebook,
    Condition,
    MissingCode,
    Thresholds,
    Variable,
)
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
#: Longest text code accepted; codes are meant to be short.
MAX_CODE_LENGTH = 64
#: Most YAML nodes visited (guards against alias bombs that expand exponentially).
MAX_NODES = 200_000

YAML_SUFFIXES = (".yaml", ".yml")
JSON_SUFFIXES = (".json",)

TOP_KEYS = ("title", "version", "unit", "description", "text_columns", "thresholds", "variables")
VARIABLE_KEYS = (
    "name",
    "label",
    "level",
    "instructions",
    "categories",
    "missing",
    "range",
    "integer",
    "multiple",
    "applies_when",
    "thresholds",
)
CATEGORY_KEYS = ("code", "label", "description", "examples")
MISSING_KEYS = ("code", "label")
CONDITION_KEYS = ("variable", "includes")
THRESHOLD_KEYS = ("reliable", "tentative")
# Characters that would break a multi-select cell or the ``code = label`` dropdown form.
_FORBIDDEN_IN_CODE = (MULTI_SEPARATOR, "=", "\n", "\r", "\t")


# ---- located values -------------------------------------------------------------------------
@dataclass(frozen=True, slots=True)
class _Node:
    """A parsed value with the 1-based line it starts on (``None`` for JSON input)."""

    value: Any  # dict[str, _Node] | list[_Node] | scalar
    line: int | None
    raw: str | None = None  # a plain YAML scalar's source text

    @property
    def is_map(self) -> bool:
        return isinstance(self.value, dict)

    @property
    def is_seq(self) -> bool:
        return isinstance(self.value, list)


class _YamlConverter:
    """Turn a composed YAML node tree into :class:`_Node` values, noting duplicate keys."""

    def __init__(self, problems: Problems, file: str | None) -> None:
        self.problems = problems
        self.file = file
        self.visited = 0
        self.constructor = yaml.SafeLoader("")

    def convert(self, node: yaml.Node) -> _Node:
        self.visited += 1
        if self.visited > MAX_NODES:
            raise InputRefused(
                f"the codebook {self.file or ''} expands to more than {MAX_NODES} values "
                "(aliases nested too deeply?)"
            )
        line = node.start_mark.line + 1
        if isinstance(node, yaml.MappingNode):
            out: dict[str, _Node] = {}
            for key_node, value_node in node.value:
                key = str(key_node.value) if isinstance(key_node, yaml.ScalarNode) else "?"
                if key in out:
                    self.problems.add(
                        "codebook-field",
                        f"the key {key!r} appears twice in one block; the second would win",
                        hint="remove one of the two",
                        file=self.file,
                        line=key_node.start_mark.line + 1,
                    )
                    continue
                out[key] = self.convert(value_node)
            return _Node(out, line)
        if isinstance(node, yaml.SequenceNode):
            return _Node([self.convert(item) for item in node.value], line)
        value = self.constructor.construct_object(node, deep=True)
        raw = node.value if isinstance(node, yaml.ScalarNode) and node.style is None else None
        return _Node(value, line, raw)


def _plain_to_node(value: Any) -> _Node:
    """Wrap plain data (from JSON or a Table Schema) as nodes without lines."""
    if isinstance(value, Mapping):
        return _Node({str(k): _plain_to_node(v) for k, v in value.items()}, None)
    if isinstance(value, list | tuple):
        return _Node([_plain_to_node(v) for v in value], None)
    return _Node(value, None)


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
        from coderel.codebook.frictionless import table_schema_problems

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
        return table_schema_problems(schema, source=str(path), file=path.name)
    return parse_codebook_yaml(text, file=path.name, source=str(path))


def parse_codebook_yaml(
    text: str, *, file: str | None = None, source: str | None = None
) -> tuple[Codebook | None, Problems]:
    """Parse YAML text in the codebook format; return the codebook (or ``None``) and all problems.

    The codebook is ``None`` when any problem is an error.
    """
    problems = Problems()
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        problems.add(
            "codebook-syntax",
            f"the file is not valid YAML: {exc.problem or 'syntax error'}",
            hint="check indentation and quotes near this line (a tab is not allowed for indent)",
            file=file,
            line=mark.line + 1 if mark is not None else None,
        )
        return None, problems
    except yaml.YAMLError as exc:
        problems.add(
            "codebook-syntax",
            f"the file is not valid YAML ({type(exc).__name__})",
            file=file,
        )
        return None, problems
    if root is None:
        problems.add(
            "codebook-syntax",
            "the codebook file is empty",
            hint="see docs/codebook.md for the shape",
            file=file,
            line=1,
        )
        return None, problems
    try:
        node = _YamlConverter(problems, file).convert(root)
    except yaml.YAMLError as exc:
        problems.add("codebook-syntax", f"a value cannot be read ({type(exc).__name__})", file=file)
        return None, problems
    codebook = _Builder(problems, file).build(node, source=source)
    return (None if problems.errors else codebook), _by_line(problems)


def codebook_from_data(
    data: Any, *, file: str | None = None, source: str | None = None
) -> tuple[Codebook | None, Problems]:
    """Check plain data in the YAML shape (already parsed, e.g. from JSON); same checks as YAML."""
    problems = Problems()
    codebook = _Builder(problems, file).build(_plain_to_node(data), source=source)
    return (None if problems.errors else codebook), problems


def _by_line(problems: Problems) -> Problems:
    """Problems in the order of the file's lines (stable for problems on one line)."""
    return Problems(sorted(problems, key=lambda p: p.line or 0))


# ---- checks and construction ----------------------------------------------------------------
def _suggest(word: str, choices: Sequence[str]) -> str | None:
    close = difflib.get_close_matches(word, choices, n=1, cutoff=0.6)
    if close:
        return f"did you mean {close[0]!r}?"
    return "allowed: " + ", ".join(choices)


def _kind(value: Any) -> str:
    if isinstance(value, dict):
        return "a block of keys"
    if isinstance(value, list):
        return "a list"
    if value is None:
        return "empty"
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, int | float):
        return "a number"
    return type(value).__name__


class _Builder:
    """Walks located nodes, collects every problem and builds the model objects."""

    def __init__(self, problems: Problems, file: str | None) -> None:
        self.problems = problems
        self.file = file

    # -- helpers --
    def add(self, code: str, message: str, node: _Node | None, **place: Any) -> None:
        line = node.line if node is not None else None
        hint = place.pop("hint", None)
        self.problems.add(code, message, hint=hint, file=self.file, line=line, **place)

    def check_keys(
        self, node: _Node, allowed: Sequence[str], where: str, variable: str | None = None
    ) -> None:
        for key, value in node.value.items():
            if key not in allowed:
                self.add(
                    "codebook-field",
                    f"unknown key {key!r} in {where}",
                    value,
                    hint=_suggest(key, allowed),
                    variable=variable,
                )

    def text(
        self,
        node: _Node | None,
        what: str,
        *,
        required: bool = False,
        parent: _Node | None = None,
        variable: str | None = None,
    ) -> str | None:
        if node is None or node.value is None:
            if required:
                self.add(
                    "codebook-field",
                    f"{what} is missing",
                    node or parent,
                    hint=f"add {what}",
                    variable=variable,
                )
            return None
        value = node.value
        if not isinstance(value, str):
            if node.raw is not None and not isinstance(value, dict | list):
                value = node.raw  # an unquoted "No" or "1.10" is text here
            else:
                self.add(
                    "codebook-field",
                    f"{what} must be text, not {_kind(value)}",
                    node,
                    variable=variable,
                )
                return None
        if required and not value.strip():
            self.add("codebook-field", f"{what} is empty", node, variable=variable)
            return None
        return value

    def flag(self, node: _Node | None, what: str, variable: str | None) -> bool:
        if node is None or node.value is None:
            return False
        if not isinstance(node.value, bool):
            self.add(
                "codebook-field",
                f"{what} must be true or false, not {_kind(node.value)}",
                node,
                variable=variable,
            )
            return False
        return node.value

    def code(self, node: _Node, what: str, variable: str | None) -> Code | None:
        value = node.value
        hint = None
        if isinstance(value, bool) or value is None:
            raw = node.raw if node.raw is not None else str(value).lower()
            hint = f"put quotes around it: '{raw}'" if raw else None
        elif isinstance(value, int):
            return value
        elif isinstance(value, str):
            if not value.strip() or value != value.strip():
                self.add(
                    "codebook-field",
                    f"{what} is empty or has spaces around it",
                    node,
                    variable=variable,
                    hint="remove the spaces",
                )
                return None
            if len(value) > MAX_CODE_LENGTH:
                self.add(
                    "codebook-field",
                    f"{what} is longer than {MAX_CODE_LENGTH} characters",
                    node,
                    variable=variable,
                    hint="use a short code and put the words in the label",
                )
                return None
            if any(ch in value for ch in _FORBIDDEN_IN_CODE):
                self.add(
                    "codebook-field",
                    f"{what} contains ';', '=' or a line break, which separate codes in cells",
                    node,
                    variable=variable,
                    hint="use a code without these characters",
                )
                return None
            return value
        elif isinstance(value, float):
            hint = "codes are whole numbers or short text; quote it to keep it as text"
        self.add(
            "codebook-field",
            f"{what} must be a whole number or short text, not {_kind(value)}",
            node,
            variable=variable,
            hint=hint,
        )
        return None

    def number(self, node: _Node, what: str, variable: str | None) -> float | None:
        value = node.value
        if (
            isinstance(value, bool)
            or not isinstance(value, int | float)
            or not math.isfinite(value)
        ):
            self.add(
                "bad-range" if what.startswith("range") else "codebook-field",
                f"{what} must be a finite number, not {_kind(value)}",
                node,
                variable=variable,
            )
            return None
        return float(value)

    def mapping(self, node: _Node | None, what: str, variable: str | None = None) -> bool:
        if node is None or node.value is None:
            return False
        if not node.is_map:
            self.add(
                "codebook-field",
                f"{what} must be a block of keys, not {_kind(node.value)}",
                node,
                variable=variable,
            )
            return False
        return True

    def sequence(self, node: _Node | None, what: str, variable: str | None = None) -> list[_Node]:
        if node is None or node.value is None:
            return []
        if not node.is_seq:
            self.add(
                "codebook-field",
                f"{what} must be a list, not {_kind(node.value)}",
                node,
                variable=variable,
                hint="write it as [a, b] or as lines starting with '- '",
            )
            return []
        return node.value

    # -- parts --
    def thresholds(self, node: _Node | None, variable: str | None) -> Thresholds | None:
        if not self.mapping(node, "thresholds", variable):
            return None
        assert node is not None
        self.check_keys(node, THRESHOLD_KEYS, "thresholds", variable)
        values: dict[str, float] = {}
        default = Thresholds()
        for key in THRESHOLD_KEYS:
            sub = node.value.get(key)
            if sub is None:
                values[key] = getattr(default, key)
                continue
            number = self.number(sub, f"thresholds.{key}", variable)
            if number is None:
                return None
            if not 0.0 <= number <= 1.0:
                self.add(
                    "bad-thresholds",
                    f"thresholds.{key} = {number} lies outside 0..1",
                    sub,
                    variable=variable,
                    hint="alpha thresholds are between 0 and 1 (convention: 0.800 and 0.667)",
                )
                return None
            values[key] = number
        if values["tentative"] > values["reliable"]:
            self.add(
                "bad-thresholds",
                "thresholds.tentative is higher than thresholds.reliable",
                node,
                variable=variable,
                hint="tentative must not exceed reliable (convention: 0.667 and 0.800)",
            )
            return None
        return Thresholds(reliable=values["reliable"], tentative=values["tentative"])

    def categories(self, node: _Node | None, name: str) -> tuple[list[Category], list[_Node]]:
        cats: list[Category] = []
        code_nodes: list[_Node] = []
        for item in self.sequence(node, "categories", name):
            if not item.is_map:
                self.add(
                    "codebook-field",
                    f"a category must be a block with code and label, not {_kind(item.value)}",
                    item,
                    variable=name,
                    hint="write it as {code: 1, label: Unaware}",
                )
                continue
            self.check_keys(item, CATEGORY_KEYS, "a category", name)
            code_node = item.value.get("code")
            if code_node is None:
                self.add(
                    "codebook-field", "a category has no code", item, variable=name, hint="add code"
                )
                continue
            code = self.code(code_node, "a category code", name)
            label = self.text(
                item.value.get("label"),
                "the category label",
                required=True,
                parent=item,
                variable=name,
            )
            description = self.text(item.value.get("description"), "description", variable=name)
            examples: list[str] = []
            for ex in self.sequence(item.value.get("examples"), "examples", name):
                text = self.text(ex, "an example", variable=name)
                if text is not None:
                    examples.append(text)
            if code is None or label is None:
                continue
            cats.append(Category(code, label, description, tuple(examples)))
            code_nodes.append(code_node)
        return cats, code_nodes

    def missing(self, node: _Node | None, name: str) -> tuple[list[MissingCode], list[_Node]]:
        out: list[MissingCode] = []
        code_nodes: list[_Node] = []
        for item in self.sequence(node, "missing", name):
            if item.is_map:
                self.check_keys(item, MISSING_KEYS, "a missing code", name)
                code_node = item.value.get("code")
                if code_node is None:
                    self.add("codebook-field", "a missing code has no code", item, variable=name)
                    continue
                label = self.text(
                    item.value.get("label"), "the missing code's label", variable=name
                )
            else:
                code_node, label = item, None
            code = self.code(code_node, "a missing code", name)
            if code is None:
                continue
            out.append(MissingCode(code) if label is None else MissingCode(code, label))
            code_nodes.append(code_node)
        return out, code_nodes

    def range(self, node: _Node | None, name: str) -> tuple[float, float] | None:
        if node is None or node.value is None:
            return None
        if not node.is_seq or len(node.value) != 2:
            self.add(
                "bad-range",
                "range must be a list of two numbers [low, high]",
                node,
                variable=name,
                hint="write it as [1, 60]",
            )
            return None
        low = self.number(node.value[0], "range low", name)
        high = self.number(node.value[1], "range high", name)
        if low is None or high is None:
            return None
        if low > high:
            self.add(
                "bad-range",
                f"range low {low:g} is above high {high:g}",
                node,
                variable=name,
                hint=f"swap them: [{high:g}, {low:g}]",
            )
            return None
        return (low, high)

    def variable(
        self, node: _Node, seen: dict[str, tuple[str, _Node]]
    ) -> tuple[Variable, _Node] | None:
        if not node.is_map:
            self.add(
                "codebook-field",
                f"a variable must be a block of keys, not {_kind(node.value)}",
                node,
                hint="start each variable with '- name: ...'",
            )
            return None
        keys = node.value
        name_node = keys.get("name")
        name = self.text(name_node, "the variable's name", required=True, parent=node)
        if name is not None and name != name.strip():
            self.add("codebook-field", "a variable name has spaces around it", name_node)
            name = None
        self.check_keys(node, VARIABLE_KEYS, f"variable {name or '?'}", name)
        if name is not None:
            folded = name.casefold()
            if folded in seen:
                first_name, first_node = seen[folded]
                self.add(
                    "duplicate-variable",
                    f"the variable name {name!r} is used twice"
                    + ("" if first_name == name else f" (as {first_name!r}, ignoring case)"),
                    name_node,
                    variable=name,
                    hint=f"first used on line {first_node.line}; rename one of them"
                    if first_node.line
                    else "rename one of them",
                )
            else:
                seen[folded] = (name, name_node)
        label = self.text(keys.get("label"), "label", variable=name)
        instructions = self.text(keys.get("instructions"), "instructions", variable=name)
        level_node = keys.get("level")
        level = self.text(level_node, "level", required=True, parent=node, variable=name)
        if level is not None and level not in LEVELS:
            self.add(
                "unknown-level",
                f"unknown level of measurement {level!r}",
                level_node,
                variable=name,
                hint=_suggest(level.lower(), LEVELS),
            )
            level = None
        cats, code_nodes = self.categories(keys.get("categories"), name or "?")
        missing, missing_nodes = self.missing(keys.get("missing"), name or "?")
        rng = self.range(keys.get("range"), name or "?")
        integer = self.flag(keys.get("integer"), "integer", name)
        multiple = self.flag(keys.get("multiple"), "multiple", name)
        thresholds = self.thresholds(keys.get("thresholds"), name)
        condition_node = keys.get("applies_when")

        # codes must be unique within the variable, missing codes included
        seen_codes: dict[str, _Node] = {}
        for code, code_node in zip(
            [c.code for c in cats] + [m.code for m in missing],
            code_nodes + missing_nodes,
            strict=True,
        ):
            key = str(code)
            if key in seen_codes:
                first = seen_codes[key].line
                self.add(
                    "duplicate-code",
                    f"the code {key!r} appears twice in variable {name}",
                    code_node,
                    variable=name,
                    hint=(f"first used on line {first}; " if first else "")
                    + "each category and missing code needs its own code",
                )
            else:
                seen_codes[key] = code_node

        cat_node = keys.get("categories")
        no_categories = cat_node is None or cat_node.value is None or cat_node.value == []
        if level in CATEGORICAL_LEVELS:
            if no_categories:
                self.add(
                    "missing-categories",
                    f"the {level} variable {name} lists no categories",
                    node,
                    variable=name,
                    hint="add categories: [{code: 1, label: ...}, ...] "
                    "or use level interval/ratio for numbers",
                )
            if rng is not None:
                self.add(
                    "codebook-field",
                    f"range is for interval and ratio variables, not {level}",
                    keys["range"],
                    variable=name,
                    hint="remove range, or change the level",
                )
            if integer:
                self.add(
                    "codebook-field",
                    f"integer is for interval and ratio variables, not {level}",
                    keys["integer"],
                    variable=name,
                    hint="remove integer: categories already fix the allowed codes",
                )
        elif level is not None:  # interval / ratio
            if not no_categories:
                self.add(
                    "categories-on-numeric",
                    f"the {level} variable {name} lists categories",
                    cat_node,
                    variable=name,
                    hint="use level ordinal for ordered categories, or remove the categories "
                    "and give a range",
                )
            if rng is not None:
                for m, m_node in zip(missing, missing_nodes, strict=True):
                    if isinstance(m.code, int) and rng[0] <= m.code <= rng[1]:
                        self.add(
                            "ambiguous-missing-code",
                            f"the missing code {m.code} lies inside the range "
                            f"[{rng[0]:g}, {rng[1]:g}] of {name}",
                            m_node,
                            variable=name,
                            hint="choose a missing code outside the range, e.g. -1 or 999",
                        )
        if multiple and level is not None and level != "nominal":
            self.add(
                "multiple-not-nominal",
                f"multiple: true is only for nominal variables, not {level}",
                keys["multiple"],
                variable=name,
                hint="use level nominal for a set of ticked categories",
            )
        if name is None or level is None:
            return None
        variable = Variable(
            name=name,
            level=level,  # type: ignore[arg-type]
            label=label,
            categories=tuple(cats),
            missing=tuple(missing),
            range=rng,
            integer=integer,
            multiple=multiple,
            applies_when=None,
            instructions=instructions,
            thresholds=thresholds,
        )
        return variable, condition_node  # type: ignore[return-value]

    def condition(
        self, node: _Node, owner: Variable, by_name: dict[str, Variable]
    ) -> Condition | None:
        if not self.mapping(node, "applies_when", owner.name):
            return None
        self.check_keys(node, CONDITION_KEYS, "applies_when", owner.name)
        var_node = node.value.get("variable")
        target = self.text(
            var_node, "applies_when.variable", required=True, parent=node, variable=owner.name
        )
        includes_node = node.value.get("includes")
        if includes_node is None or includes_node.value is None:
            self.add(
                "codebook-field",
                "applies_when.includes is missing",
                node,
                variable=owner.name,
                hint="list the codes that make this variable apply, e.g. includes: [3]",
            )
            return None
        items = includes_node.value if includes_node.is_seq else [includes_node]
        if not items:
            self.add(
                "codebook-field",
                "applies_when.includes is empty",
                includes_node,
                variable=owner.name,
            )
            return None
        codes: list[tuple[Code, _Node]] = []
        for item in items:
            code = self.code(item, "a code in applies_when.includes", owner.name)
            if code is not None:
                codes.append((code, item))
        if target is None or len(codes) != len(items):
            return None
        if target == owner.name:
            self.add(
                "condition-cycle",
                f"variable {owner.name} depends on itself in applies_when",
                var_node,
                variable=owner.name,
            )
            return None
        cond_var = by_name.get(target)
        if cond_var is None:
            self.add(
                "unknown-condition-variable",
                f"applies_when names {target!r}, which is not a variable of the codebook",
                var_node,
                variable=owner.name,
                hint=_suggest(target, list(by_name)),
            )
            return None
        if not cond_var.is_categorical:
            self.add(
                "bad-condition-code",
                f"applies_when needs a nominal or ordinal variable; {target} is {cond_var.level}",
                var_node,
                variable=owner.name,
            )
            return None
        ok = True
        for code, item in codes:
            if code not in cond_var.codes:
                ok = False
                self.add(
                    "bad-condition-code",
                    f"applies_when lists code {code!r}, which {target} does not have",
                    item,
                    variable=owner.name,
                    hint=f"codes of {target}: " + ", ".join(str(c) for c in cond_var.codes),
                )
        return Condition(target, tuple(c for c, _ in codes)) if ok else None

    def build(self, root: _Node, *, source: str | None) -> Codebook | None:
        if not root.is_map:
            self.add(
                "codebook-field",
                f"the codebook must be a block of keys (title, variables, ...), not "
                f"{_kind(root.value)}",
                root,
                hint="see docs/codebook.md for the shape",
            )
            return None
        top = root.value
        self.check_keys(root, TOP_KEYS, "the codebook")
        title = self.text(top.get("title"), "title", required=True, parent=root)
        version_node = top.get("version")
        version = "1.0"
        if version_node is not None and version_node.value is not None:
            if isinstance(version_node.value, int | float) and not isinstance(
                version_node.value, bool
            ):
                version = version_node.raw or str(version_node.value)
            else:
                version = self.text(version_node, "version") or "1.0"
        unit_node = top.get("unit")
        unit = "unit"
        if unit_node is not None:
            unit = self.text(unit_node, "unit", required=True) or "unit"
        description = self.text(top.get("description"), "description")
        text_columns: list[tuple[str, _Node]] = []
        for item in self.sequence(top.get("text_columns"), "text_columns"):
            col = self.text(item, "a text column", required=True, parent=item)
            if col is not None:
                text_columns.append((col, item))
        thresholds = self.thresholds(top.get("thresholds"), None)

        variables_node = top.get("variables")
        built: list[tuple[Variable, _Node | None]] = []
        seen: dict[str, tuple[str, _Node]] = {}
        if variables_node is None or variables_node.value is None:
            self.add(
                "codebook-field",
                "the codebook has no variables",
                variables_node or root,
                hint="add variables: with at least one variable",
            )
        else:
            items = self.sequence(variables_node, "variables")
            if variables_node.is_seq and not items:
                self.add("codebook-field", "the variables list is empty", variables_node)
            for item in items:
                result = self.variable(item, seen)
                if result is not None:
                    built.append(result)

        by_name = {v.name: v for v, _ in built}
        # conditions, once every variable is known
        final: list[Variable] = []
        for var, cond_node in built:
            if cond_node is not None and cond_node.value is not None:
                cond = self.condition(cond_node, var, by_name)
                var = Variable(**{**_fields(var), "applies_when": cond})
            final.append(var)
        self.check_cycles(final, {v.name: n for v, n in built})

        # column names: unit, text columns and variables must all differ
        columns: dict[str, str] = {}
        for v in final:
            columns.setdefault(v.name.casefold(), f"variable {v.name}")
        if unit.casefold() in columns:
            self.add(
                "column-clash",
                f"the unit column {unit!r} has the name of a variable",
                unit_node or root,
                hint="rename the variable or set unit: to another column",
            )
        columns.setdefault(unit.casefold(), "the unit column")
        for col, col_node in text_columns:
            if col.casefold() in columns:
                self.add(
                    "column-clash",
                    f"the text column {col!r} has the same name as {columns[col.casefold()]}",
                    col_node,
                    hint="each column of the coding sheet needs its own name",
                )
            else:
                columns[col.casefold()] = f"text column {col}"

        if self.problems.errors or title is None:
            return None
        return Codebook(
            title=title,
            variables=tuple(final),
            version=version,
            unit=unit,
            description=description,
            text_columns=tuple(c for c, _ in text_columns),
            thresholds=thresholds if thresholds is not None else Thresholds(),
            source=source,
        )

    def check_cycles(self, variables: list[Variable], nodes: dict[str, _Node | None]) -> None:
        parent = {v.name: v.applies_when.variable for v in variables if v.applies_when}
        reported: set[str] = set()
        for start in parent:
            path: list[str] = []
            current: str | None = start
            while current is not None and current not in path:
                path.append(current)
                current = parent.get(current)
            if current is not None and current == start and start not in reported:
                cycle = path
                reported.update(cycle)
                self.add(
                    "condition-cycle",
                    "applies_when conditions form a loop: " + " -> ".join([*cycle, start]),
                    nodes.get(start),
                    variable=start,
                    hint="a variable cannot depend, directly or not, on itself",
                )


def _fields(var: Variable) -> dict[str, Any]:
    return {name: getattr(var, name) for name in Variable.__dataclass_fields__}


def codebook_json_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of the YAML codebook, shipped as package data."""
    from importlib.resources import files

    text = files("coderel.codebook").joinpath("codebook.schema.json").read_text("utf-8")
    return json.loads(text)
