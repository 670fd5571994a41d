"""JSON Schema (draft 2020-12) of the case and result documents, generated from marshmallow.

``python -m schemas.export`` writes ``schemas/json/case-v1.schema.json`` and
``schemas/json/result-v1.schema.json``; ``python -m schemas.export --check`` exits 1 when either
file differs from what the schemas generate now.

The converter below walks marshmallow fields. Custom fields describe themselves with a
``json_schema()`` method; validators map as Length → min/max length or items, Range → minimum,
OneOf → enum (const for one choice), Regexp → pattern; a plain validator function may carry a
``json_schema`` dict attribute. Nested schemas go into ``$defs`` under their class name.

The JSON Schema is the structural half of validation: units, dimensions, signs of dimensional
values and the cross-field rules are checked by ``schemas.validate_case`` only.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any, cast

from marshmallow import INCLUDE, RAISE, Schema, fields, validate

from schemas.case import ByKind, CaseSchema, WholeMatch, portable_end
from schemas.result import ResultSchema

DIALECT = "https://json-schema.org/draft/2020-12/schema"
JSON_DIR = Path(__file__).with_name("json")
CASE_SCHEMA_ID = "urn:fluxproof:schema:case-v1"
RESULT_SCHEMA_ID = "urn:fluxproof:schema:result-v1"

_NULL = {"type": "null"}


def _first_paragraph(text: str | None) -> str | None:
    if not text:
        return None
    return " ".join(text.strip().split("\n\n")[0].split())


class _Converter:
    """Converts one root schema; collects the nested ones into ``defs``."""

    def __init__(self) -> None:
        self.defs: dict[str, dict] = {}

    def ref(self, schema: type[Schema] | Schema) -> dict:
        cls = schema if isinstance(schema, type) else type(schema)
        name = cls.__name__
        if name not in self.defs:
            self.defs[name] = {}  # placeholder against recursion
            self.defs[name] = self.schema(cls)
        return {"$ref": f"#/$defs/{name}"}

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
        description = _first_paragraph(cls.__doc__)
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
        if hasattr(field, "json_schema"):
            out = dict(field.json_schema())
        elif isinstance(field, ByKind):
            out = {"oneOf": [self.ref(cls) for cls in field.choices.values()]}
        elif isinstance(field, fields.Nested):
            out = self.ref(cast(type[Schema], field.nested))  # the case nests schema classes
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
            out["default"] = field.metadata["default"]
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
            return {"pattern": portable_end(cast(str, validator.regex.pattern))}
        if isinstance(validator, validate.Regexp):
            return {"pattern": validator.regex.pattern}
        return dict(getattr(validator, "json_schema", {}))


def _document(root: type[Schema], schema_id: str, title: str, description: str) -> dict:
    converter = _Converter()
    body = converter.schema(root)
    converter.defs.pop(root.__name__, None)
    document = {
        "$schema": DIALECT,
        "$id": schema_id,
        "title": title,
        "description": description,
        **{k: v for k, v in body.items() if k != "description"},
    }
    if converter.defs:
        document["$defs"] = dict(sorted(converter.defs.items()))
    return document


def case_json_schema() -> dict:
    """JSON Schema (2020-12) of the case document, schema version 1."""
    return _document(
        CaseSchema,
        CASE_SCHEMA_ID,
        "fluxproof case document, schema version 1",
        "A diffusion-reaction transport case: geometry, layers, boundary conditions, regime. "
        "Dimensional values are \"<number> <unit>\" strings or {\"value\", \"unit\"} objects. "
        "This schema checks structure; units, dimensions, signs and cross-field rules are "
        "checked by the service's validation (POST /v1/validate).",
    )


def result_json_schema() -> dict:
    """JSON Schema (2020-12) of the result document (check record)."""
    return _document(
        ResultSchema,
        RESULT_SCHEMA_ID,
        "fluxproof result document (check record)",
        "Figures in SI, every check with its value, limit and outcome, warnings and provenance "
        "of one run of one case. Results support, and do not replace, design verification "
        "testing and qualified review.",
    )


def rendered() -> dict[Path, str]:
    """The text of each schema file, as it should be on disk."""
    def text(doc: dict) -> str:
        return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"

    return {
        JSON_DIR / "case-v1.schema.json": text(case_json_schema()),
        JSON_DIR / "result-v1.schema.json": text(result_json_schema()),
    }


def stale_files() -> list[Path]:
    """Schema files that are missing or differ from what the generator gives now."""
    return [
        path
        for path, text in rendered().items()
        if not path.exists() or path.read_text(encoding="utf-8") != text
    ]


def write_files() -> list[Path]:
    """Write every schema file (through a temporary file, so none is left half-written)."""
    JSON_DIR.mkdir(parents=True, exist_ok=True)
    written = []
    for path, text in rendered().items():
        temporary = path.with_suffix(path.suffix + ".tmp")
        temporary.write_text(text, encoding="utf-8")
        temporary.replace(path)
        written.append(path)
    return written


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m schemas.export", description="Write or check the JSON Schema files."
    )
    parser.add_argument(
        "--check", action="store_true", help="exit 1 if the files are out of date; write nothing"
    )
    args = parser.parse_args(argv)
    if args.check:
        stale = stale_files()
        for path in stale:
            print(f"out of date: {path} (run: python -m schemas.export)", file=sys.stderr)
        return 1 if stale else 0
    for path in write_files():
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
