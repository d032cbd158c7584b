"""The JSON Schema: valid as a schema (jsonschema's meta-schema check) and equal to its copy in the docs."""

from __future__ import annotations

import json
from pathlib import Path

from trimtab.report import CAUTION, COMPARISON_SCHEMA, JSON_SCHEMA


def test_schema_is_a_valid_draft_2020_12_schema() -> None:
    import jsonschema  # reference implementation of JSON Schema

    jsonschema.Draft202012Validator.check_schema(JSON_SCHEMA)
    jsonschema.Draft202012Validator.check_schema(COMPARISON_SCHEMA)


def test_documented_schema_equals_the_package_schema() -> None:
    # docs/outputs.md is the schema's documentation for downstream systems: its copy must not drift.
    text = (Path(__file__).resolve().parents[2] / "docs" / "outputs.md").read_text(encoding="utf-8")
    block = text.split("```json\n", 1)[1].split("\n```", 1)[0]
    assert json.loads(block) == JSON_SCHEMA
    comparison = text.split("### Comparison document", 1)[1].split("```json\n", 1)[1].split("\n```", 1)[0]
    assert json.loads(comparison) == COMPARISON_SCHEMA
    assert CAUTION in text
