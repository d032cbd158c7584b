"""The rebalance problem against outside references: closed forms (Markowitz, Merton), a dense
covariance formulation written in the test, scipy's SLSQP, the KKT conditions and finite differences."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import minimize

from trimtab.construct import build_problem, rebalance
from trimtab.construct.constraints._base import linear_rows

from ..conftest import random_model
from ._dense import dense_solve
from .conftest import make_fund


def dense(model):
    return model.covariance().to_numpy()


@pytest.fixture(params=[("FACTOR_IPM",), ("CLARABEL",)], ids=["factor_ipm", "clarabel"])
def solvers(request):
    """Each outside-reference check runs on trimtab's interior-point method and on Clarabel alone."""
    return request.param


def test_minimum_variance_budget_only_matches_closed_form(solvers):
    # Markowitz (1952) / textbook identity: argmin wᵀΣw s.t. 1ᵀw = 1 is Σ⁻¹1 / 1ᵀΣ⁻¹1.
    model = random_model(30, 4, seed=3)
    result = rebalance(model, {"objective": {"minimize": "total_risk"}, "constraints": {"fully_invested": True}},
                       solvers=solvers)
    assert result.solver == solvers[0]
    inv = np.linalg.solve(dense(model), np.ones(model.n_assets))
    expected = inv / inv.sum()
    np.testing.assert_allclose(result.weights.to_numpy(), expected, atol=1e-6)
    assert result.status == "optimal"
    assert result.verification["ok"].all()


def test_frontier_matches_merton_closed_form(solvers):
    # Merton (1972), "An analytic derivation of the efficient portfolio frontier": with
    # A = 1ᵀΣ⁻¹1, B = 1ᵀΣ⁻¹μ, C = μᵀΣ⁻¹μ, D = AC − B², the least variance for 1ᵀw = 1 and
    # μᵀw = m is σ²(m) = (A m² − 2 B m + C) / D.
    model = random_model(25, 3, seed=8)
    rng = np.random.default_rng(8)
    mu = rng.normal(0.05, 0.03, model.n_assets)
    sigma = dense(model)
    inv_one, inv_mu = np.linalg.solve(sigma, np.ones(25)), np.linalg.solve(sigma, mu)
    A, B, C = inv_one.sum(), inv_one @ mu, mu @ inv_mu
    D = A * C - B * B
    problem = build_problem(model, {"objective": {"minimize": "total_risk"}, "constraints": {"fully_invested": True}},
                            solvers=solvers)
    for m in (0.04, 0.06, 0.09):
        # the target-return equality μᵀw = m is not a scenario key: add it as an extra row
        row = linear_rows("target_return", "test", mu[None, :], np.array([m]), np.array([m]), ["target_return"])
        outcome = problem.solve_convex([row])
        assert outcome.solver == solvers[0]
        w = outcome.weights
        assert w @ sigma @ w == pytest.approx((A * m * m - 2 * B * m + C) / D, rel=1e-6)
        assert mu @ w == pytest.approx(m, abs=1e-8)


def every_constraint(assets):
    a = list(assets)
    return {
        "fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.02},
        "active_weight": {"min": -0.012, "max": 0.012}, "trade": {"min": -0.015, "max": 0.015},
        "factor_exposure": {"active": True, "bounds": {"default": [-0.05, 0.05], "f1": [0, 0]}},
        "group": {"by": "industry", "active": True, "bounds": {"default": [-0.02, 0.02]}},
        "beta": {"min": 0.98, "max": 1.02},
        "tracking_error": {"max": 0.02}, "total_risk": {"max": 0.30}, "factor_risk": {"max": 0.018},
        "specific_risk": {"max": 0.012}, "turnover": {"max": 0.4}, "liquidity": {"max_adv_fraction": 0.1, "days": 1},
        "no_buy": a[0:3], "no_sell": a[3:6], "no_trade": a[6:8], "must_hold": {"assets": a[8:10], "min_weight": 0.002},
    }


def test_every_long_only_constraint_matches_dense_formulation(solvers):
    # outside reference: the same problem written on the dense N×N covariance in tests/construct/_dense.py
    fund = make_fund(200, 10, seed=11)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5, "costs": True},
                "constraints": every_constraint(fund.model.assets)}
    result = rebalance(fund.model, scenario, solvers=solvers, **fund.kwargs())
    assert result.solver == solvers[0]
    expected, value = dense_solve(fund.model, scenario, **fund.kwargs())
    np.testing.assert_allclose(result.weights.to_numpy(), expected.to_numpy(), atol=1e-5)
    assert result.objective["total"] == pytest.approx(value, abs=1e-7)
    assert result.verification["ok"].all()
    assert result.constraints["binding"].sum() >= 5


