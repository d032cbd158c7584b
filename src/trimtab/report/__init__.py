"""Reports on attributions and rebalances: terminal tables, CSV/Parquet/JSON files, one HTML page.

The writers only lay out figures computed in :mod:`trimtab.attribution` and by the rebalance; they read
results duck-typed, so any object with the agreed ``RebalanceResult`` fields works. Every file is
written under a temporary name and renamed. The caution text is :data:`CAUTION`.
"""

from trimtab.report._content import CAUTION, REALISED_CAUTION, ReportContent, RiskBudget, gather
from trimtab.report._files import (
    SCHEMA_VERSION,
    TABLE_FORMATS,
    comparison_table,
    report_document,
    report_tables,
    write_json,
    write_tables,
)
from trimtab.report._schema import COMPARISON_SCHEMA, JSON_SCHEMA
from trimtab.report._html import render_html, write_html
from trimtab.report._relaxation import Unsolved, conflict_sentence, display_relaxation, format_in_unit, relaxation_sentence
from trimtab.report._terminal import (
    print_attribution,
    print_comparison,
    print_rebalance,
    print_relaxation,
    print_warnings,
)

__all__ = [
    "CAUTION",
    "REALISED_CAUTION",
    "COMPARISON_SCHEMA",
    "JSON_SCHEMA",
    "SCHEMA_VERSION",
    "TABLE_FORMATS",
    "Unsolved",
    "ReportContent",
    "RiskBudget",
    "comparison_table",
    "conflict_sentence",
    "display_relaxation",
    "format_in_unit",
    "gather",
    "print_attribution",
    "print_comparison",
    "print_rebalance",
    "print_relaxation",
    "print_warnings",
    "relaxation_sentence",
    "render_html",
    "report_document",
    "report_tables",
    "write_html",
    "write_json",
    "write_tables",
]
