"""Codebook values with the line they came from: YAML composed node by node, or plain data.

The YAML file is parsed with :func:`yaml.compose` and the safe loader, so every value keeps the
line it came from; nothing in the file is ever executed. :func:`compose_yaml` turns the text into
a tree of :class:`Node` values (or records a ``codebook-syntax`` problem); :func:`plain_to_node`
wraps data that was already parsed (JSON, a Table Schema) in the same shape, without lines.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import yaml

from coderel.errors import InputRefused
from coderel.problems import Problems

__all__ = [
    "MAX_DEPTH",
    "MAX_NODES",
    "Node",
    "TooDeep",
    "YamlConverter",
    "compose_yaml",
    "plain_to_node",
]

#: Most YAML nodes visited (guards against alias bombs that expand exponentially).
MAX_NODES = 200_000
#: Deepest nesting of blocks and lists accepted; the codebook's own shape needs 6 levels.
MAX_DEPTH = 50


class TooDeep(Exception):
    """The codebook nests blocks or lists deeper than :data:`MAX_DEPTH` (at ``line``)."""

    def __init__(self, line: int | None) -> None:
        super().__init__(line)
        self.line = line


@dataclass(frozen=True, slots=True)
class Node:
    """A parsed value with the 1-based line it starts on (``None`` for JSON input)."""

    value: Any  # dict[str, Node] | list[Node] | scalar
    line: int | None
    raw: str | None = None  # a plain YAML scalar's source text

    @property
    def is_map(self) -> bool:
        return isinstance(self.value, dict)

    @property
    def is_seq(self) -> bool:
        return isinstance(self.value, list)


class YamlConverter:
    """Turn a composed YAML node tree into :class:`Node` values, noting duplicate keys."""

    def __init__(self, problems: Problems, file: str | None) -> None:
        self.problems = problems
        self.file = file
        self.visited = 0
        self.constructor = yaml.SafeLoader("")

    def convert(self, node: yaml.Node, depth: int = 0) -> Node:
        if depth > MAX_DEPTH:  # aliases can nest deeper than the text does
            raise TooDeep(node.start_mark.line + 1)
        self.visited += 1
        if self.visited > MAX_NODES:
            raise InputRefused(
                f"the codebook {self.file or ''} expands to more than {MAX_NODES} values "
                "(aliases nested too deeply?)"
            )
        line = node.start_mark.line + 1
        if isinstance(node, yaml.MappingNode):
            out: dict[str, Node] = {}
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
                out[key] = self.convert(value_node, depth + 1)
            return Node(out, line)
        if isinstance(node, yaml.SequenceNode):
            return Node([self.convert(item, depth + 1) for item in node.value], line)
        try:
            value = self.constructor.construct_object(node, deep=True)
        except (ValueError, OverflowError):
            # an integer of thousands of digits: Python will not convert it; keep the text,
            # which the field's check then reports (too long for a code, not a number ...)
            value = str(node.value)
        raw = node.value if isinstance(node, yaml.ScalarNode) and node.style is None else None
        return Node(value, line, raw)


def plain_to_node(value: Any, depth: int = 0) -> Node:
    """Wrap plain data (from JSON or a Table Schema) as nodes without lines.

    Raises
    ------
    TooDeep
        When the data nest deeper than :data:`MAX_DEPTH`.
    """
    if depth > MAX_DEPTH:
        raise TooDeep(None)
    if isinstance(value, Mapping):
        return Node({str(k): plain_to_node(v, depth + 1) for k, v in value.items()}, None)
    if isinstance(value, list | tuple):
        return Node([plain_to_node(v, depth + 1) for v in value], None)
    return Node(value, None)


def too_deep_problem(problems: Problems, file: str | None, line: int | None) -> None:
    """Record that the codebook nests deeper than :data:`MAX_DEPTH`."""
    problems.add(
        "codebook-syntax",
        f"the codebook nests blocks or lists more than {MAX_DEPTH} levels deep",
        hint="a codebook needs about 6 levels (variables, categories, their fields); look for "
        "brackets or indentation that never close",
        file=file,
        line=line,
    )


def _depth_line(text: str) -> int | None:
    """The line where the text first nests deeper than :data:`MAX_DEPTH`, else ``None``.

    Reads parser events, which PyYAML produces without recursion, so a file of 50,000 opening
    brackets is measured before the (recursive) composer sees it.
    """
    depth = 0
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        if isinstance(event, yaml.CollectionStartEvent):
            depth += 1
            if depth > MAX_DEPTH:
                return event.start_mark.line + 1
        elif isinstance(event, yaml.CollectionEndEvent):
            depth -= 1
    return None


def compose_yaml(text: str, problems: Problems, file: str | None) -> Node | None:
    """Compose YAML text into located nodes; ``None`` (with a problem recorded) when it cannot be.

    Raises
    ------
    InputRefused
        When the text expands to more than :data:`MAX_NODES` values.
    """
    try:
        deep_line = _depth_line(text)
        if deep_line is not None:
            too_deep_problem(problems, file, deep_line)
            return None
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
        return None
    except yaml.YAMLError as exc:
        problems.add(
            "codebook-syntax",
            f"the file is not valid YAML ({type(exc).__name__})",
            file=file,
        )
        return None
    if root is None:
        problems.add(
            "codebook-syntax",
            "the codebook file is empty",
            hint="see docs/codebook.md for the shape",
            file=file,
            line=1,
        )
        return None
    try:
        return YamlConverter(problems, file).convert(root)
    except TooDeep as exc:
        too_deep_problem(problems, file, exc.line)
        return None
    except yaml.YAMLError as exc:
        problems.add("codebook-syntax", f"a value cannot be read ({type(exc).__name__})", file=file)
        return None
