"""Plain sentences for a conflict set: for each limit in it, why moving that limit alone is (or is not)
enough to make the scenario solvable.

Written from what the diagnosis already computed (the conflict set and the relaxation table of
:mod:`trimtab.construct._elastic`); the only arithmetic added is closed-form: the largest one-way
turnover the per-asset limits allow with the cash unchanged, min(Σ max(hiᵢ − w0ᵢ, 0), Σ max(w0ᵢ − loᵢ, 0))
over the merged hard bounds (what can be bought against what can be sold), plus positions sold
outside the optimizer, which says why raising a turnover cap cannot help when the liquidity or
position limits stop trading first.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from trimtab.construct._conflict import Conflict, LimitGroup
from trimtab.construct.constraints._base import Rows

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem


def _pct(x: float) -> str:
    return f"{100 * x:.3g}%"


def _in_unit(value: float, unit: str) -> str:
    """A limit's value as the user wrote it: fractions of NAV, volatility and ADV as %."""
    if unit.startswith(("weight", "annualised", "fraction")):
        return _pct(value)
    return f"{value:.4g}"


def turnover_reach(problem: RebalanceProblem, extra: Sequence[Rows]) -> float:
    """The largest one-way turnover the hard per-asset limits allow today (fraction of NAV)."""
    from trimtab.construct._lots import hard_box

    lower, upper = hard_box(problem, list(extra))
    w0 = problem.data.holdings
    buy = float(np.sum(np.maximum(upper - w0, 0.0)))
    sell = float(np.sum(np.maximum(w0 - lower, 0.0)))
    return min(buy, sell) + problem.data.outside_turnover


def _box_names(problem: RebalanceProblem) -> str:
    """The per-asset limits that bound trading, as the user knows them."""
    parts = []
    for c in problem.constraints:
        if c.key == "liquidity":
            o = c.options
            days = f"{o['days']:g} days" if o["days"] != 1 else "a day"
            parts.append(f"the liquidity limit ({_pct(o['max_adv_fraction'])} of ADV {days})")
        elif c.key in ("trade", "no_trade", "no_buy", "no_sell"):
            parts.append(f"the {c.key.replace('_', ' ')} limit")
    return " and ".join(parts) or "the position limits"


def member_sentences(problem: RebalanceProblem, extra: Sequence[Rows], conflict: Conflict,
                     table: pd.DataFrame) -> list[str]:
    """One sentence per limit of the conflict set, in its order.

    A limit with its own option in the relaxation table: how far it alone must move. A yes/no rule:
    it is not moved. A number without an option: why moving it alone is not enough (for turnover,
    the most the per-asset limits allow today), and that the joint option moves the limits together.
    """
    singles = table[table["option"].astype(str) != "together"] if len(table) else table
    joint = bool(len(table)) and (table["option"].astype(str) == "together").any()
    out = []
    for group in conflict.groups:
        out.append(f"{group.path}: {_reason(problem, extra, group, singles, joint)}")
    return out


def _reason(problem: RebalanceProblem, extra: Sequence[Rows], group: LimitGroup, singles: pd.DataFrame,
            joint: bool) -> str:
    if group.rule:
        return "a yes/no rule of the mandate; it is not moved, the numeric limits around it are"
    own = singles[singles["constraint"].astype(str).str.startswith(group.path)] if len(singles) else singles
    if len(own):
        first = own.iloc[0]
        unit = str(first["unit"])
        more = f" (and {len(own) - 1} more elements)" if len(own) > 1 else ""
        return (f"enough on its own: from {_in_unit(first['limit'], unit)} to {_in_unit(first['needed'], unit)}{more}, "
                f"every other limit as written (option {first['option']})")
    if group.key == "turnover":
        reach = turnover_reach(problem, extra)
        limit = float(group.rows.upper[0])
        return (f"raising it from {_pct(limit)} alone is not enough: {_box_names(problem)} allows at most "
                f"{_pct(reach)} one-way today, and at any turnover the other limits cannot all hold"
                + ("; the joint option moves it with them" if joint else "; the way out is another limit's option"))
    return ("moving it alone is not enough: without it the other limits of the scenario still cannot all hold"
            + ("; the joint option moves it with them" if joint else "; the way out is another limit's option"))
