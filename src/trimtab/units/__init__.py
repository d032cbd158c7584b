"""Unit sense for every reader: returns, alpha, weights and shock moves are fractions (docs/scenarios.md, "Units").

A leaf package (numpy, pandas and :mod:`trimtab.errors` only), so the estimators, the optimizer,
the stress tests, the file readers and the explore page all apply the same rules.
"""

from trimtab.units._rules import (
    ALPHA_SPREAD_LIMIT,
    MAX_GROSS,
    MOVE_LIMIT,
    NET_TOL,
    RETURN_SIZE_LIMIT,
    UNITS,
    check_alpha,
    check_book,
    check_returns,
    move_problem,
    periods_per_year_of,
    typical_annual_size,
    unit_scale,
)

__all__ = [
    "ALPHA_SPREAD_LIMIT",
    "MAX_GROSS",
    "MOVE_LIMIT",
    "NET_TOL",
    "RETURN_SIZE_LIMIT",
    "UNITS",
    "check_alpha",
    "check_book",
    "check_returns",
    "move_problem",
    "periods_per_year_of",
    "typical_annual_size",
    "unit_scale",
]
