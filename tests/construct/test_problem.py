"""Rebalance against closed forms: Markowitz minimum variance and Merton's (1972) frontier."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.construct import build_problem, rebalance

from ..conftest import random_model


def dense(model):
    return model.covariance().to_numpy()


def test_minimum_variance_budget_only_matches_closed_form():
    # Markowitz (1952) / textbook identity: argmin wᵀΣw s.t. 1ᵀw = 1 is Σ⁻¹1 / 1ᵀΣ⁻¹1.
    model = random_model(30, 4, seed=3)
    result = rebalance(model, {"objective": {"minimize": "total_risk"}, "constraints": {"fully_invested": True}})
    inv = np.linalg.solve(dense(model), np.ones(model.n_assets))
    expected = inv / inv.sum()
    np.testing.assert_allclose(result.weights.to_numpy(), expected, atol=1e-6)
    assert result.status == "optimal"
    assert result.verification["ok"].all()


def test_frontier_matches_merton_closed_form():
    # Merton (1972), "An analytic derivation of the efficient portfolio frontier": with
    # A = 1ᵀΣ⁻¹1, B = 1ᵀΣ⁻¹μ, C = μᵀΣ⁻¹μ, D = AC − B², the least variance for 1ᵀw = 1 and
    # μᵀw = m is σ²(m) = (A m² − 2 B m + C) / D (per period here; the optimizer annualises).
    model = random_model(25, 3, seed=8)
    rng = np.random.default_rng(8)
    mu = rng.normal(0.05, 0.03, model.n_assets)
    sigma = dense(model)
    inv_one, inv_mu = np.linalg.solve(sigma, np.ones(25)), np.linalg.solve(sigma, mu)
    A, B, C = inv_one.sum(), inv_one @ mu, mu @ inv_mu
    D = A * C - B * B
    for m in (0.04, 0.06, 0.09):
        # the target-return equality μᵀw = m is not a scenario key: add it as an extra row
        problem = build_problem(model, {"objective": {"minimize": "total_risk"},
                                        "constraints": {"fully_invested": True}})
        from trimtab.construct.constraints._base import linear_rows

        row = linear_rows("target_return", "test", mu[None, :], np.array([m]), np.array([m]), ["target_return"])
        outcome = problem.solve_convex([row])
        w = outcome.weights
        variance = w @ sigma @ w
        assert variance == pytest.approx((A * m * m - 2 * B * m + C) / D, rel=1e-6)
        assert mu @ w == pytest.approx(m, abs=1e-8)