def test_long_short_constraints_match_dense_formulation():
    fund = make_fund(200, 10, seed=12)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5, "cost_aversion": 2,
                              "costs": {"spread": "spread", "impact": "impact"}},
                "constraints": {"cash": {"min": 0.0, "max": 0.05}, "leverage": {"gross": 1.6, "net": [0.9, 1.0], "short": 0.3},
                                "weight": {"min": -0.02, "max": 0.03}, "tracking_error": {"max": 0.04},
                                "turnover": {"max": 0.6}}}
    result = rebalance(fund.model, scenario, **fund.kwargs())
    kwargs = fund.kwargs()
    kwargs["attributes"] = fund.attributes.assign(commission=0.0)  # the scenario names no commission
    expected, value = dense_solve(fund.model, scenario, **kwargs)
    np.testing.assert_allclose(result.weights.to_numpy(), expected.to_numpy(), atol=1e-5)
    assert result.objective["total"] == pytest.approx(value, abs=1e-7)
    gross = result.constraints.set_index("name").loc["leverage.gross"]
    assert gross["binding"] and gross["value"] == pytest.approx(1.6, abs=1e-7)


@pytest.mark.parametrize("objective", [{"maximize": "alpha"}, {"minimize": "active_risk"}])
def test_alpha_and_active_risk_objectives_match_dense(objective, solvers):
    fund = make_fund(60, 5, seed=13)
    constraints = {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.02},
                   "weight": {"min": 0.0, "max": 0.05}}
    scenario = {"objective": objective, "constraints": constraints}
    result = rebalance(fund.model, scenario, solvers=solvers, **fund.kwargs())
    assert result.solver == solvers[0]
    sigma, b, w = dense(fund.model), fund.benchmark.to_numpy(), result.weights.to_numpy()
    if objective.get("maximize") == "alpha":
        expected, value = dense_solve(fund.model, scenario, **fund.kwargs())
        np.testing.assert_allclose(w, expected.to_numpy(), atol=1e-5)
        assert result.objective["alpha"] == pytest.approx(value, abs=1e-8)
    else:
        # without other limits the benchmark itself is the minimum: zero active risk
        assert np.sqrt(252 * (w - b) @ sigma @ (w - b)) == pytest.approx(0.0, abs=1e-6)


def test_slsqp_agrees_on_a_small_smooth_case(solvers):
    # scipy.optimize.minimize(method="SLSQP") on the same utility with budget, bounds and a TE cap
    fund = make_fund(12, 3, seed=21)
    model = fund.model
    sigma, ppy = dense(model), model.periods_per_year
    b, a = fund.benchmark.to_numpy(), fund.alpha.to_numpy()
    lam, cap = 8.0, 0.02
    scenario = {"objective": {"maximize": "utility", "risk_aversion": lam},
                "constraints": {"fully_invested": True, "weight": {"min": 0.0, "max": 0.2}, "tracking_error": {"max": cap}}}
    result = rebalance(model, scenario, benchmark=fund.benchmark, alpha=fund.alpha, solvers=solvers)
    assert result.solver == solvers[0]

    def negative_utility(w):
        act = w - b
        return -(a @ act - lam * ppy * act @ sigma @ act)

    cons = [{"type": "eq", "fun": lambda w: w.sum() - 1.0},
            {"type": "ineq", "fun": lambda w: cap**2 - ppy * (w - b) @ sigma @ (w - b)}]
    ref = minimize(negative_utility, b, method="SLSQP", bounds=[(0.0, 0.2)] * 12, constraints=cons,
                   options={"ftol": 1e-15, "maxiter": 1000})
    assert ref.success
    np.testing.assert_allclose(result.weights.to_numpy(), ref.x, atol=1e-5)
    assert result.objective["total"] == pytest.approx(-ref.fun, abs=1e-9)


def test_kkt_conditions_hold_with_reported_duals(solvers):
    # Karush–Kuhn–Tucker (textbook): ∇U = Σ (μ_up − μ_lo)·∇g, μ ≥ 0, μ·slack = 0, with the duals in
    # objective units per unit of limit (the shadow prices the constraint table reports)
    fund = make_fund(30, 4, seed=31)
    model = fund.model
    lam = 10.0
    scenario = {"objective": {"maximize": "utility", "risk_aversion": lam},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.015}}}
    problem = build_problem(model, scenario, benchmark=fund.benchmark, alpha=fund.alpha, solvers=solvers)
    outcome = problem.solve_convex()
    assert outcome.solver == solvers[0]
    w, b, a = outcome.weights, fund.benchmark.to_numpy(), fund.alpha.to_numpy()
    sigma, ppy = dense(model), model.periods_per_year
    grad_u = a - 2 * lam * ppy * sigma @ (w - b)
    rows = {r.name: r for r in outcome.rows}
    nu = outcome.duals[id(rows["fully_invested"])][0] - outcome.duals[id(rows["fully_invested"])][1]
    up_lo = outcome.duals[id(rows["long_only"])]
    te_mu = outcome.duals[id(rows["tracking_error"])][0][0]
    te = np.sqrt(ppy * (w - b) @ sigma @ (w - b))
    grad_te = ppy * sigma @ (w - b) / te
    residual = grad_u - nu * np.ones(30) + up_lo[1] - te_mu * grad_te
    assert np.abs(residual).max() < 1e-6
    assert up_lo[1].min() > -1e-9 and te_mu > -1e-9
    assert np.abs(up_lo[1] * w).max() < 1e-8
    assert te_mu * (0.015 - te) == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("limit,delta", [("tracking_error.max", 1e-4), ("turnover.max", 1e-3)])
