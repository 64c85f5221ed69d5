"""Exchange the codebook as a Frictionless Table Schema (v2) and write it back as YAML.

A coding sheet is a table, so its codebook maps onto the open Table Schema standard
(Frictionless Data, "Table Schema", v2.0, 2024, https://datapackage.org/standard/table-schema/):
one field per column, ``categories`` with ``value`` and ``label``, ``categoriesOrdered`` for
ordinal scales, labelled ``missingValues``, ``constraints`` and the ``primaryKey``. What the
standard does not cover is kept under properties prefixed ``coderel:`` (level of measurement,
``applies_when``, instructions, examples, thresholds, the ``none`` code of a multi-select), so
that the round trip YAML -> Table Schema -> codebook gives back the same
:class:`~coderel.codebook.model.Codebook`.
``docs/codebook.md`` has the full mapping table.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path
from typing import Any

import yaml

from coderel.codebook.build import codebook_from_data
from coderel.codebook.model import MULTI_SEPARATOR, Code, Codebook, Thresholds, Variable
from coderel.errors import CodebookError
from coderel.io.atomic import write_text
from coderel.problems import Problems

__all__ = [
    "TABLE_SCHEMA_PROFILE",
    "dump_codebook",
    "from_table_schema",
    "table_schema_problems",
    "to_table_schema",
    "write_codebook_yaml",
    "write_table_schema",
]

#: The ``$schema`` written into every Table Schema.
TABLE_SCHEMA_PROFILE = "https://datapackage.org/profiles/2.0/tableschema.json"
EXT = "coderel:"
_INT_LITERAL = re.compile(r"-?(0|[1-9][0-9]*)")
_BLANK = {"value": "", "label": "blank"}


def _num(value: float) -> int | float:
    """Write whole floats as integers (``60`` rather than ``60.0``)."""
    return int(value) if float(value).is_integer() else value


def _code_type(codes: tuple[Code, ...]) -> str:
    return "integer" if codes and all(isinstance(c, int) for c in codes) else "string"


def _field_type(var: Variable) -> str:
    if var.is_numeric:
        return "integer" if var.integer else "number"
    if var.multiple:
        return "list"
    return _code_type(var.codes)


def _decode_missing(text: str, numeric_codes: bool) -> Code:
    """A Table Schema missing value (always text) back to a code."""
    if numeric_codes and _INT_LITERAL.fullmatch(text):
        return int(text)
    return text


def _thresholds_dict(t: Thresholds) -> dict[str, float]:
    return {"reliable": t.reliable, "tentative": t.tentative}


# ---- codebook -> Table Schema ---------------------------------------------------------------
def _variable_field(var: Variable) -> dict[str, Any]:
    ftype = _field_type(var)
    field: dict[str, Any] = {"name": var.name}
    if var.label is not None:
        field["title"] = var.label
    field["type"] = ftype
    if var.multiple:
        field["delimiter"] = MULTI_SEPARATOR
        field["itemType"] = _code_type(var.codes)
    if var.categories:
        cats = []
        for c in var.categories:
            item: dict[str, Any] = {"value": c.code, "label": c.label}
            if c.description is not None:
                item[EXT + "description"] = c.description
            if c.examples:
                item[EXT + "examples"] = list(c.examples)
            cats.append(item)
        field["categories"] = cats
        if var.level == "ordinal":
            field["categoriesOrdered"] = True
    if var.none is not None:
        # the coded empty set of a multi-select: not a category (a list never holds it with
        # others) and not a missing value (it is a coded answer), so an extension of our own
        field[EXT + "none"] = {"value": var.none.code, "label": var.none.label}
    if var.missing:
        field["missingValues"] = [dict(_BLANK)] + [
            {"value": str(m.code), "label": m.label} for m in var.missing
        ]
        numeric_codes = var.is_numeric or _code_type(var.codes) == "integer"
        decoded = [_decode_missing(str(m.code), numeric_codes) for m in var.missing]
        if decoded != list(var.missing_codes) or any(
            type(a) is not type(b) for a, b in zip(decoded, var.missing_codes, strict=True)
        ):
            field[EXT + "missingCodes"] = list(var.missing_codes)
    constraints: dict[str, Any] = {}
    if var.range is not None:
        constraints["minimum"] = _num(var.range[0])
        constraints["maximum"] = _num(var.range[1])
    if var.categories and not var.multiple:
        constraints["enum"] = list(var.codes)
    if constraints:
        field["constraints"] = constraints
    field[EXT + "level"] = var.level
    if var.applies_when is not None:
        field[EXT + "appliesWhen"] = {
            "variable": var.applies_when.variable,
            "includes": list(var.applies_when.includes),
        }
    if var.instructions is not None:
        field[EXT + "instructions"] = var.instructions
    if var.thresholds is not None:
        field[EXT + "thresholds"] = _thresholds_dict(var.thresholds)
    return field


def to_table_schema(cb: Codebook) -> dict[str, Any]:
    """The codebook as a Frictionless Table Schema v2 descriptor (a JSON-ready dict).

    Fields come in coding-sheet order: the unit column (the primary key), the text columns
    (strings, carried along and not coded), then every variable.
    """
    fields: list[dict[str, Any]] = [
        {
            "name": cb.unit,
            "type": "string",
            "constraints": {"required": True, "unique": True},
            EXT + "role": "unit",
        }
    ]
    fields += [{"name": col, "type": "string", EXT + "role": "text"} for col in cb.text_columns]
    fields += [_variable_field(v) for v in cb.variables]
    schema: dict[str, Any] = {
        "$schema": TABLE_SCHEMA_PROFILE,
        EXT + "title": cb.title,
        EXT + "version": cb.version,
    }
    if cb.description is not None:
        schema[EXT + "description"] = cb.description
    schema["fields"] = fields
    schema["primaryKey"] = [cb.unit]
    schema["missingValues"] = [""]
    schema[EXT + "thresholds"] = _thresholds_dict(cb.thresholds)
    return schema


# ---- Table Schema -> codebook ---------------------------------------------------------------
def _category_from(item: Any) -> Any:
    if not isinstance(item, dict):
        return {"code": item, "label": str(item)}  # bare values: the value is its own label
    value = item.get("value")
    out: dict[str, Any] = {"code": value, "label": item.get("label", str(value))}
    if (EXT + "description") in item:
        out["description"] = item[EXT + "description"]
    if (EXT + "examples") in item:
        out["examples"] = item[EXT + "examples"]
    return out


def _missing_from(field: dict[str, Any], numeric_codes: bool) -> list[Any]:
    typed = field.get(EXT + "missingCodes")
    out: list[Any] = []
    entries = [m for m in field.get("missingValues") or [] if m not in ("", _BLANK)]
    entries = [m for m in entries if not (isinstance(m, dict) and m.get("value") == "")]
    for i, m in enumerate(entries):
        value = m.get("value") if isinstance(m, dict) else m
        if isinstance(typed, list) and i < len(typed):
            code = typed[i]
        elif isinstance(value, str):
            code = _decode_missing(value, numeric_codes)
        else:
            code = value
        if isinstance(m, dict) and "label" in m:
            out.append({"code": code, "label": m["label"]})
        else:
            out.append(code)
    return out


def _variable_from(field: dict[str, Any]) -> dict[str, Any]:
    ftype = field.get("type", "string")
    cats = field.get("categories")
    level = field.get(EXT + "level")
    if level is None:  # a schema written elsewhere: infer what can be inferred
        if cats:
            level = "ordinal" if field.get("categoriesOrdered") else "nominal"
        else:
            level = "interval"
    item_type = field.get("itemType", "string") if ftype == "list" else ftype
    numeric_codes = level in ("interval", "ratio") or item_type == "integer"
    var: dict[str, Any] = {"name": field.get("name")}
    if "title" in field:
        var["label"] = field["title"]
    var["level"] = level
    if EXT + "instructions" in field:
        var["instructions"] = field[EXT + "instructions"]
    if cats is not None:
        var["categories"] = [_category_from(c) for c in cats] if isinstance(cats, list) else cats
    missing = _missing_from(field, numeric_codes)
    if missing:
        var["missing"] = missing
    none = field.get(EXT + "none")
    if isinstance(none, dict):
        var["none"] = {"code": none.get("value"), "label": none.get("label")}
    elif none is not None:
        var["none"] = none  # not a block: the codebook checks say what is wrong with it
    constraints = field.get("constraints") or {}
    if "minimum" in constraints and "maximum" in constraints:
        var["range"] = [constraints["minimum"], constraints["maximum"]]
    if ftype == "integer" and level in ("interval", "ratio"):
        var["integer"] = True
    if ftype == "list":
        var["multiple"] = True
    if EXT + "appliesWhen" in field:
        var["applies_when"] = field[EXT + "appliesWhen"]
    if EXT + "thresholds" in field:
        var["thresholds"] = field[EXT + "thresholds"]
    return var


def table_schema_problems(
    schema: Any, *, source: str | None = None, file: str | None = None
) -> tuple[Codebook | None, Problems]:
    """Convert a Table Schema descriptor and check it with the same checks as a YAML codebook."""
    problems = Problems()
    if not isinstance(schema, dict) or not isinstance(schema.get("fields"), list):
        problems.add(
            "codebook-field",
            "a Table Schema needs an object with a list of fields",
            hint='expected {"fields": [{"name": ...}, ...]}',
            file=file,
        )
        return None, problems
    fields = schema["fields"]
    pk = schema.get("primaryKey")
    pk_first = pk[0] if isinstance(pk, list) and pk else pk if isinstance(pk, str) else None
    unit = next(
        (f.get("name") for f in fields if isinstance(f, dict) and f.get(EXT + "role") == "unit"),
        pk_first,
    )
    text_columns: list[Any] = []
    variables: list[Any] = []
    for f in fields:
        if not isinstance(f, dict):
            problems.add(
                "codebook-field", "a field of the Table Schema is not an object", file=file
            )
            continue
        role = f.get(EXT + "role")
        if role == "unit" or (unit is not None and f.get("name") == unit):
            continue
        is_plain_text = (
            f.get("type", "string") == "string"
            and not f.get("categories")
            and EXT + "level" not in f
        )
        if role == "text" or is_plain_text:
            text_columns.append(f.get("name"))
            continue
        variables.append(_variable_from(f))
    data: dict[str, Any] = {
        "title": schema.get(EXT + "title", schema.get("title", Path(file or "codebook").stem)),
    }
    for key, ours in (("version", "version"), ("description", "description")):
        if EXT + key in schema:
            data[ours] = schema[EXT + key]
        elif key == "description" and "description" in schema:
            data[ours] = schema["description"]
    if unit is not None:
        data["unit"] = unit
    if text_columns:
        data["text_columns"] = text_columns
    if EXT + "thresholds" in schema:
        data["thresholds"] = schema[EXT + "thresholds"]
    data["variables"] = variables
    codebook, more = codebook_from_data(data, file=file, source=source)
    problems.extend(more)
    return (None if problems.errors else codebook), problems


def from_table_schema(schema: dict[str, Any], source: str | None = None) -> Codebook:
    """Build a codebook from a Table Schema descriptor; raise :class:`CodebookError` if broken."""
    codebook, problems = table_schema_problems(schema, source=source)
    if codebook is None:
        raise CodebookError(
            f"the Table Schema has {len(problems.errors)} error(s) as a codebook",
            problems=problems,
        )
    return codebook


def write_table_schema(cb: Codebook, path: str | os.PathLike[str]) -> Path:
    """Write the codebook as a Table Schema JSON file (atomically); return the path."""
    text = json.dumps(to_table_schema(cb), indent=2, ensure_ascii=False) + "\n"
    write_text(path, text)
    return Path(path)


# ---- codebook -> YAML -----------------------------------------------------------------------
def _variable_yaml(var: Variable) -> dict[str, Any]:
    out: dict[str, Any] = {"name": var.name}
    if var.label is not None:
        out["label"] = var.label
    out["level"] = var.level
    if var.instructions is not None:
        out["instructions"] = var.instructions
    if var.multiple:
        out["multiple"] = True
    if var.applies_when is not None:
        out["applies_when"] = {
            "variable": var.applies_when.variable,
            "includes": list(var.applies_when.includes),
        }
    if var.range is not None:
        out["range"] = [_num(var.range[0]), _num(var.range[1])]
    if var.integer:
        out["integer"] = True
    if var.categories:
        cats = []
        for c in var.categories:
            item: dict[str, Any] = {"code": c.code, "label": c.label}
            if c.description is not None:
                item["description"] = c.description
            if c.examples:
                item["examples"] = list(c.examples)
            cats.append(item)
        out["categories"] = cats
    if var.none is not None:
        out["none"] = {"code": var.none.code, "label": var.none.label}
    if var.missing:
        default_label = "cannot be coded"
        out["missing"] = [
            m.code if m.label == default_label else {"code": m.code, "label": m.label}
            for m in var.missing
        ]
    if var.thresholds is not None:
        out["thresholds"] = _thresholds_dict(var.thresholds)
    return out


def dump_codebook(cb: Codebook) -> str:
    """The codebook as YAML text in coderel's format (loads back to an equal codebook)."""
    data: dict[str, Any] = {"title": cb.title, "version": cb.version, "unit": cb.unit}
    if cb.description is not None:
        data["description"] = cb.description
    if cb.text_columns:
        data["text_columns"] = list(cb.text_columns)
    if cb.thresholds != Thresholds():
        data["thresholds"] = _thresholds_dict(cb.thresholds)
    data["variables"] = [_variable_yaml(v) for v in cb.variables]
    body = yaml.safe_dump(
        data, sort_keys=False, allow_unicode=True, width=100, default_flow_style=None
    )
    return "# coderel codebook; the format is described in docs/codebook.md\n" + body


def write_codebook_yaml(cb: Codebook, path: str | os.PathLike[str]) -> Path:
    """Write the codebook as YAML (atomically); return the path."""
    write_text(path, dump_codebook(cb))
    return Path(path)
