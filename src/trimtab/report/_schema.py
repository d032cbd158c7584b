"""The JSON Schema (draft 2020-12) of the document :func:`trimtab.report.write_json` writes.

docs/outputs.md describes each field in words; this is the machine-checkable form of the same layout.
"""

from __future__ import annotations

from typing import Any

from trimtab.attribution._desk_figures import WARNING_KINDS
from trimtab.attribution import HEADLINE_FIGURES


_NUMBER = {"type": ["number", "null"]}


def _rows(*required: str, nullable: bool = False) -> dict[str, Any]:
    return {
        "type": ["array", "null"] if nullable else "array",
        "items": {"type": "object", "required": list(required)},
    }


_ATTRIBUTION = {
    "type": ["object", "null"],
    "required": [
        "kind", "periods_per_year", "is_zero_risk", "figures", "by_factor", "by_factor_group", "by_asset", "by_attribute",
    ],
    "properties": {
        "kind": {"enum": ["total", "active"]},
        "periods_per_year": {"type": "number", "exclusiveMinimum": 0},
        "is_zero_risk": {"type": "boolean"},
        "figures": {
            "type": "object",
            "required": list(HEADLINE_FIGURES),
            "additionalProperties": _NUMBER,
        },
        "by_factor": _rows(
            "factor", "group", "portfolio_exposure", "benchmark_exposure", "active_exposure",
            "factor_volatility", "marginal_contribution", "contribution", "percent",
        ),
        "by_factor_group": _rows("group", "n_factors", "contribution", "percent"),
        "by_asset": _rows(
            "asset", "weight", "marginal_contribution", "contribution", "percent",
            "factor_contribution", "specific_contribution",
        ),
        "by_attribute": {
            "type": "object",
            "additionalProperties": _rows("group", "n_assets", "contribution", "percent"),
        },
    },
}

#: JSON Schema of the report document, ``schema_version`` "1.2".
JSON_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "trimtab report document",
    "type": "object",
    "required": [
        "schema_version", "document", "kind", "generated_by", "created_utc", "cautions", "run",
        "risk_budget", "relaxation", "headline", "figures", "warnings", "context", "attribution", "trades",
        "trades_unit", "rounding", "target_book", "trade_summary", "constraints", "objective", "verification", "limits",
        "provenance", "scenario",
    ],
    "properties": {
        "schema_version": {"const": "1.2"},
        "document": {"const": "trimtab.report"},
        "kind": {"enum": ["rebalance", "attribution", "infeasible", "solver_failure"]},
        "generated_by": {
            "type": "object",
            "required": ["package", "version"],
            "properties": {"package": {"const": "trimtab"}, "version": {"type": "string"}},
        },
        "created_utc": {"type": "string", "pattern": "^[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}Z$"},
        "cautions": {"type": "array", "minItems": 1, "items": {"type": "string"}},
        "run": {"type": ["object", "null"]},
        "risk_budget": {
            "type": ["object", "null"],
            "required": ["name", "cap", "pre", "post", "used"],
            "properties": {
                "name": {"type": "string"},
                "cap": {"type": "number", "exclusiveMinimum": 0},
                "pre": _NUMBER,
                "post": {"type": "number"},
                "used": {"type": "number"},
            },
        },
        "relaxation": _rows(
            "option", "constraint", "kind", "side", "limit", "needed", "relax_by", "unit", nullable=True
        ),
        "conflict": {"type": "array", "items": {"type": "string"}},
        "headline": _rows("figure", "label", "unit", "post"),
        "attribution": {
            "type": "object",
            "required": ["pre_trade", "post_trade"],
            "properties": {"pre_trade": _ATTRIBUTION, "post_trade": _ATTRIBUTION},
        },
        "figures": _rows("figure", "label", "unit", "pre", "post", "change", nullable=True),
        "warnings": {
            "type": "array",
            "items": {
                "type": "object",
                "required": ["kind", "message", "details"],
                "properties": {
                    "kind": {"enum": list(WARNING_KINDS)},  # trimtab.attribution._desk_figures.WARNING_KINDS
                    "message": {"type": "string"},
                    "details": {"type": "object"},
                },
            },
        },
        "context": {"type": "object"},
        "trades": _rows("asset", "side", "weight_change", nullable=True),
        "trades_unit": {"enum": ["shares", "weights", None]},
        "rounding": {
            "type": ["object", "null"],
            "required": ["nav", "cash_before", "cash_optimal", "cash_after", "largest_changes"],
        },
        "target_book": _rows("asset", "trade", nullable=True),
        "limits": _rows("limit", "kind", "value", "lower", "upper", "slack", "ok", nullable=True),
        "trade_summary": _rows("label", "unit", "value", nullable=True),
        "constraints": _rows("name", nullable=True),
        "objective": {"type": ["object", "null"], "additionalProperties": _NUMBER},
        "verification": _rows(nullable=True),
        "provenance": {"type": "object"},
        "scenario": {"type": "object"},
        "stress": _rows("shock", "pre_book", "post_book", nullable=True),
    },
}

#: JSON Schema of the comparison document (a mapping given to ``write_json``), ``schema_version`` "1.2".
COMPARISON_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "trimtab comparison document",
    "type": "object",
    "required": ["schema_version", "document", "generated_by", "created_utc", "cautions", "status", "comparison", "warnings",
                 "scenarios"],
    "properties": {
        "schema_version": {"const": "1.2"},
        "document": {"const": "trimtab.comparison"},
        "generated_by": JSON_SCHEMA["properties"]["generated_by"],
        "created_utc": JSON_SCHEMA["properties"]["created_utc"],
        "cautions": JSON_SCHEMA["properties"]["cautions"],
        "status": {"type": "object", "additionalProperties": {"enum": ["solved", "infeasible", "solver failure"]}},
        "comparison": _rows("figure"),
        "scenarios": {
            "type": "object",
            "additionalProperties": {"type": "object", "required": ["document", "kind", "run", "relaxation", "headline"]},
        },
    },
}
