"""Risk attribution from the factored covariance (Euler contributions by factor, group and asset, ex
ante) and return attribution of realised returns by factor, linked over periods (ex post).

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
from trimtab.attribution._linking import LINKINGS, link
from trimtab.attribution._returns import attribute_backtest_returns, attribute_returns
from trimtab.attribution._returns_result import ReturnAttribution, ReturnAttributionSummary
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
    "LINKINGS",
    "ReturnAttribution",
    "ReturnAttributionSummary",
    "attribute_backtest_returns",
    "attribute_returns",
    "link",
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
