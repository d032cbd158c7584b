"""The result: fields, trades with shares/notional/ADV/cost, the constraint table, provenance, the seam."""

from __future__ import annotations

import dataclasses
import hashlib
import json

import numpy as np
import pytest

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
    assert res.post_trade.risk == pytest.approx(te, rel=1e-10)
    row = res.constraints.set_index("name").loc["tracking_error"]
    assert row["value"] == pytest.approx(te, rel=1e-10)


def test_provenance_and_scenario(result):
    _, res = result
    text = json.dumps(res.scenario, sort_keys=True, separators=(",", ":"))
    assert res.provenance["scenario_hash"] == hashlib.sha256(text.encode()).hexdigest()
    assert res.provenance["solver"] == res.solver == "CLARABEL"
    assert res.provenance["solver_settings"]["tol_feas"] == 1e-10
    assert res.scenario["objective"]["maximize"] == "utility"


def test_summary_text(result):
    _, res = result
    text = res.summary()
    assert text == str(res)
    assert text.startswith("Rebalance: optimal (CLARABEL")
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
