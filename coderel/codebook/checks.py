"""Checks of single codebook fields: text, flags, codes, numbers, thresholds, categories, ranges.

:class:`FieldChecker` reads located values (:class:`coderel.codebook.nodes.Node`) and records
every problem it finds, with file and line, instead of stopping at the first; each method returns
the checked value or ``None``. :class:`coderel.codebook.build.CodebookBuilder` uses these checks to
assemble variables and the codebook.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Sequence
from typing import Any

from coderel.codebook.model import MULTI_SEPARATOR, Category, Code, MissingCode, Thresholds
from coderel.codebook.nodes import Node
from coderel.problems import Problems

__all__ = [
    "CATEGORY_KEYS",
    "CONDITION_KEYS",
    "MAX_CODE_LENGTH",
    "MISSING_KEYS",
    "THRESHOLD_KEYS",
    "TOP_KEYS",
    "VARIABLE_KEYS",
    "FieldChecker",
    "kind",
    "suggest",
]

#: Longest text code accepted; codes are meant to be short.
MAX_CODE_LENGTH = 64
#: Whole-number codes fit a 64-bit integer (the integer columns of the outputs).
_INT64_MIN, _INT64_MAX = -(2**63), 2**63 - 1

TOP_KEYS = (
    "title",
    "version",
    "unit",
    "description",
    "text_columns",
    "thresholds",
    "variables",
    "recode",
)
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
    "renamed_from",
    "none",
)
CATEGORY_KEYS = ("code", "label", "description", "examples")
MISSING_KEYS = ("code", "label")
CONDITION_KEYS = ("variable", "includes")
THRESHOLD_KEYS = ("reliable", "tentative", "training")
# Characters that would break a multi-select cell or the ``code = label`` dropdown form.
_FORBIDDEN_IN_CODE = (MULTI_SEPARATOR, "=", "\n", "\r", "\t")


def suggest(word: str, choices: Sequence[str]) -> str | None:
    close = difflib.get_close_matches(word, choices, n=1, cutoff=0.6)
    if close:
        return f"did you mean {close[0]!r}?"
    return "allowed: " + ", ".join(choices)


def kind(value: Any) -> str:
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


class FieldChecker:
    """Checks one field at a time, collects every problem and returns the checked value."""

    def __init__(self, problems: Problems, file: str | None) -> None:
        self.problems = problems
        self.file = file

    # -- helpers --
    def add(self, code: str, message: str, node: Node | None, **place: Any) -> None:
        line = node.line if node is not None else None
        hint = place.pop("hint", None)
        self.problems.add(code, message, hint=hint, file=self.file, line=line, **place)

    def check_keys(
        self, node: Node, allowed: Sequence[str], where: str, variable: str | None = None
    ) -> None:
        for key, value in node.value.items():
            if key not in allowed:
                self.add(
                    "codebook-field",
                    f"unknown key {key!r} in {where}",
                    value,
                    hint=suggest(key, allowed),
                    variable=variable,
                )

    def text(
        self,
        node: Node | None,
        what: str,
        *,
        required: bool = False,
        parent: Node | None = None,
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
                    f"{what} must be text, not {kind(value)}",
                    node,
                    variable=variable,
                )
                return None
        if required and not value.strip():
            self.add("codebook-field", f"{what} is empty", node, variable=variable)
            return None
        return value

    def flag(self, node: Node | None, what: str, variable: str | None) -> bool:
        if node is None or node.value is None:
            return False
        if not isinstance(node.value, bool):
            self.add(
                "codebook-field",
                f"{what} must be true or false, not {kind(node.value)}",
                node,
                variable=variable,
            )
            return False
        return node.value

    def code(self, node: Node, what: str, variable: str | None) -> Code | None:
        value = node.value
        hint = None
        if isinstance(value, bool) or value is None:
            raw = node.raw if node.raw is not None else str(value).lower()
            hint = f"put quotes around it: '{raw}'" if raw else None
        elif isinstance(value, int):
            if not _INT64_MIN <= value <= _INT64_MAX:
                self.add(
                    "codebook-field",
                    f"{what} is a whole number too large for a code",
                    node,
                    variable=variable,
                    hint="use a code between -9223372036854775808 and 9223372036854775807",
                )
                return None
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
            f"{what} must be a whole number or short text, not {kind(value)}",
            node,
            variable=variable,
            hint=hint,
        )
        return None

    def number(self, node: Node, what: str, variable: str | None) -> float | None:
        value = node.value
        if isinstance(value, int) and not isinstance(value, bool):
            try:
                value = float(value)
            except OverflowError:  # a whole number of hundreds of digits
                self.add(
                    "bad-range" if what.startswith("range") else "codebook-field",
                    f"{what} is a number too large to compute with",
                    node,
                    variable=variable,
                    hint="use a number below 1e308",
                )
                return None
        if (
            isinstance(value, bool)
            or not isinstance(value, int | float)
            or not math.isfinite(value)
        ):
            self.add(
                "bad-range" if what.startswith("range") else "codebook-field",
                f"{what} must be a finite number, not {kind(value)}",
                node,
                variable=variable,
            )
            return None
        return float(value)

    def mapping(self, node: Node | None, what: str, variable: str | None = None) -> bool:
        if node is None or node.value is None:
            return False
        if not node.is_map:
            self.add(
                "codebook-field",
                f"{what} must be a block of keys, not {kind(node.value)}",
                node,
                variable=variable,
            )
            return False
        return True

    def sequence(self, node: Node | None, what: str, variable: str | None = None) -> list[Node]:
        if node is None or node.value is None:
            return []
        if not node.is_seq:
            self.add(
                "codebook-field",
                f"{what} must be a list, not {kind(node.value)}",
                node,
                variable=variable,
                hint="write it as [a, b] or as lines starting with '- '",
            )
            return []
        return node.value

    # -- parts --
    def thresholds(self, node: Node | None, variable: str | None) -> Thresholds | None:
        if not self.mapping(node, "thresholds", variable):
            return None
        assert node is not None
        self.check_keys(node, THRESHOLD_KEYS, "thresholds", variable)
        values: dict[str, float] = {}
        default = Thresholds()
        training: float | None = None
        for key in THRESHOLD_KEYS:
            sub = node.value.get(key)
            if sub is None:
                if key != "training":
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
            if key == "training":
                training = number
            else:
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
        return Thresholds(
            reliable=values["reliable"], tentative=values["tentative"], training=training
        )

    def categories(self, node: Node | None, name: str) -> tuple[list[Category], list[Node]]:
        cats: list[Category] = []
        code_nodes: list[Node] = []
        for item in self.sequence(node, "categories", name):
            if not item.is_map:
                self.add(
                    "codebook-field",
                    f"a category must be a block with code and label, not {kind(item.value)}",
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

    def missing(self, node: Node | None, name: str) -> tuple[list[MissingCode], list[Node]]:
        out: list[MissingCode] = []
        code_nodes: list[Node] = []
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

    def range(self, node: Node | None, name: str) -> tuple[float, float] | None:
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
