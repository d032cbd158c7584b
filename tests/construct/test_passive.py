"""Passive breaches (issue #12): a position the market carried beyond its cap moves back as far as
the trading limits allow. The rule follows the common treatment of passive breaches (UCITS Directive
2009/65/EC, Art. 57(2): remedy as a priority objective of sales); the numbers below are closed forms."""

from __future__ import annotations

import pandas as pd
import pytest

from trimtab.construct import rebalance
from trimtab.errors import InfeasibleError

from .conftest import Fund, make_fund


def drifted_fund(excess: float) -> Fund:
    fund = make_fund(30, 3, seed=11)
    holdings = fund.holdings.copy()
    holdings.iloc[0] = 0.05 + excess  # carried above a 5% cap by the market
    holdings.iloc[1:] *= (1.0 - holdings.iloc[0]) / holdings.iloc[1:].sum()
    return Fund(fund.model, fund.benchmark, holdings, fund.alpha, fund.attributes)


SCENARIO = {"objective": {"maximize": "alpha"},
            "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.05},
                            "trade": {"min": -0.02, "max": 0.02}}}


def test_an_unreachable_cap_is_approached_as_far_as_trading_allows() -> None:
    fund = drifted_fund(0.05)  # 10% held, at most 2 points can be sold
    result = rebalance(fund.model, SCENARIO, **fund.kwargs())
    asset = fund.holdings.index[0]
    # the farthest the trade limit reaches: 10% − 2% = 8% (closed form), never more than held
    assert result.weights[asset] == pytest.approx(0.08, abs=1e-7)
    notes = [n for n in result.provenance["notes"] if n.startswith("passive breach")]
    assert notes == [f"passive breach: constraints.weight.max[{asset}] is 10.0000% after market moves against a limit "
                     "of 5.0000%; this rebalance trades it to 8.0000%, as far as the trading limits allow"]
    # every other asset keeps the 5% cap as written
    assert (result.weights.drop(asset) <= 0.05 + 1e-7).all()
    # the desk sees it: a warning of its own kind (stderr, result.json, the report)
    (warning,) = [w for w in result.warnings if w.kind == "passive_breach"]
    assert warning.message.startswith(f"constraints.weight.max[{asset}] is 10.0000% after market moves")


def test_a_reachable_cap_holds_as_written() -> None:
    fund = drifted_fund(0.015)  # 6.5% held, 2 points can be sold: back under 5%
    result = rebalance(fund.model, SCENARIO, **fund.kwargs())
    assert result.weights.iloc[0] <= 0.05 + 1e-7
    assert not [n for n in result.provenance["notes"] if n.startswith("passive breach")]


def test_without_trading_limits_the_cap_holds_or_conflicts() -> None:
    fund = drifted_fund(0.05)
    scenario = {**SCENARIO, "constraints": {k: v for k, v in SCENARIO["constraints"].items() if k != "trade"}}
    result = rebalance(fund.model, scenario, **fund.kwargs())
    assert result.weights.iloc[0] <= 0.05 + 1e-7
    # a turnover cap is not a per-asset trading limit: the cap is not moved, the limits conflict
    tight = {**scenario, "constraints": {**scenario["constraints"], "turnover": {"max": 0.01}}}
    with pytest.raises(InfeasibleError) as caught:
        rebalance(fund.model, tight, **fund.kwargs())
    assert set(caught.value.conflict) == {"constraints.weight.max", "constraints.turnover.max"}


def test_a_position_is_never_pushed_further_out() -> None:
    fund = drifted_fund(0.05)
    alpha = pd.Series(0.0, index=fund.model.assets)
    alpha.iloc[0] = 1.0  # the optimizer would like to buy more of the breaching asset
    result = rebalance(fund.model, SCENARIO, **{**fund.kwargs(), "alpha": alpha})
    assert result.weights.iloc[0] == pytest.approx(0.08, abs=1e-7)
