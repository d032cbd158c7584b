"""Infeasible combinations: the error and its relaxation table name the conflicting limits."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import rebalance
from trimtab.errors import InfeasibleError

from .conftest import make_fund


def infeasible(fund, constraints, objective=None):
    scenario = {"objective": objective or {"minimize": "active_risk"}, "constraints": constraints}
    with pytest.raises(InfeasibleError) as caught:
        rebalance(fund.model, scenario, **fund.kwargs())
    table = caught.value.relaxation
    assert list(table.columns) == ["constraint", "kind", "side", "limit", "needed", "relax_by", "scale", "unit"]
    assert (table["relax_by"] > 0).all()
    return caught.value, table


def test_tracking_error_against_turnover():
    fund = make_fund(40, 4, seed=3, drift=0.6)
    err, table = infeasible(fund, {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.002},
                                   "turnover": {"max": 0.01}})
    assert set(table["constraint"]) <= {"tracking_error", "turnover"} and len(table) >= 1
    assert "infeasible: these limits conflict:" in str(err)
    assert any(name in str(err) for name in table["constraint"])


def test_budget_against_weight_caps():
    # 40 assets at most 1% each cannot hold 100%: one of them must move by 60 points in total
    fund = make_fund(40, 4, seed=4)
    err, table = infeasible(fund, {"fully_invested": True, "weight": {"max": 0.01}})
    kinds = set(table["kind"])
    assert kinds <= {"budget", "weight"} and kinds
    relaxed = table.groupby("kind")["relax_by"].sum()
    # moving the budget to 0.4 or every cap up by 0.015 costs the same elastic weight: 0.6 in total
    assert relaxed.sum() == pytest.approx(0.6, abs=1e-6)


def test_must_hold_against_no_buy():
    fund = make_fund(30, 3, seed=5)
    asset = fund.holdings.idxmin()
    err, table = infeasible(fund, {"no_buy": [asset], "must_hold": {"assets": [asset], "min_weight": 0.2}})
    assert set(table["constraint"]) <= {f"no_buy[{asset}]", f"must_hold[{asset}]"}
    assert table["relax_by"].sum() == pytest.approx(0.2 - fund.holdings[asset], abs=1e-6)


def test_factor_neutrality_against_long_only_budget():
    # every asset has a positive market exposure (f0 ≈ 1), so Σw = 1 with w ≥ 0 cannot have f0 exposure 0
    fund = make_fund(30, 3, seed=6)
    assert (fund.model.exposures["f0"] > 0).all()
    err, table = infeasible(fund, {"fully_invested": True, "long_only": True,
                                   "factor_exposure": {"bounds": {"f0": [0, 0]}}})
    assert set(table["kind"]) & {"factor_exposure", "budget", "long_only"}
    assert np.isfinite(table["needed"]).all()


def test_group_band_against_budget():
    fund = make_fund(40, 4, seed=7)
    err, table = infeasible(fund, {"fully_invested": True, "long_only": True,
                                   "group": {"by": "industry", "bounds": {"default": [0.0, 0.1]}}})
    assert {"group", "budget"} & set(table["kind"])
    assert str(err).count("→") >= 1


def test_soft_limits_are_not_reported_as_conflicts():
    fund = make_fund(40, 4, seed=8, drift=0.6)
    err, table = infeasible(fund, {"fully_invested": True, "long_only": True, "weight": {"max": 0.01},
                                   "turnover": {"max": 0.01, "soft": {"penalty": 1.0}}})
    assert "turnover" not in set(table["constraint"])
    assert set(table["kind"]) <= {"budget", "weight", "long_only"}
