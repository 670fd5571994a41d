"""JSON Schema (draft 2020-12) of the case and result documents, generated from marshmallow.

``python -m schemas.export`` writes ``schemas/json/case-v1.schema.json`` and
``schemas/json/result-v1.schema.json``; ``python -m schemas.export --check`` exits 1 when either
file differs from what the schemas generate now.

The conversion is ``schemas.json_schema`` (the same converter the service's OpenAPI document
uses); nested schemas go into ``$defs`` under their class name.

The JSON Schema is the structural half of validation: units, dimensions, signs of dimensional
values and the cross-field rules are checked by ``schemas.validate_case`` only.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from marshmallow import Schema

from schemas.case import CaseSchema
from schemas.json_schema import JsonSchemaConverter
from schemas.result import ResultSchema

DIALECT = "https://json-schema.org/draft/2020-12/schema"
JSON_DIR = Path(__file__).with_name("json")
CASE_SCHEMA_ID = "urn:fluxproof:schema:case-v1"
RESULT_SCHEMA_ID = "urn:fluxproof:schema:result-v1"


def _document(root: type[Schema], schema_id: str, title: str, description: str) -> dict:
    converter = JsonSchemaConverter()
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
