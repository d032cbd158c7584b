"""Passive breaches: positions the market, not a trade, has carried outside their per-asset limits.

A held position can drift beyond its weight or active-weight cap between rebalances. When the
per-asset trading limits (liquidity, trade bounds, no-trade and no-buy/no-sell lists) cannot bring
it back inside in this rebalance, the problem as written has no solution, and a book that is then
held only drifts further. The rule applied here follows the common treatment of passive breaches
(e.g. the UCITS Directive 2009/65/EC, Art. 57(2): limits exceeded for reasons beyond the fund's
control are to be remedied as a priority objective of its sales): such a position must move toward
its limit *as far as the trading limits allow* in this rebalance, and never away from it. Its limit
for this rebalance is the nearest point the trading limits reach; every other limit is unchanged
and a position inside its limits is never affected. Each such move is listed in the result's notes.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from trimtab.construct.constraints._base import merge_boxes

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: Per-asset limits on the position (what the market can carry a book beyond).
POSITION_KEYS = ("weight", "active_weight")
#: Per-asset limits on the trade (what keeps a position from coming back in one rebalance).
TRADE_KEYS = ("liquidity", "trade", "no_trade", "no_buy", "no_sell")
#: A breach smaller than this (fraction of NAV) is solver noise, not a passive breach.
BREACH_TOL = 1e-9


def cure(problem: RebalanceProblem) -> list[str]:
    """Set the limit of each unreachable passive breach to the nearest reachable point; return the notes."""
    n = problem.data.n_assets
    w0 = problem.data.holdings
    trade_rows = [r for c in problem.constraints if c.key in TRADE_KEYS for r in c.rows if r.soft is None and r.box]
    if not trade_rows:
        return []
    reach_lo, reach_hi = merge_boxes(trade_rows, n)
    notes: list[str] = []
    for c in problem.constraints:
        if c.key not in POSITION_KEYS:
            continue
        rows_out = []
        for rows in c.rows:
            if rows.soft is not None or not rows.box:
                rows_out.append(rows)
                continue
            off = rows.offset
            hi_w, lo_w = rows.upper + off, rows.lower + off
            above = (w0 > hi_w + BREACH_TOL) & (reach_lo > hi_w + BREACH_TOL)
            below = (w0 < lo_w - BREACH_TOL) & (reach_hi < lo_w - BREACH_TOL)
            if not (above.any() or below.any()):
                rows_out.append(rows)
                continue
            upper = np.where(above, reach_lo - off, rows.upper)
            lower = np.where(below, reach_hi - off, rows.lower)
            assert off is not None  # box rows carry their offset
            for i in map(int, np.flatnonzero(above | below)):
                side, limit, allowed = ("max", rows.upper[i], upper[i]) if above[i] else ("min", rows.lower[i], lower[i])
                notes.append(
                    f"passive breach: constraints.{c.key}.{side}[{rows.labels[i]}] is {w0[i] - off[i]:.4%} after "
                    f"market moves against a limit of {limit:.4%}; this rebalance trades it to {allowed:.4%}, "
                    "as far as the trading limits allow"
                )
            rows_out.append(replace(rows, lower=lower, upper=upper))
        c.__dict__["rows"] = rows_out
    return notes
