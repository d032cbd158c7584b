"""The order-ready trade list (issues #13, #19): whole shares, sides, notionals against weights and
prices; the rounded book repaired until it holds every limit itself within the rounding tolerance, and
verified independently with a dense Σ on a small fund; costs paid from cash; no noise orders."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.construct import rebalance
from trimtab.construct._repair import ROUNDING_TOLERANCE
from trimtab.construct._rounded_book import book_limits, book_model, verification_table
from trimtab.construct._trade_list import TradeList

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
    # costs come out of cash: never overdrawn
    assert tl.cash_after_costs >= 0.0
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
    assert {"cash_after_costs", "tracking_error", "turnover", "long_only", "weight"} <= {n.split("[")[0] for n in check.index}
    assert tl.verification["ok"].all()
    assert check.loc["tracking_error", "value"] == pytest.approx(te, rel=1e-10)
    # the limit itself plus the documented rounding tolerance, nothing for "what rounding moved"
    assert te <= 0.03 + ROUNDING_TOLERANCE["risk"]
    assert (w >= -1e-12).all() and (w <= 0.08 + ROUNDING_TOLERANCE["weight"]).all()
    assert 0.5 * np.abs(w - fund.holdings.to_numpy()).sum() <= 0.3 + ROUNDING_TOLERANCE["weight"]
    # costs paid from cash; fully invested: the cash left after costs is less than one lot
    spread = fund.attributes["spread"].to_numpy() / 2 + fund.attributes["commission"].to_numpy()
    t = np.abs(w - fund.holdings.to_numpy())
    cost = float((spread * t).sum()) * fund.nav
    # to the cent per order, and half a share per exit (holdings given as weights hold fractions of a share)
    n_exits = int(((tl.orders["weight_after"].abs() <= 1e-12) & (tl.orders["side"] == "sell")).sum())
    slack = 0.01 * len(tl.orders) + 0.5 * 100.0 * n_exits
    assert tl.cash_after_costs == pytest.approx(fund.nav * (1 - w.sum()) - cost, abs=slack)
    assert 0.0 <= tl.cash_after_costs <= tl.one_lot
    assert tl.cash_after == pytest.approx(fund.nav * (1 - w.sum()))
    # the report's post-trade figures are the rounded book's
    assert result.post_trade.risk == pytest.approx(te, rel=1e-10)
    assert result.figures["tracking_error"] == pytest.approx(te, rel=1e-10)


def test_cash_identity_from_the_orders() -> None:
    # cash before − buys + sells − costs = cash after (a bookkeeping identity), from the orders as written
    fund = make_fund(40, 4, seed=136)
    tl = _solve(fund).trade_list
    orders = tl.orders
    buys = orders.loc[orders["side"] == "buy", "notional"].sum()
    sells = orders.loc[orders["side"] == "sell", "notional"].sum()
    assert tl.cash_after_costs == pytest.approx(tl.cash_before - buys + sells - orders["cost"].sum(), abs=1e-6)
    # and it is the book's cash: NAV·(1 − Σw) less the costs, to the cent per order and half a share per exit
    n_exits = int(((orders["weight_after"].abs() <= 1e-12) & (orders["side"] == "sell")).sum())
    assert tl.cash_after_costs == pytest.approx(tl.cash_after - orders["cost"].sum(), abs=0.01 * len(orders) + 50.0 * n_exits)
    assert tl.cash_after_costs >= 0.0


def test_a_perturbed_book_fails_the_verification() -> None:
    # the check compares with the limit itself: 1% of noise on every weight must fail it (under the old
    # "breach before + moved" rule it passed every group, factor and beta limit)
    from trimtab.construct import build_problem

    fund = make_fund(40, 4, seed=133)
    scenario = {**SCENARIO, "constraints": {**SCENARIO["constraints"], "beta": {"min": 0.98, "max": 1.02},
                                            "group": {"by": "industry", "active": True, "bounds": {"default": [-0.02, 0.02]}}}}
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    outcome = problem.solve_convex()
    model = book_model(problem)
    w0 = fund.holdings.to_numpy()
    repair, boxes = book_limits(outcome.rows, model, w0, min_cash=0.0, fully_invested_lot=None, tolerances=ROUNDING_TOLERANCE)
    table = verification_table([*repair, *boxes], [], outcome.weights).set_index("name")
    # the optimizer's book holds every limit but one: fully invested, it cannot also pay its costs
    assert table.drop(index="cash_after_costs")["ok"].all()
    assert not table.loc["cash_after_costs", "ok"] and table.loc["cash_after_costs", "value"] < 0
    rng = np.random.default_rng(0)
    noisy = outcome.weights + 0.01 * rng.standard_normal(len(outcome.weights))
    table = verification_table([*repair, *boxes], [], noisy)
    failed = set(table.loc[~table["ok"], "name"].str.split("[").str[0])
    assert {"tracking_error", "beta", "group.industry", "long_only"} <= failed


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


def test_a_bad_order_input_on_an_asset_held_or_traded_is_an_input_error() -> None:
    from trimtab.errors import InputError

    fund = make_fund(30, 3, seed=137)
    held = fund.holdings.index[0]
    for column, value, shown in (("price", 0.0, "0"), ("price", np.nan, "nan"), ("price", -5.0, "-5"),
                                 ("lot", 0.0, "0"), ("lot", -100.0, "-100"), ("lot", np.nan, "nan")):
        attrs = fund.attributes.copy()
        attrs.loc[held, column] = value
        with pytest.raises(InputError, match=rf"^attributes: column '{column}' must be a number > 0 for assets held or "
                                              rf"traded: {held} \({shown}\)$"):
            _solve(fund, attributes=attrs)


def test_adv_of_zero_on_a_traded_asset_is_an_error_never_inf() -> None:
    from trimtab.errors import InputError

    fund = make_fund(30, 3, seed=138)
    traded = _solve(fund).orders.index[0]
    attrs = fund.attributes.copy()
    attrs.loc[traded, "adv"] = 0.0
    with pytest.raises(InputError, match=rf"column 'adv' must be a number > 0 for assets traded: {traded} \(0\)"):
        _solve(fund, attributes=attrs)


def test_a_bad_price_on_an_asset_neither_held_nor_traded_only_warns() -> None:
    fund = make_fund(30, 3, seed=139)
    holdings = fund.holdings.copy()
    idle = holdings.index[-1]
    holdings[idle] = 0.0
    holdings /= holdings.sum()
    scenario = {**SCENARIO, "constraints": {**SCENARIO["constraints"], "no_buy": [idle]}}
    attrs = fund.attributes.copy()
    attrs.loc[idle, "price"] = np.nan
    result = _solve(fund, scenario, attributes=attrs, holdings=holdings)
    assert result.trade_list is not None and idle not in result.orders.index
    (warning,) = [w for w in result.warnings if w.kind == "inputs"]
    assert f"column 'price' is not a number > 0 for 1 assets neither held nor traded (not used): {idle} (nan)" in warning.message
    assert np.isfinite(result.orders[["shares", "notional", "cost", "adv_percent"]].to_numpy(dtype=float)).all()


def test_no_noise_orders_in_a_list_in_weights() -> None:
    # a trade of 1e-8 of NAV is no order: dropped before the list is written, the book re-verified
    from trimtab.construct import build_problem
    from trimtab.construct._orders import weights_without_noise

    fund = make_fund(30, 3, seed=140)
    scenario = {"objective": {"minimize": "active_risk"}, "constraints": {"long_only": True, "weight": {"max": 0.5}}}
    problem = build_problem(fund.model, scenario, **{**fund.kwargs(), "attributes": None, "nav": None})
    outcome = problem.solve_convex()
    from dataclasses import replace

    noisy = outcome.weights.copy()
    noisy[:3] = fund.holdings.to_numpy()[:3] + np.array([1.16e-8, -5e-7, 2e-6])
    cleaned, note = weights_without_noise(problem, replace(outcome, weights=noisy))
    assert note is not None and note.startswith("orders: dropped 2 trades below 1e-06 of NAV")
    np.testing.assert_array_equal(cleaned[:2], fund.holdings.to_numpy()[:2])
    assert cleaned[2] == noisy[2]
    result = rebalance(fund.model, {**scenario, "orders": {"min_trade_weight": 1e-4}}, **{**fund.kwargs(), "attributes": None, "nav": None})
    assert (result.orders["weight_change"].abs() >= 1e-4).all()
