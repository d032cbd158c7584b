"""Risk budgeting (Spinu 2013) against a scipy root-finder solution of the defining equations."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import root

from trimtab.construct import rebalance
from trimtab.construct._risk_budget import newton

from .conftest import make_fund

LONG = {"fully_invested": True, "long_only": True}


def shares(sigma, w):
    return w * (sigma @ w) / (w @ sigma @ w)


def test_equal_risk_contributions_match_root_finder():
    # defining equations (Maillard, Roncalli & Teïletche 2010): wᵢ(Σw)ᵢ = wᵀΣw / N, Σw = 1;
    # solved here by scipy.optimize.root on F(x) = x∘Σx − 1/N with w = x / Σx
    fund = make_fund(15, 3, seed=71)
    sigma = fund.model.covariance().to_numpy() * fund.model.periods_per_year
    n = 15
    ref = root(lambda x: x * (sigma @ x) - 1.0 / n, np.full(n, 1.0 / np.sqrt(np.trace(sigma))), method="hybr", tol=1e-14)
    assert ref.success
    expected = ref.x / ref.x.sum()
    result = rebalance(fund.model, {"objective": {"risk_budget": "equal"}, "constraints": LONG})
    np.testing.assert_allclose(result.weights.to_numpy(), expected, atol=1e-8)
    np.testing.assert_allclose(shares(sigma, result.weights.to_numpy()), 1.0 / n, atol=1e-10)
    assert result.solver == "NEWTON"
    assert result.verification["ok"].all()


def test_per_asset_budgets_with_default():
    fund = make_fund(12, 3, seed=72)
    sigma = fund.model.covariance().to_numpy()
    budgets = {"A0000": 3.0, "A0001": 2.0, "default": 1.0}
    result = rebalance(fund.model, {"objective": {"risk_budget": {"budgets": budgets}}, "constraints": LONG})
    raw = np.array([3.0, 2.0] + [1.0] * 10)
    np.testing.assert_allclose(shares(sigma, result.weights.to_numpy()), raw / raw.sum(), atol=1e-10)


def test_group_budgets_give_each_group_its_share():
    fund = make_fund(30, 3, seed=73)
    sigma = fund.model.covariance().to_numpy()
    groups = fund.attributes["industry"]
    present = sorted(groups.unique())
    budgets = {g: float(i + 1) for i, g in enumerate(present)}
    result = rebalance(fund.model, {"objective": {"risk_budget": {"by": "industry", "budgets": budgets}}, "constraints": LONG},
                       attributes=fund.attributes)
    rc = pd.Series(shares(sigma, result.weights.to_numpy()), index=fund.model.assets).groupby(groups).sum()
    total = sum(budgets.values())
    for g in present:
        assert rc[g] == pytest.approx(budgets[g] / total, abs=1e-10)


def test_newton_stationarity_on_random_factor_form():
    # ∇f(x) = Σx − b/x = 0 at the minimiser of Spinu's f(x) = ½xᵀΣx − bᵀlog x
    rng = np.random.default_rng(74)
    U = rng.normal(size=(50, 4)) * 0.1
    d = rng.uniform(0.01, 0.05, 50)
    b = rng.dirichlet(np.ones(50))
    x, steps = newton(U, d, b)
    assert np.abs(U @ (U.T @ x) + d * x - b / x).max() < 1e-10
    assert steps < 50


def test_budget_errors():
    from trimtab.errors import ScenarioError

    fund = make_fund(10, 2, seed=75)
    with pytest.raises(ScenarioError, match=r"objective\.risk_budget\.budgets: no budget for assets A0001"):
        rebalance(fund.model, {"objective": {"risk_budget": {"budgets": {"A0000": 1.0}}}})
    with pytest.raises(ScenarioError, match=r"objective\.risk_budget\.budgets: assets not in the risk model: ZZZ"):
        rebalance(fund.model, {"objective": {"risk_budget": {"budgets": {"ZZZ": 1.0, "default": 1.0}}}})
    with pytest.raises(ScenarioError, match=r"objective\.risk_budget\.budgets: unknown group\(s\) oak"):
        rebalance(fund.model, {"objective": {"risk_budget": {"by": "industry", "budgets": {"oak": 1.0}}}},
                  attributes=fund.attributes)
