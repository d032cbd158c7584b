"""Risk attribution from the factored covariance: Euler contributions by factor, group and asset.

Pure numerics (no I/O). See docs/attribution.md for every formula.
"""

from trimtab.attribution._compare import (
    as_attribution,
    compare,
    compare_many,
    contribution_changes,
    exposure_changes,
)
from trimtab.attribution._compute import attribute
from trimtab.attribution._result import (
    HEADLINE_FIGURES,
    TRADING_DAYS_PER_YEAR,
    AttributionSummary,
    RiskAttribution,
    figure_label,
    format_figure,
)

__all__ = [
    "HEADLINE_FIGURES",
    "TRADING_DAYS_PER_YEAR",
    "AttributionSummary",
    "RiskAttribution",
    "as_attribution",
    "attribute",
    "compare",
    "compare_many",
    "contribution_changes",
    "exposure_changes",
    "figure_label",
    "format_figure",
]
