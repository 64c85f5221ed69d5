"""The codebook as immutable objects: variables, categories, conditions and thresholds.

The model follows the open Frictionless Table Schema v2 where it can (a field's ``categories`` with
``value`` and ``label``, ``categoriesOrdered``, labelled ``missingValues``, the ``primaryKey``) and
marks its own additions as extensions: the level of measurement, ``applies_when`` conditions,
coder instructions, examples per category and the reliability thresholds.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

Code = int | str
Level = Literal["nominal", "ordinal", "interval", "ratio"]
LEVELS: tuple[str, ...] = ("nominal", "ordinal", "interval", "ratio")
CATEGORICAL_LEVELS: tuple[str, ...] = ("nominal", "ordinal")
NUMERIC_LEVELS: tuple[str, ...] = ("interval", "ratio")

#: Separator of several codes in one multi-select cell.
MULTI_SEPARATOR = ";"


@dataclass(frozen=True, slots=True)
class Category:
    """One category of a nominal or ordinal variable."""

    code: Code
    label: str
    description: str | None = None
    examples: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class MissingCode:
    """A code meaning "cannot be coded from the text" (a labelled missing value)."""

    code: Code
    label: str = "cannot be coded"


@dataclass(frozen=True, slots=True)
class Condition:
    """Skip logic: the variable applies only when ``variable``'s value includes one of ``includes``.

    For a single-choice condition variable "includes" means "equals one of"; for a multi-select one
    it means "the set of chosen codes contains at least one of".
    """

    variable: str
    includes: tuple[Code, ...]


@dataclass(frozen=True, slots=True)
class Thresholds:
    """Smallest acceptable alpha values (conventions of the field, Krippendorff 2004), and the
    smallest acceptable agreement of a trainee with the answer key (``training``; ``None``: the
    reliable threshold, a convention of ours)."""

    reliable: float = 0.800
    tentative: float = 0.667
    training: float | None = None

    @property
    def training_threshold(self) -> float:
        """The trainee's pass mark: ``training`` when set, else ``reliable``."""
        return self.reliable if self.training is None else self.training


@dataclass(frozen=True, slots=True)
class Variable:
    """One coded variable (a column of the coding sheet)."""

    name: str
    level: Level
    label: str | None = None
    categories: tuple[Category, ...] = ()
    missing: tuple[MissingCode, ...] = ()
    range: tuple[float, float] | None = None
    integer: bool = False
    multiple: bool = False
    applies_when: Condition | None = None
    instructions: str | None = None
    thresholds: Thresholds | None = None
    #: The variable's name in the codebook's earlier version (for ``codebook diff``).
    renamed_from: str | None = None
    #: multi-select only: the code a coder gives for "none of these categories" - an explicit,
    #: coded empty set (it counts as the empty set in the Jaccard distance), not a missing code
    none: Category | None = None

    @property
    def none_code(self) -> Code | None:
        """The code of the explicit empty set, ``None`` when the codebook gives none."""
        return self.none.code if self.none is not None else None

    @property
    def is_categorical(self) -> bool:
        return self.level in CATEGORICAL_LEVELS

    @property
    def is_numeric(self) -> bool:
        return self.level in NUMERIC_LEVELS

    @property
    def codes(self) -> tuple[Code, ...]:
        """The category codes in codebook order (the full scale, used or not)."""
        return tuple(c.code for c in self.categories)

    @property
    def missing_codes(self) -> tuple[Code, ...]:
        return tuple(m.code for m in self.missing)

    def category(self, code: Code) -> Category | None:
        for c in self.categories:
            if c.code == code:
                return c
        return None

    def label_of(self, code: Code) -> str | None:
        """Label of a category or missing code, ``None`` when the code is unknown."""
        cat = self.category(code)
        if cat is not None:
            return cat.label
        for m in self.missing:
            if m.code == code:
                return m.label
        if self.none is not None and self.none.code == code:
            return self.none.label
        return None

    def display(self, code: Code) -> str:
        """``code = label`` as shown in dropdowns and adjudication sheets."""
        label = self.label_of(code)
        return f"{code} = {label}" if label is not None else str(code)

    @property
    def title(self) -> str:
        return self.label or self.name


@dataclass(frozen=True, slots=True)
class Recode:
    """How values coded under an earlier version of the codebook map onto this version's codes.

    ``maps`` holds, per variable (this version's name), pairs ``(old code, new code)``; codes
    not listed keep their value. Sheets made from ``from_version`` are recoded when read.
    """

    from_version: str
    maps: tuple[tuple[str, tuple[tuple[Code, Code], ...]], ...]

    def map_for(self, variable: str) -> dict[Code, Code]:
        for name, pairs in self.maps:
            if name == variable:
                return dict(pairs)
        return {}


@dataclass(frozen=True)  # no slots: __post_init__ stores a name index beside the fields
class Codebook:
    """The single source of truth for what is coded and how."""

    title: str
    variables: tuple[Variable, ...]
    version: str = "1.0"
    unit: str = "unit"
    description: str | None = None
    text_columns: tuple[str, ...] = ()
    thresholds: Thresholds = field(default_factory=Thresholds)
    source: str | None = None
    #: Recode blocks, one per earlier version sheets may have been made from.
    recode: tuple[Recode, ...] = ()

    def __post_init__(self) -> None:
        object.__setattr__(self, "_by_name", {v.name: v for v in self.variables})

    def variable(self, name: str) -> Variable:
        try:
            return self._by_name[name]  # type: ignore[attr-defined]
        except KeyError:
            raise KeyError(f"the codebook has no variable named {name!r}") from None

    def __contains__(self, name: object) -> bool:
        return name in self._by_name  # type: ignore[attr-defined]

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(v.name for v in self.variables)

    def recode_from(self, version: str) -> Recode | None:
        """The recode block for sheets made from ``version`` (``None`` when there is none)."""
        for r in self.recode:
            if r.from_version == version:
                return r
        return None

    def thresholds_for(self, name: str) -> Thresholds:
        own = self.variable(name).thresholds
        return own if own is not None else self.thresholds
