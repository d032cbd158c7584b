"""The result: fields, trades with shares/notional/ADV/cost, the constraint table, provenance, the seam."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import pickle

import numpy as np
import pandas as pd
import pytest

import trimtab.attribution
from trimtab.attribution import RiskAttribution
from trimtab.construct import RebalanceResult, rebalance

from .conftest import make_fund

SCENARIO = {"objective": {"maximize": "utility", "risk_aversion": 5, "costs": True},
            "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.02},
                            "turnover": {"max": 0.15}, "liquidity": {"max_adv_fraction": 0.2}}}


@pytest.fixture
def result():
    fund = make_fund(40, 4, seed=81)
    return fund, rebalance(fund.model, SCENARIO, **fund.kwargs())


def test_fields_and_frozen(result):
    fund, res = result
    assert isinstance(res, RebalanceResult)
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.status = "x"  # type: ignore[misc]
    assert set(res.objective) == {"alpha", "risk_penalty", "costs", "penalties", "total"}
    assert res.objective["total"] == pytest.approx(sum(v for k, v in res.objective.items() if k != "total"))
    assert list(res.constraints.columns[:10]) == ["name", "kind", "value", "lower", "upper", "slack", "binding",
                                                  "shadow_price", "unit", "soft"]
    assert {"name", "value", "lower", "upper", "breach", "ok"} <= set(res.verification.columns)
    assert res.iterations > 0 and res.solve_time > 0 and res.build_time > 0


def test_trades_columns(result):
    fund, res = result
    t = res.trades
    assert list(t.columns) == ["initial_weight", "target_weight", "trade", "notional", "shares", "adv_fraction", "cost"]
    np.testing.assert_allclose(t["trade"], t["target_weight"] - t["initial_weight"])
    np.testing.assert_allclose(t["notional"], t["trade"] * fund.nav)
    np.testing.assert_allclose(t["shares"], t["notional"] / fund.attributes["price"])
    np.testing.assert_allclose(t["adv_fraction"], t["shares"].abs() / fund.attributes["adv"])
    rate = fund.attributes["spread"] / 2 + fund.attributes["commission"]
    np.testing.assert_allclose(t["cost"], rate * t["trade"].abs() + fund.attributes["impact"] * t["trade"].abs() ** 1.5)
    assert res.objective["costs"] == pytest.approx(-t["cost"].sum())
    assert (t["adv_fraction"] <= 0.2 + 1e-7).all()


def test_risk_figures_are_annualised_and_match_attribution(result):
    fund, res = result
    sigma = fund.model.covariance().to_numpy()
    a = res.weights.to_numpy() - fund.benchmark.to_numpy()
    te = np.sqrt(fund.model.periods_per_year * a @ sigma @ a)
    assert res.ex_ante["tracking_error"] == pytest.approx(te, rel=1e-10)
    assert isinstance(res.post_trade, RiskAttribution) and isinstance(res.pre_trade, RiskAttribution)
    # post-trade figures are those of the book as traded: the trades rounded to whole shares (issue #13)
    a_final = res.final_weights.to_numpy() - fund.benchmark.to_numpy()
    assert res.post_trade.risk == pytest.approx(np.sqrt(fund.model.periods_per_year * a_final @ sigma @ a_final), rel=1e-10)
    assert res.post_trade.risk <= te + 1e-4  # within the rounding tolerance for risk (ROUNDING_TOLERANCE, issue #19)
    row = res.constraints.set_index("name").loc["tracking_error"]
    assert row["value"] == pytest.approx(te, rel=1e-10)


def test_provenance_and_scenario(result):
    _, res = result
    text = json.dumps(res.scenario, sort_keys=True, separators=(",", ":"))
    assert res.provenance["scenario_hash"] == hashlib.sha256(text.encode()).hexdigest()
    assert res.provenance["solver"] == res.solver == "FACTOR_IPM"
    assert res.provenance["solver_settings"]["tol_gap"] == 1e-11
    assert res.scenario["objective"]["maximize"] == "utility"


def test_summary_text(result):
    _, res = result
    text = res.summary()
    assert text == str(res)
    assert text.startswith("Rebalance: optimal (FACTOR_IPM")
    assert "Ex-ante tracking error (annualised):" in text
    assert "Binding constraints:" in text and "turnover" in text
    assert res.turnover == pytest.approx(0.5 * res.trades["trade"].abs().sum())


def test_attribution_seam_absent_gives_none(monkeypatch):
    fund = make_fund(20, 3, seed=82)

    def missing(*args, **kwargs):
        raise ImportError("trimtab.attribution is not installed")

    monkeypatch.setattr(type(fund.model), "attribute", missing)
    res = rebalance(fund.model, {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True}},
                    benchmark=fund.benchmark)
    assert res.pre_trade is None and res.post_trade is None


def _assert_same_attribution(got: RiskAttribution, expected: RiskAttribution) -> None:
    # exact equality: the lazy attribution must be the very computation the public function does
    assert got.kind == expected.kind and got.is_zero_risk == expected.is_zero_risk
    pd.testing.assert_series_equal(got.headline(), expected.headline(), check_exact=True)
    pd.testing.assert_frame_equal(got.by_asset, expected.by_asset, check_exact=True)
    pd.testing.assert_frame_equal(got.by_factor, expected.by_factor, check_exact=True)
    pd.testing.assert_frame_equal(got.by_factor_group, expected.by_factor_group, check_exact=True)
    pd.testing.assert_frame_equal(got.by_group("industry"), expected.by_group("industry"), check_exact=True)


def test_pre_and_post_trade_equal_the_attribution_function(result):
    fund, res = result
    # Outside reference: trimtab.attribution.attribute, the attribution module's public function,
    # called here on the holdings and on the final (rounded) book against the same benchmark.
    pre = trimtab.attribution.attribute(fund.model, fund.holdings, fund.benchmark, attributes=fund.attributes)
    post = trimtab.attribution.attribute(fund.model, res.final_weights, fund.benchmark, attributes=fund.attributes)
    assert res.pre_trade.kind == "active" and res.pre_trade.risk > 0 and res.post_trade.risk != res.pre_trade.risk
    _assert_same_attribution(res.pre_trade, pre)
    _assert_same_attribution(res.post_trade, post)
    assert res.post_trade.risk == fund.model.attribute(res.final_weights, fund.benchmark).risk


def test_attribution_is_computed_on_first_access_only(monkeypatch):
    fund = make_fund(30, 3, seed=83)
    calls: list[str] = []
    original = trimtab.attribution.attribute

    def counting(model, weights, benchmark=None, **kwargs):
        calls.append("attribute")
        return original(model, weights, benchmark, **kwargs)

    # FactorModel.attribute imports trimtab.attribution.attribute at call time, so this sees every call
    monkeypatch.setattr(trimtab.attribution, "attribute", counting)
    res = rebalance(fund.model, SCENARIO, **fund.kwargs())
    text = repr(res)
    assert "_model" not in text and "pre_trade" not in text and not calls
    names = {f.name for f in dataclasses.fields(res)}
    assert {"weights", "verification", "ex_ante"} <= names and not names & {"pre_trade", "post_trade"}
    post = res.post_trade
    assert calls == ["attribute"] and res.post_trade is post
    pre = res.pre_trade
    assert calls == ["attribute"] * 2 and res.pre_trade is pre


def test_without_benchmark_the_attribution_is_of_total_risk():
    fund = make_fund(25, 3, seed=84)
    res = rebalance(fund.model, {"objective": {"minimize": "total_risk"}, "constraints": {"fully_invested": True,
                    "long_only": True}}, holdings=fund.holdings, attributes=fund.attributes)
    # Outside reference: the attribution module's public function without a benchmark (total risk).
    expected = trimtab.attribution.attribute(fund.model, res.weights, attributes=fund.attributes)
    _assert_same_attribution(res.post_trade, expected)
    assert res.post_trade.kind == "total" and res.pre_trade.risk > res.post_trade.risk


def test_a_result_built_without_a_model_has_no_attribution(result):
    _, res = result
    bare = RebalanceResult(**{f.name: getattr(res, f.name) for f in dataclasses.fields(res) if f.name != "_model"})
    assert bare.pre_trade is None and bare.post_trade is None


def test_pickle_round_trip_before_and_after_access(result):
    _, res = result
    unread = pickle.dumps(res)
    back = pickle.loads(unread)
    assert isinstance(back, RebalanceResult) and "post_trade" not in vars(back)
    pd.testing.assert_series_equal(back.weights, res.weights)
    pd.testing.assert_frame_equal(back.trades, res.trades)
    _assert_same_attribution(back.post_trade, res.post_trade)
    _assert_same_attribution(back.pre_trade, res.pre_trade)
    read = pickle.dumps(res)
    again = pickle.loads(read)
    assert "pre_trade" in vars(again) and "post_trade" in vars(again)
    _assert_same_attribution(again.pre_trade, res.pre_trade)
    # the attributions refer to the result's model, so pickle stores that model once, not three times
    assert len(unread) < len(read)
    assert again.pre_trade.model is again.post_trade.model is again._model


def test_binding_table_has_one_row_per_limit_and_liquidity_in_adv_terms() -> None:
    # issue #19: long_only and weight.min binding on the same assets at 0 are one row; the liquidity
    # row reads as a fraction of a day's volume against max_adv_fraction
    fund = make_fund(40, 4, seed=82)
    scenario = {"objective": {"maximize": "alpha", "costs": True},
                "constraints": {"fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.5},
                                "tracking_error": {"max": 0.03}, "liquidity": {"max_adv_fraction": 0.05}}}
    res = rebalance(fund.model, scenario, **fund.kwargs())
    table = res.constraints
    names = list(table["name"])
    assert len(names) == len(set(names))
    merged = table[table["name"] == "long_only = weight"]
    assert len(merged) == 1 and int(merged["n_binding"].iloc[0]) >= 1
    assert not {"long_only", "weight"} & set(table.loc[table["binding"].astype(bool), "name"])
    liq = table.set_index("name").loc["liquidity"]
    assert liq["unit"].startswith("fraction of ADV") and liq["upper"] == 0.05
    asset = liq["asset"]
    attrs = fund.attributes.loc[asset]
    trade = abs(res.weights[asset] - fund.holdings[asset])
    assert liq["value"] == pytest.approx(trade * fund.nav / (attrs["price"] * attrs["adv"]), rel=1e-9)
    assert liq["value"] == pytest.approx(0.05, rel=1e-5)  # binding: at the limit
