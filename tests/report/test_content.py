"""gather(): the figures a report shows, checked against the attributions and plain numpy on the trades."""

from __future__ import annotations

import dataclasses
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel, InputError
from trimtab.attribution import attribute
from trimtab.report import CAUTION, gather
from trimtab.report._content import gather_many

from .conftest import StandInResult, stand_in


def test_caution_text_is_the_agreed_sentence() -> None:
    assert CAUTION == (
        "These figures are model forecasts, not investment advice. Verify every trade before trading. "
        "Your firm's compliance rules and applicable regulation govern."
    )


def test_rebalance_content(result: StandInResult) -> None:
    content = gather(result, top=5)
    assert content.is_rebalance and content.pre is result.pre_trade and content.post is result.post_trade
    assert content.headline.loc["risk", "pre"] == result.pre_trade.risk
    assert content.headline.loc["risk", "change"] == pytest.approx(result.post_trade.risk - result.pre_trade.risk)
    budget = content.risk_budget
    assert budget is not None and budget.name == "tracking_error" and budget.cap == 0.03
    assert budget.used == pytest.approx(result.post_trade.risk / 0.03, rel=1e-12)
    trade = result.trades["trade"].to_numpy()
    summary = content.trade_summary.set_index("label")["value"]
    # One-way turnover ½·Σ|trade| (the optimizer issue's definition), recomputed with numpy.
    assert summary["Turnover, one-way (½·Σ|trade|)"] == pytest.approx(0.5 * np.abs(trade).sum(), rel=1e-12)
    assert summary["Buys"] == (trade > 0).sum() and summary["Sells"] == (trade < 0).sum()
    assert summary["Estimated cost (of NAV)"] == pytest.approx(result.trades["cost"].sum(), rel=1e-12)
    sizes = content.top_trades["trade"].abs().to_numpy()
    assert len(sizes) == 5 and np.all(np.diff(sizes) <= 0) and sizes[0] == np.abs(trade).max()
    assert content.binding_constraints["name"].tolist() == ["fully_invested"]
    assert content.constraints["name"].iloc[0] == "fully_invested"
    assert list(content.split.index) == ["Before", "After"]
    np.testing.assert_allclose(content.split["factor"] + content.split["specific"], content.split["risk"], rtol=1e-12)
    assert content.run["solver"] == "CLARABEL" and content.objective["total"] == 0.0077
    assert content.groups["post"].sum() == pytest.approx(result.post_trade.risk, rel=1e-12)


def test_attribute_groupings(result: StandInResult) -> None:
    content = gather(result)
    # The scenario's group limit names country, so it comes first; price is numeric and not a grouping.
    assert list(content.asset_groups) == ["country", "sector"]
    sector = content.asset_groups["sector"]
    assert list(sector.columns) == ["pre", "post", "percent", "active_weight"]
    assert sector["post"].sum() == pytest.approx(result.post_trade.risk, rel=1e-12)
    assert sector["pre"].sum() == pytest.approx(result.pre_trade.risk, rel=1e-12)
    assert sector["post"].abs().is_monotonic_decreasing
    assert gather(result.post_trade).asset_groups.keys() == {"country", "sector"}
    bare = dataclasses.replace(result, post_trade=attribute(result.post_trade.model, result.weights, result.benchmark))
    assert gather(bare).asset_groups == {}


def test_changes_below_rounding_show_as_zero(result: StandInResult) -> None:
    # The stand-in scales the active weights, so the diversification ratio is unchanged up to rounding.
    content = gather(result)
    assert content.headline.loc["diversification_ratio", "change"] == 0.0
    assert content.headline.loc["net_weight", "change"] == 0.0



@pytest.mark.parametrize(
    ("value", "unit", "text"),
    [(0.004, "fraction", "+0.40 pp"), (-3.6e-5, "fraction", "-0.004 pp"), (1e-7, "fraction", "0"),
     (1.23e-5, "bp", "+0.12 bp"), (-8e-7, "bp", "-0.01 bp"), (-6e-8 * 10, "fraction", "-0.0001 pp"), (-0.004, "percent", "-0.004 pp"), (3, "count", "+3")],
)
def test_a_small_change_keeps_its_sign_and_first_digit(value: float, unit: str, text: str) -> None:
    # compare's "what do I give up": a stress limit that costs 0.004 pp of alpha must not read as 0
    from trimtab.report._desk import change_text

    assert change_text(value, unit) == text

def test_risk_budget_from_scenario_when_the_table_has_no_row(result: StandInResult) -> None:
    table = result.constraints[result.constraints["name"] != "tracking_error"]
    content = gather(dataclasses.replace(result, constraints=table))
    assert content.risk_budget is not None and content.risk_budget.cap == 0.03
    bare = dataclasses.replace(result, constraints=table, scenario={})
    assert gather(bare).risk_budget is None
    total = dataclasses.replace(result, constraints=table, scenario={"constraints": {"total_risk": {"max": 0.2}}})
    budget = gather(total).risk_budget
    assert budget.name == "total_risk" and budget.post == result.post_trade.portfolio_risk


def test_binding_flags_with_missing_values_and_tiny_trades(result: StandInResult) -> None:
    table = result.constraints.assign(binding=pd.Series([None, True, np.nan, False], dtype=object))
    trades = result.trades.copy()
    trades.iloc[0, trades.columns.get_loc("trade")] = 1e-13  # below TRADE_TOLERANCE: solver noise
    content = gather(dataclasses.replace(result, constraints=table, trades=trades))
    assert content.binding_constraints["name"].tolist() == ["tracking_error"]
    assert content.constraints["name"].iloc[0] == "tracking_error"
    summary = content.trade_summary.set_index("label")["value"]
    assert summary["Assets traded"] == len(trades) - 1
    assert trades.index[0] not in content.top_trades.index


def test_duck_typed_minimal_result(report_model: FactorModel) -> None:
    post = attribute(report_model, pd.Series({"A0001": 1.0}))
    content = gather(SimpleNamespace(post_trade=post))
    assert content.is_rebalance and content.pre is None and content.trades is None
    assert content.constraints is None and content.trade_summary is None and content.risk_budget is None
    assert list(content.headline.columns) == ["label", "unit", "post"]


def test_attribution_content(report_model: FactorModel) -> None:
    attr = attribute(report_model, pd.Series(1 / 60, index=report_model.assets))
    content = gather(attr, top=3)
    assert content.kind == "attribution" and not content.run and len(content.top_assets) == 3
    assert list(content.split.index) == ["Portfolio"]
    assert content.exposures["post"].abs().is_monotonic_decreasing


def test_bad_subjects_are_named(result: StandInResult) -> None:
    with pytest.raises(InputError, match=r"report: expected a RiskAttribution or a rebalance result .* got int"):
        gather(3)
    with pytest.raises(InputError, match=r"report: expected a non-empty mapping scenario name"):
        gather_many({})
    with pytest.raises(InputError, match=r"report: scenario 'broken': expected a RiskAttribution"):
        gather_many({"ok": result, "broken": dataclasses.replace(result, post_trade=None)})


def test_second_stand_in_differs(report_model: FactorModel) -> None:
    # Guard that the fixtures exercise different numbers (else comparison tests could not fail).
    assert stand_in(report_model, seed=1).post_trade.risk != stand_in(report_model, seed=0).post_trade.risk
