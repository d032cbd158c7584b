"""A risk officer's three questions on an invented monthly fund, with the Python API.

Sixty invented stocks and three factors from the academic literature (market, size, value) are
simulated for ten years of months; a time-series model is fitted on them. Then:

1. stress: what a 10% market fall, and a value rebound, do to the book against its benchmark;
2. replay: the worst quarters of the model's own history applied to today's exposures;
3. a stress limit: rebalance to the alpha with the active loss in the market fall capped at 0.5%;
4. ex-post attribution: last year's active return, factor by factor, linked over the months.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

import trimtab

rng = np.random.default_rng(11)
months = pd.date_range("2015-01-31", periods=120, freq="ME")
assets = [f"Stock {i:02d}" for i in range(60)]
factors = pd.DataFrame(rng.multivariate_normal([0.006, 0.001, 0.002], np.diag([0.045, 0.02, 0.02]) ** 2, 120),
                       index=months, columns=["market", "size", "value"])
B = np.column_stack([rng.uniform(0.7, 1.3, 60), rng.normal(0, 0.6, 60), rng.normal(0, 0.6, 60)])
returns = pd.DataFrame(factors.to_numpy() @ B.T + rng.normal(0, 0.04, (120, 60)), index=months, columns=assets)
model = trimtab.fit_time_series(returns, factors)

benchmark = pd.Series(1.0 / 60, index=assets)
book = pd.Series(rng.dirichlet(np.full(60, 2.0)), index=assets)
shocks = {"market_down_10": {"market": -0.10}, "value_rebound": {"value": 0.04}}

print(trimtab.stress(model, book, shocks, benchmark=benchmark))
print()
print(trimtab.replay(model, book, benchmark=benchmark, length=3, k=3))
print()

alpha = pd.Series(rng.normal(0.0, 0.02, 60), index=assets)
scenario = {
    "objective": {"maximize": "alpha"},
    "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.04},
                    "stress_loss": {"shocks": {"market_down_10": {"factors": {"market": -0.10}}}, "max": 0.005}},
}
result = trimtab.rebalance(model, scenario, holdings=book, benchmark=benchmark, alpha=alpha)
print(result.stress[["pre_active", "post_active", "limit"]].to_string(float_format=lambda v: f"{v:.2%}"))
print(f"solved by {result.solver}")
print()

last_year = months[-12:]
attribution = trimtab.attribute_returns(model, book, returns.loc[last_year], benchmark=benchmark)
print(attribution)
assert abs(attribution.linked.drop("total").sum() - attribution.linked["total"]) < 1e-12
