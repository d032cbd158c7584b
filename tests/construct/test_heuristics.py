"""Post-solve heuristics: names, minimum trade size, round lots; each result re-verified."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import rebalance
from trimtab.construct._heuristics import TRADE_TOL, rounded_weights

from .conftest import make_fund

BASE = {"fully_invested": True, "long_only": True, "weight": {"max": 0.08}, "tracking_error": {"max": 0.03}}


def solve(fund, extra, objective=None):
    scenario = {"objective": objective or {"maximize": "utility", "risk_aversion": 5}, "constraints": {**BASE, **extra}}
    return rebalance(fund.model, scenario, **fund.kwargs())


def test_max_names_keeps_the_largest_and_reverifies():
    fund = make_fund(60, 4, seed=61)
    free = solve(fund, {})
    assert free.n_names > 25
    # 25 names cannot track the benchmark within 3%: the cap is loosened for this test
    result = solve(fund, {"max_names": 25, "tracking_error": {"max": 0.15}})
    assert result.n_names <= 25
    assert result.verification["ok"].all()
    row = result.verification.set_index("name").loc["max_names"]
    assert row["value"] <= 25
    assert any("max_names" in note for note in result.provenance["notes"])


def test_max_names_never_drops_must_hold():
    fund = make_fund(60, 4, seed=62)
    keep = list(fund.model.assets[:3])
    result = solve(fund, {"max_names": 20, "tracking_error": {"max": 0.2},
                          "must_hold": {"assets": keep, "min_weight": 0.001}})
    assert (result.weights[keep] >= 0.001 - 1e-9).all()
    assert result.n_names <= 20


def test_min_trade_leaves_no_small_trades():
    fund = make_fund(60, 4, seed=63)
    m = 0.004
    result = solve(fund, {"min_trade": {"weight": m}, "turnover": {"max": 0.3}})
    size = result.trades["trade"].abs()
    assert not ((size > TRADE_TOL) & (size < m - 1e-9)).any()
    assert result.verification["ok"].all()


def test_round_lots_trades_whole_lots():
    fund = make_fund(60, 4, seed=64)
    result = solve(fund, {"round_lots": True})
    trades = result.trades
    lots = trades["shares"] / fund.attributes["lot"]
    exits = (result.weights.abs() <= 1e-8) & (result.initial_weights.reindex(result.weights.index).abs() > 1e-8)
    np.testing.assert_allclose(lots[~exits], np.round(lots[~exits]), atol=1e-6)
    assert result.status == "optimal (rounded to lots)"
    assert "excess" in result.verification.columns  # against the limit itself plus its tolerance (issue #19)
    assert result.verification["ok"].all()


def test_rounded_weights_rule():
    w0 = np.array([0.10, 0.10, 0.05, 0.02])
    target = np.array([0.1034, 0.0, 0.05, 0.0271])
    lot = np.array([0.01, 0.01, 0.01, 0.01])
    lo = np.array([0.0, 0.0, 0.0, 0.0])
    hi = np.array([1.0, 1.0, 1.0, 0.025])
    w = rounded_weights(w0, target, lot, lo, hi)
    # nearest lot; an exit sells all; no trade stays; the ceiling 0.03 breaks hi so the floor is taken
    np.testing.assert_allclose(w, [0.10, 0.0, 0.05, 0.02])
    w = rounded_weights(w0, np.array([0.1061, 0.1, 0.05, 0.02]), lot, lo, np.ones(4))
    assert w[0] == pytest.approx(0.11)


def test_max_names_that_cannot_hold_the_limits_is_reported_as_infeasible():
    from trimtab.errors import InfeasibleError

    fund = make_fund(60, 4, seed=61)
    with pytest.raises(InfeasibleError, match=r"these limits cannot all hold: .*constraints\.max_names") as caught:
        solve(fund, {"max_names": 25})
    assert "constraints.max_names" in caught.value.conflict
