"""The order-ready trade list (issue #13): whole shares, sides, notionals against weights and prices, and
the rounded book re-verified against every limit, here independently with a dense Σ on a small fund."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.construct import rebalance
from trimtab.construct._trade_list import TradeList, rounding_rows, verify_rounded

from .conftest import make_fund

SCENARIO = {
    "objective": {"maximize": "alpha", "costs": {"spread": "spread", "commission": "commission"}},
    "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.08},
                    "tracking_error": {"max": 0.03}, "turnover": {"max": 0.3}},
}


def _solve(fund, scenario=SCENARIO, **changes):
    kwargs = {**fund.kwargs(), **changes}
    return rebalance(fund.model, scenario, **kwargs)


@pytest.mark.parametrize("lot", [1.0, 100.0], ids=["one-share", "lots-of-100"])
def test_orders_are_whole_lots_with_sides_and_notionals(lot: float) -> None:
    fund = make_fund(50, 4, seed=131)
    fund.attributes["lot"] = lot
    result = _solve(fund)
    tl = result.trade_list
    assert isinstance(tl, TradeList) and tl.ok
    orders = result.orders
    price = fund.attributes["price"].reindex(orders.index)
    # whole shares, a whole number of lots, every one a real trade
    assert (orders["shares"] == np.round(orders["shares"])).all() and (orders["shares"] > 0).all()
    exits = (orders["weight_after"].abs() <= 1e-12) & (orders["side"] == "sell")  # the whole position, odd lot included
    np.testing.assert_allclose(np.mod(orders.loc[~exits, "shares"] / lot, 1.0), 0.0, atol=1e-9)
    # side follows the weight change; notional = shares·price; the change = ±notional / NAV
    assert (orders["side"] == np.where(orders["weight_change"] > 0, "buy", "sell")).all()
    np.testing.assert_allclose(orders["notional"], orders["shares"] * price, rtol=0, atol=0.005)  # to the cent
    signed = np.where(orders["side"] == "buy", 1.0, -1.0) * orders["shares"] * price / fund.nav
    np.testing.assert_allclose(orders.loc[~exits, "weight_change"], signed[~exits], rtol=1e-9, atol=1e-12)
    # an exit sells the whole holding; holdings given as weights hold a fraction of a share, rounded here
    assert ((orders.loc[exits, "weight_change"] - signed[exits]).abs() <= 0.5 * price[exits] / fund.nav + 1e-15).all()
    # only the names that trade, largest notional first
    moved = (tl.weights - fund.holdings).abs() > 1e-10
    assert set(orders.index) == set(moved[moved].index)
    assert (np.diff(orders["notional"].to_numpy()) <= 0).all()
    # each trade moved by less than one lot from the optimizer's
    lot_weight = lot * fund.attributes["price"] / fund.nav
    assert ((tl.weights - result.weights).abs() <= lot_weight + 1e-12).all()
    # cost: bp of the notional and currency agree; % of ADV from shares
    np.testing.assert_allclose(orders["cost"], orders["cost_bp"] * orders["notional"] / 1e4, rtol=1e-4, atol=0.01)
    np.testing.assert_allclose(orders["adv_percent"], 100 * orders["shares"] / fund.attributes["adv"].reindex(orders.index),
                               atol=5e-5)


def test_rounded_book_is_reverified_independently() -> None:
    fund = make_fund(50, 4, seed=132)
    result = _solve(fund)
    tl = result.trade_list
    w = tl.weights.to_numpy()
    b = fund.benchmark.to_numpy()
    sigma = fund.model.covariance().to_numpy()  # dense Σ = B F Bᵀ + diag(d), fine at N = 50
    te = float(np.sqrt(fund.model.periods_per_year * (w - b) @ sigma @ (w - b)))
    check = tl.verification.set_index("name")
    # every limit of the scenario was checked on the rounded book, and each held
    assert {"fully_invested", "tracking_error", "turnover", "rounding"} <= {n.split("[")[0] for n in check.index}
    assert tl.verification["ok"].all()
    assert check.loc["tracking_error", "value"] == pytest.approx(te, rel=1e-10)
    assert te <= 0.03 + 1e-7 + check.loc["tracking_error", "moved"]
    assert (w >= -1e-12).all() and (w <= 0.08 + 1e-7).all()
    assert 0.5 * np.abs(w - fund.holdings.to_numpy()).sum() <= 0.3 + 1e-7 + check.loc["turnover", "moved"]
    # never spends more than the optimizer's book: cash left ≥ its cash, by less than one lot of any name
    assert tl.cash_after >= tl.cash_optimal - 1e-6
    assert tl.cash_after - tl.cash_optimal <= float((fund.attributes["lot"] * fund.attributes["price"]).max())
    assert tl.cash_after == pytest.approx(fund.nav * (1 - w.sum()))
    # the report's post-trade figures are the rounded book's
    assert result.post_trade.risk == pytest.approx(te, rel=1e-10)
    assert result.figures["tracking_error"] == pytest.approx(te, rel=1e-10)


def test_a_move_beyond_one_lot_fails_the_check() -> None:
    from trimtab.construct import build_problem

    fund = make_fund(30, 3, seed=133)
    problem = build_problem(fund.model, SCENARIO, **fund.kwargs())
    outcome = problem.solve_convex()
    lot_weight = (fund.attributes["lot"] * fund.attributes["price"] / fund.nav).to_numpy()
    rows = [*outcome.rows, rounding_rows(fund.model.assets, outcome.weights, fund.holdings.to_numpy(), lot_weight)]
    near = outcome.weights.copy()
    near[0] += 0.5 * lot_weight[0]  # half a lot: within what rounding may do
    assert verify_rounded(rows, outcome.weights, near)["ok"].all()
    far = outcome.weights.copy()
    far[0] += 0.2  # far more than a lot: not a rounding
    table = verify_rounded(rows, outcome.weights, far)
    assert set(table.loc[~table["ok"], "name"].str.split("[").str[0]) == {"rounding"}


def test_without_prices_the_list_is_in_weights() -> None:
    fund = make_fund(30, 3, seed=134)
    result = _solve(fund, attributes=fund.attributes.drop(columns=["price", "lot"]))
    assert result.trade_list is None
    orders = result.orders
    assert list(orders.columns[:4]) == ["side", "weight_before", "weight_after", "weight_change"]
    assert "shares" not in orders.columns
    np.testing.assert_allclose(orders["weight_after"] - orders["weight_before"], orders["weight_change"])
    assert (orders["weight_change"].abs() > 1e-10).all()
    assert (np.diff(orders["weight_change"].abs().to_numpy()) <= 0).all()
    pd.testing.assert_series_equal(result.final_weights, result.weights)


def test_positions_sold_outside_the_optimizer_are_in_the_list() -> None:
    from trimtab.errors import DataWarning

    fund = make_fund(30, 3, seed=135)
    holdings = pd.concat([fund.holdings * 0.97, pd.Series({"GONE": 0.03})])
    scenario = {"objective": {"minimize": "active_risk"},
                "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.2}}}
    with pytest.warns(DataWarning, match=r"sold to zero outside the optimizer: GONE"):
        result = _solve(fund, scenario, holdings=holdings, unknown_assets="zero")
    gone = result.orders.loc["GONE"]
    assert gone["side"] == "sell" and gone["notional"] == pytest.approx(0.03 * fund.nav)
    assert pd.isna(gone["shares"]) and gone["weight_change"] == pytest.approx(-0.03)
    # the cash before counts the position sold outside as held
    tl = result.trade_list
    assert tl.cash_before == pytest.approx(fund.nav * (1 - holdings.sum()), abs=1e-3)  # ~0: float noise at NAV 1e8
    assert result.figures["names_sold"] == float((result.orders["side"] == "sell").sum())