def test_shadow_price_matches_finite_difference(limit, delta, solvers):
    # sensitivity identity: dU*/d(limit) = shadow price (central difference)
    fund = make_fund(40, 4, seed=41)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.01},
                                "turnover": {"max": 0.05}}}
    problem = build_problem(fund.model, scenario, solvers=solvers, **fund.kwargs())
    base = problem.solve()
    assert base.solver == solvers[0]
    key, _ = limit.split(".")
    row = base.constraints.set_index("name").loc[key]
    assert row["binding"]
    value = row["upper"]
    up = problem.update(limits={limit: value + delta}).solve().objective["total"]
    down = problem.update(limits={limit: value - delta}).solve().objective["total"]
    assert (up - down) / (2 * delta) == pytest.approx(row["shadow_price"], rel=2e-3)


def test_equality_shadow_price_sign(solvers):
    # a neutralised factor [0, 0]: the signed dual is the gain per unit increase of the target
    fund = make_fund(40, 4, seed=42)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "factor_exposure": {"active": True, "bounds": {"f2": [0, 0]}}}}
    problem = build_problem(fund.model, scenario, solvers=solvers, **fund.kwargs())
    outcome = problem.solve_convex()
    assert outcome.solver == solvers[0]
    row = next(r for r in outcome.rows if r.name == "factor_exposure")
    up, lo = outcome.duals[id(row)]
    signed = up[0] - lo[0]
    eps = 1e-4
    hi = problem.update(limits={"factor_exposure.bounds.f2": [eps, eps]}).solve().objective["total"]
    low = problem.update(limits={"factor_exposure.bounds.f2": [-eps, -eps]}).solve().objective["total"]
    assert (hi - low) / (2 * eps) == pytest.approx(signed, rel=1e-3, abs=1e-7)


def test_update_equals_fresh_solve():
    fund = make_fund(50, 4, seed=51)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.02},
                                "turnover": {"max": 0.2}}}
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    rng = np.random.default_rng(52)
    alpha = pd.Series(rng.normal(0, 0.03, 50), index=fund.model.assets)
    holdings = fund.benchmark * 0.5 + fund.holdings * 0.5
    changed = problem.solve(alpha=alpha, holdings=holdings, risk_aversion=8.0, limits={"turnover.max": 0.1})
    kwargs = fund.kwargs() | {"alpha": alpha, "holdings": holdings}
    scenario2 = {"objective": {"maximize": "utility", "risk_aversion": 8.0},
                 "constraints": dict(scenario["constraints"], turnover={"max": 0.1})}
    fresh = rebalance(fund.model, scenario2, **kwargs)
    np.testing.assert_allclose(changed.weights.to_numpy(), fresh.weights.to_numpy(), atol=1e-9)
    assert changed.provenance["scenario_hash"] == fresh.provenance["scenario_hash"]


def test_update_rejects_unknown_limit_and_lambda_for_other_objectives():
    from trimtab.errors import ScenarioError

    fund = make_fund(20, 3, seed=53)
    problem = build_problem(fund.model, {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True}},
                            benchmark=fund.benchmark)
    with pytest.raises(ScenarioError, match=r"constraints\.turnover\.max: no such limit"):
        problem.update(limits={"turnover.max": 0.1})
    with pytest.raises(ScenarioError, match="only the utility objective takes a risk aversion"):
        problem.update(risk_aversion=3.0)


def test_solver_noise_is_zeroed_in_returned_weights(solvers):
    # a long-only book must not come back with −3e-14 weights or 1e-14 "positions" (trade lists
    # listed every asset); noise below WEIGHT_NOISE is set to 0 and the weights verified again
    from trimtab.construct._problem import WEIGHT_NOISE

    fund = make_fund(200, 10, seed=11)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.02},
                                "tracking_error": {"max": 0.02}}}
    result = rebalance(fund.model, scenario, solvers=solvers, **fund.kwargs())
    assert result.solver == solvers[0]
    w = result.weights.to_numpy()
    assert (w >= 0).all()
    assert not ((np.abs(w) > 0) & (np.abs(w) < WEIGHT_NOISE)).any()
    assert (w == 0).sum() > 0  # the case exercises the cleaning: some names are left entirely
    assert result.verification["ok"].all()
