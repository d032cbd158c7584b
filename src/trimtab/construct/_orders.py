"""From a verified outcome to the orders a desk sends: the trade list in shares (prices and NAV known)
or in weights, each without noise orders and with the book they produce re-verified.

Scenario section ``orders`` (all optional, docs/scenarios.md):

- ``min_cash``: least cash after trades and estimated costs, fraction of NAV (default 0);
- ``min_trade_weight``: the noise floor of a list in weights, fraction of NAV (default 1e-6); a list
  in shares drops orders below half a lot (half a share for the sale of a whole position);
- ``tolerance``: the rounding tolerance per kind of limit, ``weight``, ``exposure``, ``beta``, ``risk``;
- ``repair``: ``auto`` (default: greedy, then the MILP if a breach is left), ``greedy`` or ``milp``, the
  search that makes the rounded book hold every limit.

When no rounded book holds every limit within its tolerance, the result's status is
:data:`NOT_FIT_STATUS`: the orders are still written, marked not fit to send, and ``trimtab
rebalance`` exits with code 6 (docs/cli.md).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from trimtab.construct._order_inputs import check_order_inputs
from trimtab.construct._rounded_book import book_model
from trimtab.construct._trade_list import TRADE_TOL, TradeList, build_trade_list
from trimtab.construct._warnings import RunWarning

if TYPE_CHECKING:
    from trimtab.construct._problem import Outcome, RebalanceProblem

#: The status of a run whose rounded orders breach a limit beyond its tolerance.
NOT_FIT_STATUS = "orders not fit to send"
#: Default noise floor of a trade list in weights (fraction of NAV).
MIN_TRADE_WEIGHT = 1e-6


def order_settings(problem: RebalanceProblem) -> Mapping[str, Any]:
    """The scenario's validated ``orders`` section (empty when not given)."""
    return problem.spec.mapping.get("orders") or {}


def min_cash(problem: RebalanceProblem) -> float:
    """Least cash after trades and costs (fraction of NAV): ``orders.min_cash``, at least ``cash.min``."""
    cash = problem.spec.constraints.get("cash") or {}
    return max(float(order_settings(problem).get("min_cash", 0.0)), float(cash.get("min") or 0.0))


def trade_list_for(problem: RebalanceProblem, outcome: Outcome) -> tuple[TradeList | None, list[RunWarning]]:
    """The order-ready list when the NAV and a price column are known (None otherwise: the list is
    in weights), with warnings about order inputs that were not used."""
    from trimtab.construct._lots import fixes as _fixes
    from trimtab.construct._lots import hard_box as _hard_box

    data = problem.data
    attrs = data.attributes
    options = problem.spec.constraints.get("round_lots") or {}
    price_column = options.get("price_column", "price")
    lot_column = options.get("lot_column", "lot")
    if data.nav is None or attrs is None or price_column not in attrs.columns:
        return None, []
    w0 = data.holdings
    traded = np.abs(outcome.weights - w0) > TRADE_TOL
    used = traded | (np.abs(w0) > TRADE_TOL)
    adv_column = (problem.spec.constraints.get("liquidity") or {}).get("adv_column", "adv")
    checked = check_order_inputs(attrs, data.assets, used, traded, price_column=price_column,
                                 lot_column=lot_column, adv_column=adv_column)
    lower, upper = _hard_box(problem, _fixes(outcome.rows))
    settings = order_settings(problem)
    rounded = build_trade_list(
        assets=data.assets, holdings=w0, target=outcome.weights, nav=data.nav, price=checked.price, lot=checked.lot,
        lower=lower, upper=upper, rows=outcome.rows, model=book_model(problem), adv=checked.adv,
        sold_outside=data.sold_outside if len(data.sold_outside) else None,
        min_cash=min_cash(problem), fully_invested="fully_invested" in problem.spec.constraints,
        tolerances=settings.get("tolerance"), method=settings.get("repair", "auto"),
    )
    notices = [RunWarning("inputs", f"attributes: {text}", {}) for text in checked.unused_bad]
    return rounded, notices


def rounding_notices(trade_list: TradeList) -> list[RunWarning]:
    """One warning per limit the rounded book breaches beyond its tolerance (orders not fit to send)."""
    return [
        RunWarning(
            "rounding",
            f"orders not fit to send: on the book rounded to whole lots {r.name} is {r.value:.6g} against "
            f"{_limit_text(r)}, {r.excess:.3g} beyond the tolerance {r.tolerance:.1g}",
            {"limit": str(r.name), "value": float(r.value), "excess": float(r.excess), "tolerance": float(r.tolerance)},
        )
        for r in trade_list.breached.itertuples()
    ]


def not_fit_line(trade_list: TradeList) -> str:
    """The one-line verdict on orders that breach a limit: every breached limit with its value and excess."""
    parts = [f"{r.name} {r.value:.6g} ({r.excess:.3g} beyond {_limit_text(r)} + tolerance {r.tolerance:.1g})"
             for r in trade_list.breached.itertuples()]
    return (f"orders NOT FIT TO SEND (written, marked so): no book in whole lots holds every limit; "
            f"on the rounded book {'; '.join(parts)}. Residual cash after trades and costs "
            f"{trade_list.cash_after_costs:,.2f}")


def _limit_text(row: Any) -> str:
    lo, hi = row.lower, row.upper
    if np.isfinite(lo) and np.isfinite(hi):
        return f"[{lo:.6g}, {hi:.6g}]" if lo != hi else f"{lo:.6g}"
    return f"a maximum of {hi:.6g}" if np.isfinite(hi) else f"a minimum of {lo:.6g}"


def weights_without_noise(problem: RebalanceProblem, outcome: Outcome) -> tuple[np.ndarray, str | None]:
    """A list in weights without trades below ``orders.min_trade_weight`` (default 1e-6 of NAV):
    those assets keep their current weight, and the book is verified again, each hard limit within
    max(verification tolerance, rounding tolerance of its kind). Returns the weights and a note
    (None when nothing was dropped); a book that would fail keeps its small trades, and says so."""
    from trimtab.construct._repair import tolerance_kind
    from trimtab.construct._rounded_book import rounding_tolerances

    settings = order_settings(problem)
    floor = float(settings.get("min_trade_weight", MIN_TRADE_WEIGHT))
    w0, weights = problem.data.holdings, outcome.weights
    trade = np.abs(weights - w0)
    small = (trade > 0) & (trade < floor)
    if not small.any():
        return weights, None
    cleaned = np.where(small, w0, weights)
    tolerances = rounding_tolerances(settings)
    failed = []
    for r in outcome.rows:
        if r.soft is not None:
            continue
        breach = r.breach(np.asarray(r.evaluate(cleaned), dtype=np.float64))
        if np.any(breach > np.maximum(r.tolerance(), tolerances[tolerance_kind(r)])):
            failed.append(r.name)
    if failed:
        return weights, (f"orders: {int(small.sum())} trades below {floor:g} of NAV kept: dropping them would "
                         f"breach {', '.join(failed[:5])}")
    return cleaned, f"orders: dropped {int(small.sum())} trades below {floor:g} of NAV (noise); the book re-verified"


def cash_after_costs_weights(problem: RebalanceProblem, weights: np.ndarray) -> float:
    """1 − Σw − Σ cost (fraction of NAV): the cash a list in weights leaves after its costs."""
    rates = problem.objective.rates
    cost = float(rates.cost(weights - problem.data.holdings).sum()) if rates.any else 0.0
    return 1.0 - float(weights.sum()) - cost
