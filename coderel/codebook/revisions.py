"""Codebook revisions: the ``recode`` block and ``renamed_from`` keys, and the difference between
two versions of a codebook.

A revised codebook says how values coded under an earlier version map onto its codes::

    version: "1.1"
    recode:
      - from_version: "1.0"
        variables:
          behaviour: {5: 4}      # 5 = Contact or attack merged into 4

and which variables were renamed (``renamed_from: old_name`` on the variable). Sheets made from
version 1.0 (the ``codebook`` sheet of a template carries the version) are recoded when read;
:func:`diff_codebooks` lists what changed between two versions.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from coderel.codebook.loops import loops
from coderel.codebook.model import Code, Codebook, Recode, Variable

if TYPE_CHECKING:
    from coderel.codebook.checks import FieldChecker
    from coderel.codebook.nodes import Node

RECODE_KEYS = ("from_version", "variables")


def _code_key(key: str) -> Code:
    """A YAML mapping key as a code: whole numbers as ``int``, anything else as text."""
    text = str(key).strip()
    try:
        return int(text)
    except ValueError:
        return text


def parse_recode(
    checker: FieldChecker, node: Node | None, variables: dict[str, Variable], version: str
) -> tuple[Recode, ...]:
    """The ``recode`` list, every problem recorded (unknown variable, a target code the variable
    does not have, a block from this very version or from one version twice)."""
    out: list[Recode] = []
    seen: set[str] = set()
    for item in checker.sequence(node, "recode"):
        if not checker.mapping(item, "a recode block"):
            continue
        checker.check_keys(item, RECODE_KEYS, "a recode block")
        from_node = item.value.get("from_version")
        if from_node is None or from_node.value is None:
            checker.add(
                "codebook-field",
                "a recode block has no from_version",
                item,
                hint='add from_version: "1.0" (the version the sheets were made from)',
            )
            continue
        from_version = from_node.raw or str(from_node.value)
        if from_version == version:
            checker.add(
                "codebook-field",
                f"a recode block comes from version {from_version}, this codebook's own version",
                from_node,
                hint="recode blocks map codes of an earlier version onto this one",
            )
            continue
        if from_version in seen:
            checker.add(
                "codebook-field",
                f"two recode blocks come from version {from_version}",
                from_node,
                hint="give one block per earlier version",
            )
            continue
        seen.add(from_version)
        maps: list[tuple[str, tuple[tuple[Code, Code], ...]]] = []
        var_nodes = item.value.get("variables")
        if not checker.mapping(var_nodes, "recode variables"):
            continue
        assert var_nodes is not None
        for name, map_node in var_nodes.value.items():
            var = variables.get(name)
            if var is None:
                checker.add(
                    "codebook-field",
                    f"the recode block from version {from_version} names {name!r}, which is not "
                    "a variable of this codebook",
                    map_node,
                    hint="use this version's variable names",
                )
                continue
            if not var.is_categorical:
                checker.add(
                    "codebook-field",
                    f"recode of {name}: only nominal and ordinal codes can be recoded",
                    map_node,
                    variable=name,
                )
                continue
            if not checker.mapping(map_node, f"recode of {name}", name):
                continue
            allowed = {str(c): c for c in (*var.codes, *var.missing_codes)}
            pairs: list[tuple[Code, Code]] = []
            for old, new_node in map_node.value.items():
                new = new_node.value
                target = allowed.get(str(new).strip()) if new is not None else None
                if target is None:
                    checker.add(
                        "recode-unknown-code",
                        f"recode of {name} from version {from_version} maps {old} onto "
                        f"{new!r}, which is not a code of {name}",
                        new_node,
                        variable=name,
                        hint=f"codes of {name}: " + ", ".join(allowed),
                    )
                    continue
                pairs.append((_code_key(old), target))
            if pairs:
                maps.append((name, tuple(pairs)))
        out.append(Recode(from_version, tuple(maps)))
    return tuple(out)


def check_renames(
    checker: FieldChecker, variables: list[Variable], nodes: dict[str, Node | None]
) -> None:
    """``renamed_from`` must not lead round in a loop, nor name one old variable twice."""
    parent = {v.name: v.renamed_from for v in variables if v.renamed_from}
    claimed: dict[str, str] = {}
    for name, old in parent.items():
        if old in claimed:
            checker.add(
                "codebook-field",
                f"{name} and {claimed[old]} are both renamed_from {old!r}",
                nodes.get(name),
                variable=name,
                hint="one earlier variable can become one variable of this version",
            )
        claimed.setdefault(old, name)
    for path in loops(parent):
        start = path[0]
        checker.add(
            "rename-cycle",
            "renamed_from entries form a loop: " + " <- ".join([*path, start]),
            nodes.get(start),
            variable=start,
            hint="renamed_from names the variable's name in the earlier version; a swap of "
            "two names needs a third, temporary name in between versions",
        )


# ---- codebook diff -----------------------------------------------------------------------------


@dataclass(frozen=True)
class VariableChange:
    """What changed in one variable between two versions."""

    variable: str
    old_name: str
    changes: tuple[str, ...]
    categories_added: tuple[str, ...] = ()
    categories_removed: tuple[str, ...] = ()
    categories_relabelled: tuple[str, ...] = ()
    categories_merged: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "variable": self.variable,
            "old_name": self.old_name,
            "changes": list(self.changes),
            "categories_added": list(self.categories_added),
            "categories_removed": list(self.categories_removed),
            "categories_relabelled": list(self.categories_relabelled),
            "categories_merged": list(self.categories_merged),
        }


@dataclass(frozen=True)
class CodebookDiff:
    """The difference between two codebooks (old -> new)."""

    old_version: str
    new_version: str
    added: tuple[str, ...] = ()
    removed: tuple[str, ...] = ()
    renamed: tuple[tuple[str, str], ...] = ()
    changed: tuple[VariableChange, ...] = ()
    thresholds: tuple[str, ...] = ()
    recode_from_old: bool = False
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def empty(self) -> bool:
        return not (self.added or self.removed or self.renamed or self.changed or self.thresholds)

    def to_dict(self) -> dict[str, Any]:
        return {
            "old_version": self.old_version,
            "new_version": self.new_version,
            "added": list(self.added),
            "removed": list(self.removed),
            "renamed": [{"from": a, "to": b} for a, b in self.renamed],
            "changed": [c.to_dict() for c in self.changed],
            "thresholds": list(self.thresholds),
            "recode_from_old": self.recode_from_old,
            "notes": list(self.notes),
        }


def _cat(var: Variable, code: Code) -> str:
    return var.display(code)


def _thresholds_text(th: Any) -> str:
    text = f"reliable {th.reliable:.3f}, tentative {th.tentative:.3f}"
    if th.training is not None:
        text += f", training {th.training:.3f}"
    return text


def _variable_change(old: Variable, new: Variable, recode: Recode | None) -> VariableChange | None:
    changes: list[str] = []
    if old.level != new.level:
        changes.append(f"level {old.level} -> {new.level}")
    if old.multiple != new.multiple:
        changes.append(f"multi-select {old.multiple} -> {new.multiple}")
    if old.range != new.range:
        changes.append(f"range {old.range} -> {new.range}")
    if old.applies_when != new.applies_when:
        changes.append("applies_when changed")
    if old.thresholds != new.thresholds:
        changes.append("thresholds changed")
    if (old.label or "") != (new.label or ""):
        changes.append("label changed")
    mapping = recode.map_for(new.name) if recode is not None else {}
    old_codes = {str(c): c for c in old.codes}
    new_codes = {str(c): c for c in new.codes}
    added = [_cat(new, new_codes[k]) for k in new_codes if k not in old_codes]
    removed, merged = [], []
    for key, code in old_codes.items():
        if key in new_codes and code not in mapping:
            continue
        if code in mapping:
            merged.append(f"{_cat(old, code)} -> {_cat(new, mapping[code])}")
        else:
            removed.append(_cat(old, code))
    relabelled = [
        f"{key}: {old.label_of(old_codes[key])!r} -> {new.label_of(new_codes[key])!r}"
        for key in old_codes
        if key in new_codes and old.label_of(old_codes[key]) != new.label_of(new_codes[key])
    ]
    if not (changes or added or removed or merged or relabelled):
        return None
    return VariableChange(
        new.name,
        old.name,
        tuple(changes),
        tuple(added),
        tuple(removed),
        tuple(relabelled),
        tuple(merged),
    )


def diff_codebooks(old: Codebook, new: Codebook) -> CodebookDiff:
    """Variables added, removed, renamed (by ``renamed_from``), level changed, categories added,
    removed, relabelled or merged (by the new codebook's recode block from the old version), and
    thresholds changed."""
    recode = new.recode_from(old.version)
    renamed: list[tuple[str, str]] = []
    matched: dict[str, str] = {}  # new name -> old name
    for var in new.variables:
        if var.name in old:
            matched[var.name] = var.name
        elif var.renamed_from and var.renamed_from in old:
            matched[var.name] = var.renamed_from
            renamed.append((var.renamed_from, var.name))
    added = tuple(v.name for v in new.variables if v.name not in matched)
    removed = tuple(v.name for v in old.variables if v.name not in matched.values())
    changed = []
    for new_name, old_name in matched.items():
        change = _variable_change(old.variable(old_name), new.variable(new_name), recode)
        if change is not None:
            changed.append(change)
    thresholds = ()
    if old.thresholds != new.thresholds:
        thresholds = (f"{_thresholds_text(old.thresholds)} -> {_thresholds_text(new.thresholds)}",)
    notes = []
    if old.version == new.version:
        notes.append(f"both codebooks say version {old.version}: give the revision a new version")
    removed_codes = any(c.categories_removed for c in changed)
    if removed_codes and recode is None:
        notes.append(
            f"categories were removed but the new codebook has no recode block from version "
            f"{old.version}: sheets made from it will hold codes the new version does not know"
        )
    return CodebookDiff(
        old.version,
        new.version,
        added,
        removed,
        tuple(renamed),
        tuple(changed),
        thresholds,
        recode is not None,
        tuple(notes),
    )
