"""Objective breakdown recomputed with numpy against direct formulas."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import build_problem

from .conftest import make_fund


def test_utility_breakdown_against_dense_formula():
    fund = make_fund(25, 3, seed=111)
    problem = build_problem(fund.model, {"objective": {"maximize": "utility", "risk_aversion": 7, "cost_aversion": 2,
                                                       "costs": True}}, **fund.kwargs())
    rng = np.random.default_rng(112)
    w = rng.dirichlet(np.ones(25))
    out = problem.objective.breakdown(w, penalties=0.001)
    b, a, w0 = fund.benchmark.to_numpy(), fund.alpha.to_numpy(), fund.holdings.to_numpy()
    sigma = fund.model.covariance().to_numpy() * fund.model.periods_per_year
    attrs = fund.attributes
    t = np.abs(w - w0)
    cost = ((attrs["spread"] / 2 + attrs["commission"]).to_numpy() * t + attrs["impact"].to_numpy() * t**1.5).sum()
    assert out["alpha"] == pytest.approx(a @ (w - b))
    assert out["risk_penalty"] == pytest.approx(-7 * (w - b) @ sigma @ (w - b))
    assert out["costs"] == pytest.approx(-2 * cost)
    assert out["penalties"] == -0.001
    assert out["total"] == pytest.approx(out["alpha"] + out["risk_penalty"] + out["costs"] - 0.001)


def test_total_risk_objective_uses_total_variance():
    fund = make_fund(25, 3, seed=113)
    problem = build_problem(fund.model, {"objective": {"minimize": "total_risk"}}, benchmark=fund.benchmark)
    w = np.full(25, 1 / 25)
    sigma = fund.model.covariance().to_numpy() * fund.model.periods_per_year
    assert problem.objective.breakdown(w)["risk_penalty"] == pytest.approx(-w @ sigma @ w)
