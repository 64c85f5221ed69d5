"""Assemble the codebook model from located values: variables, conditions, column names.

:class:`CodebookBuilder` walks the tree of :class:`coderel.codebook.nodes.Node` values (from YAML
with lines, or from plain data such as a Table Schema), checks every field with
:class:`coderel.codebook.checks.FieldChecker`, then the checks that need the whole codebook
(duplicate names and codes, ``applies_when`` targets and loops, clashing column names), and builds
the :class:`coderel.codebook.model.Codebook` when no error was found.
"""

from __future__ import annotations

from typing import Any

from coderel.codebook.checks import (
    CONDITION_KEYS,
    TOP_KEYS,
    VARIABLE_KEYS,
    FieldChecker,
    kind,
    suggest,
)
from coderel.codebook.loops import loops
from coderel.codebook.model import (
    CATEGORICAL_LEVELS,
    LEVELS,
    Category,
    Code,
    Codebook,
    Condition,
    Thresholds,
    Variable,
)
from coderel.codebook.nodes import Node, TooDeep, plain_to_node, too_deep_problem
from coderel.codebook.revisions import check_renames, parse_recode
from coderel.problems import Problems

__all__ = ["CodebookBuilder", "codebook_from_data"]


def codebook_from_data(
    data: Any, *, file: str | None = None, source: str | None = None
) -> tuple[Codebook | None, Problems]:
    """Check plain data in the YAML shape (already parsed, e.g. from JSON); same checks as YAML."""
    problems = Problems()
    try:
        root = plain_to_node(data)
    except TooDeep:
        too_deep_problem(problems, file, None)
        return None, problems
    codebook = CodebookBuilder(problems, file).build(root, source=source)
    return (None if problems.errors else codebook), problems


class CodebookBuilder(FieldChecker):
    """Walks located nodes, collects every problem and builds the model objects."""

    #: variables the codebook names whose own errors kept them from being built
    unbuilt: frozenset[str] = frozenset()

    def __init__(self, problems: Problems, file: str | None) -> None:
        super().__init__(problems, file)
        #: Where each variable's ``renamed_from`` stands (for located messages).
        self.rename_nodes: dict[str, Node | None] = {}

    def variable(
        self, node: Node, seen: dict[str, tuple[str, Node]]
    ) -> tuple[Variable, Node] | None:
        if not node.is_map:
            self.add(
                "codebook-field",
                f"a variable must be a block of keys, not {kind(node.value)}",
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
                hint=suggest(level.lower(), LEVELS),
            )
            level = None
        cats, code_nodes = self.categories(keys.get("categories"), name or "?")
        missing, missing_nodes = self.missing(keys.get("missing"), name or "?")
        rng = self.range(keys.get("range"), name or "?")
        integer = self.flag(keys.get("integer"), "integer", name)
        multiple = self.flag(keys.get("multiple"), "multiple", name)
        thresholds = self.thresholds(keys.get("thresholds"), name)
        renamed_from = self.text(keys.get("renamed_from"), "renamed_from", variable=name)
        if renamed_from is not None and name is not None:
            self.rename_nodes[name] = keys.get("renamed_from")
        condition_node = keys.get("applies_when")
        none, none_node = self.none_category(keys.get("none"), name or "?", multiple)

        # codes must be unique within the variable, missing codes included
        seen_codes: dict[str, Node] = {}
        for code, code_node in zip(
            [c.code for c in cats] + [m.code for m in missing] + ([none.code] if none else []),
            code_nodes + missing_nodes + ([none_node] if none_node is not None else []),
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
            renamed_from=renamed_from,
            none=none,
        )
        return variable, condition_node  # type: ignore[return-value]

    def none_category(
        self, node: Node | None, name: str, multiple: bool
    ) -> tuple[Category | None, Node | None]:
        """``none: {code: 0, label: None of these}``: the coded empty set of a multi-select."""
        if node is None or node.value is None:
            return None, None
        if not multiple:
            self.add(
                "codebook-field",
                "none (the code for 'none of these') is only for multi-select variables",
                node,
                variable=name,
                hint="remove none, or add multiple: true",
            )
            return None, None
        if not node.is_map:
            self.add(
                "codebook-field",
                f"none must be a block with code and label, not {kind(node.value)}",
                node,
                variable=name,
                hint="write it as {code: 0, label: None of these}",
            )
            return None, None
        self.check_keys(node, ("code", "label"), "none", name)
        code_node = node.value.get("code")
        if code_node is None:
            self.add("codebook-field", "none has no code", node, variable=name, hint="add code")
            return None, None
        code = self.code(code_node, "the code of none", name)
        label = self.text(
            node.value.get("label"), "the label of none", required=True, parent=node, variable=name
        )
        if code is None or label is None:
            return None, None
        return Category(code, label), code_node

    def condition(
        self, node: Node, owner: Variable, by_name: dict[str, Variable]
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
        codes: list[tuple[Code, Node]] = []
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
        if cond_var is None and target in self.unbuilt:
            return None  # the condition variable has errors of its own, reported already
        if cond_var is None:
            self.add(
                "unknown-condition-variable",
                f"applies_when names {target!r}, which is not a variable of the codebook",
                var_node,
                variable=owner.name,
                hint=suggest(target, list(by_name)),
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

    def build(self, root: Node, *, source: str | None) -> Codebook | None:
        if not root.is_map:
            self.add(
                "codebook-field",
                f"the codebook must be a block of keys (title, variables, ...), not "
                f"{kind(root.value)}",
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
        text_columns: list[tuple[str, Node]] = []
        for item in self.sequence(top.get("text_columns"), "text_columns"):
            col = self.text(item, "a text column", required=True, parent=item)
            if col is not None:
                text_columns.append((col, item))
        thresholds = self.thresholds(top.get("thresholds"), None)

        variables_node = top.get("variables")
        built: list[tuple[Variable, Node | None]] = []
        seen: dict[str, tuple[str, Node]] = {}
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
        # variables named in the codebook but not built (their own errors are reported): a
        # condition naming one of them is not a second error (issue 9, item 19)
        self.unbuilt = frozenset({name for name, _ in seen.values()} - set(by_name))
        # conditions, once every variable is known
        final: list[Variable] = []
        for var, cond_node in built:
            if cond_node is not None and cond_node.value is not None:
                cond = self.condition(cond_node, var, by_name)
                var = Variable(**{**_fields(var), "applies_when": cond})
            final.append(var)
        self.check_cycles(final, {v.name: n for v, n in built})
        check_renames(self, final, self.rename_nodes)
        recode = parse_recode(self, top.get("recode"), {v.name: v for v in final}, version)

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
            recode=recode,
        )

    def check_cycles(self, variables: list[Variable], nodes: dict[str, Node | None]) -> None:
        parent = {v.name: v.applies_when.variable for v in variables if v.applies_when}
        for cycle in loops(parent):
            start = cycle[0]
            self.add(
                "condition-cycle",
                "applies_when conditions form a loop: " + " -> ".join([*cycle, start]),
                nodes.get(start),
                variable=start,
                hint="a variable cannot depend, directly or not, on itself",
            )


def _fields(var: Variable) -> dict[str, Any]:
    return {name: getattr(var, name) for name in Variable.__dataclass_fields__}
