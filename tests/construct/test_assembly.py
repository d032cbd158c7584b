"""Box merging: the tightest per-asset limit is enforced once and receives the dual."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import build_problem

from .conftest import make_fund


def test_tightest_box_row_takes_the_dual():
    fund = make_fund(30, 3, seed=101)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 2},
                "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.04},
                                "trade": {"min": -0.5, "max": 0.01}}}
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    outcome = problem.solve_convex()
    rows = {r.name: r for r in outcome.rows}
    w0 = fund.holdings.to_numpy()
    weight_up = outcome.duals[id(rows["weight"])][0]
    trade_up = outcome.duals[id(rows["trade"])][0]
    tight_trade = w0 + 0.01 < 0.04
    # each asset's upper dual goes to the row whose limit is the tighter one, never to both
    assert np.all(weight_up[tight_trade] == 0.0)
    assert np.all(trade_up[~tight_trade] == 0.0)
    assert (weight_up + trade_up).max() > 0
    # the merged bound is what the solver enforced
    w = outcome.weights
    assert np.all(w <= np.minimum(0.04, w0 + 0.01) + 1e-9)


def test_no_trade_becomes_an_equality():
    fund = make_fund(20, 3, seed=102)
    fixed = list(fund.model.assets[:4])
    problem = build_problem(fund.model, {"objective": {"minimize": "active_risk"},
                                         "constraints": {"fully_invested": True, "no_trade": fixed}},
                            holdings=fund.holdings, benchmark=fund.benchmark)
    outcome = problem.solve_convex()
    np.testing.assert_allclose(outcome.weights[:4], fund.holdings.to_numpy()[:4], atol=1e-10)


def test_soft_limit_is_paid_for_not_enforced():
    fund = make_fund(30, 3, seed=103, drift=0.6)
    base = {"fully_invested": True, "long_only": True}
    hard = {"objective": {"minimize": "active_risk"}, "constraints": {**base, "turnover": {"max": 0.02}}}
    soft = {"objective": {"minimize": "active_risk"},
            "constraints": {**base, "turnover": {"max": 0.02, "soft": {"penalty": 1e-4}}}}
    r_hard = build_problem(fund.model, hard, holdings=fund.holdings, benchmark=fund.benchmark).solve()
    r_soft = build_problem(fund.model, soft, holdings=fund.holdings, benchmark=fund.benchmark).solve()
    assert r_hard.turnover <= 0.02 + 1e-7
    assert r_soft.turnover > 0.02  # the penalty is cheap, so the limit is exceeded and paid for
    breach = r_soft.turnover - 0.02
    assert abs(r_soft.objective["penalties"] + 1e-4 * breach) < 1e-12
    row = r_soft.constraints.set_index("name").loc["turnover"]
    assert bool(row["soft"]) and row["slack"] < 0
    # the shadow price of a soft limit is at most its penalty
    assert row["shadow_price"] <= 1e-4 + 1e-9


def test_soft_budget_switch_form():
    fund = make_fund(20, 3, seed=104)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": {"soft": {"penalty": 10.0}}, "long_only": True,
                                "weight": {"max": 0.04}}}
    result = build_problem(fund.model, scenario, **fund.kwargs()).solve()
    # 20 assets at most 4% hold at most 80%: the soft budget gives way instead of failing, and its
    # penalty (10 per unit short of 1) pushes the book to that 80%
    assert result.weights.sum() == pytest.approx(0.8, abs=1e-7)
    row = result.constraints.set_index("name").loc["fully_invested"]
    assert bool(row["soft"]) and row["value"] == pytest.approx(0.8, abs=1e-7)
