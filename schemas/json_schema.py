"""The one marshmallow → JSON Schema (draft 2020-12) converter of the project.

It serves both the exported files (``schemas.export``, references into ``#/$defs/``) and the
service's OpenAPI document (references into ``#/components/schemas/``): the place nested
schemas go is the only difference, given as ``ref_template``.

Custom fields describe themselves with a ``json_schema()`` method; validators map as Length →
min/max length or items, Range → minimum, OneOf → enum (const for one choice), Regexp →
pattern; a plain validator function may carry a ``json_schema`` dict attribute. A schema class
may add keywords in a ``json_schema_extra`` dict. A field whose value another part of the code
validates may name the schema that documents it in ``metadata["documented_as"]``. A
``default`` in a field's metadata is given as JSON Schema ``default`` when it is a scalar; an
object or list default is said in the description instead, since client generators cannot
hold an object-valued default.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from marshmallow import INCLUDE, RAISE, Schema, fields, validate

from schemas.case import ByKind, WholeMatch, portable_end

DEFS_REF = "#/$defs/{name}"

_NULL = {"type": "null"}


def first_paragraph(text: str | None) -> str | None:
    """The first paragraph of a docstring on one line (a schema's description)."""
    if not text:
        return None
    return " ".join(text.strip().split("\n\n")[0].split())


def class_name(cls: type[Schema]) -> str:
    """The name a nested schema gets: its class name."""
    return cls.__name__


def _nested_schema(field: fields.Nested) -> type[Schema] | Schema:
    """The schema a ``Nested`` field holds: a class or an instance (the project names no nested
    schema by string or callable)."""
    nested = field.nested
    if isinstance(nested, Schema) or (isinstance(nested, type) and issubclass(nested, Schema)):
        return nested
    raise TypeError(f"{field.name}: expected a Nested field of a Schema class or instance, "
                    f"got {nested!r}")


class JsonSchemaConverter:
    """Converts marshmallow schemas; collects the nested ones into ``defs``.

    ``ref_template`` places a nested schema (``{name}`` is filled from ``name_of``); two
    different classes that get the same name are an error, never a silent overwrite.
    """

    def __init__(self, ref_template: str = DEFS_REF,
                 name_of: Callable[[type[Schema]], str] = class_name) -> None:
        self.ref_template = ref_template
        self.name_of = name_of
        self.defs: dict[str, dict] = {}
        self._classes: dict[str, type[Schema]] = {}

    def ref(self, schema: type[Schema] | Schema) -> dict:
        cls = schema if isinstance(schema, type) else type(schema)
        name = self.name_of(cls)
        known = self._classes.get(name)
        if known is None:
            self._classes[name] = cls
            self.defs[name] = {}  # placeholder against recursion
            self.defs[name] = self.schema(cls)
        elif known is not cls:
            raise ValueError(f"two schemas named {name!r}: {known.__module__}.{known.__name__} "
                             f"and {cls.__module__}.{cls.__name__}")
        return {"$ref": self.ref_template.format(name=name)}

    def schema(self, cls: type[Schema]) -> dict:
        instance = cls()
        properties: dict[str, dict] = {}
        required: list[str] = []
        for name, field in instance.fields.items():
            key = field.data_key or name
            properties[key] = self.field(field)
            if field.required:
                required.append(key)
        out: dict[str, Any] = {"type": "object"}
        description = first_paragraph(cls.__doc__)
        if description:
            out["description"] = description
        out["properties"] = properties
        if required:
            out["required"] = required
        unknown = instance.unknown
        out["additionalProperties"] = unknown == INCLUDE if unknown in (INCLUDE, RAISE) else True
        out.update(getattr(cls, "json_schema_extra", {}))
        return out

    def field(self, field: fields.Field) -> dict:
        if "documented_as" in field.metadata:
            out = self.ref(field.metadata["documented_as"])
        elif hasattr(field, "json_schema"):
            out = dict(field.json_schema())
        elif isinstance(field, ByKind):
            out = {"oneOf": [self.ref(cls) for cls in field.choices.values()]}
        elif isinstance(field, fields.Nested):
            out = self.ref(_nested_schema(field))
        elif isinstance(field, fields.List):
            out = {"type": "array", "items": self.field(field.inner)}
        elif isinstance(field, fields.Dict):
            out = {"type": "object"}
            if field.value_field is not None:
                out["additionalProperties"] = self.field(field.value_field)
        elif isinstance(field, fields.String):
            out = {"type": "string"}
        elif isinstance(field, fields.Integer):
            out = {"type": "integer"}
        elif isinstance(field, fields.Number):
            out = {"type": "number"}
        elif isinstance(field, fields.Boolean):
            out = {"type": "boolean"}
        else:
            out = {}
        for validator in field.validators:
            out.update(self.validator(validator, out))
        about = field.metadata.get("description")
        if about:
            out["description"] = f"{about}: {out['description']}" if "description" in out else about
        if "default" in field.metadata:
            default = field.metadata["default"]
            if isinstance(default, dict | list):
                said = f"absent: {json.dumps(default)}"
                out["description"] = f"{out['description']}; {said}" if "description" in out \
                    else said
            else:
                out["default"] = default
        if field.allow_none:
            out = self.nullable(out)
        return out

    @staticmethod
    def nullable(out: dict) -> dict:
        kind = out.get("type")
        if isinstance(kind, str) and "enum" not in out and "const" not in out:
            return {**out, "type": [kind, "null"]}
        if isinstance(kind, list):
            return out if "null" in kind else {**out, "type": [*kind, "null"]}
        return {"anyOf": [out, _NULL]}

    @staticmethod
    def validator(validator: Callable, current: dict) -> dict:
        kind = current.get("type")
        if isinstance(validator, validate.Length):
            low, high = ("minItems", "maxItems") if kind == "array" else ("minLength", "maxLength")
            out = {}
            if validator.equal is not None:
                out[low] = out[high] = validator.equal
            if validator.min is not None:
                out[low] = validator.min
            if validator.max is not None:
                out[high] = validator.max
            return out
        if isinstance(validator, validate.Range):
            out = {}
            if validator.min is not None:
                out["minimum" if validator.min_inclusive else "exclusiveMinimum"] = validator.min
            if validator.max is not None:
                out["maximum" if validator.max_inclusive else "exclusiveMaximum"] = validator.max
            return out
        if isinstance(validator, validate.OneOf):
            choices = list(validator.choices)
            return {"const": choices[0]} if len(choices) == 1 else {"enum": choices}
        if isinstance(validator, WholeMatch):
            return {"pattern": portable_end(validator.pattern_text)}
        if isinstance(validator, validate.Regexp):
            return {"pattern": validator.regex.pattern}
        return dict(getattr(validator, "json_schema", {}))


__all__ = ["DEFS_REF", "JsonSchemaConverter", "class_name", "first_paragraph"]
