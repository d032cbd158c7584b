"""A portfolio manager's hedge overlay on an invented monthly fund, with the Python API.

Sixty invented stocks and three factors from the academic literature (market, size, value) are
simulated for ten years of months and a time-series model is fitted on them. The book is tilted to
small caps; the manager neutralises its active market and size exposures with

- an index future on the benchmark (basket weights = the benchmark),
- a small-cap basket (the twenty stocks with the most negative size exposure, equal weights),
- and, as a check, a "contract with no published holdings" known only by its monthly returns,
  whose exposures trimtab estimates by regression on the model's factor history.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

import trimtab

rng = np.random.default_rng(23)
months = pd.date_range("2015-01-31", periods=120, freq="ME")
assets = [f"Stock {i:02d}" for i in range(60)]
factors = pd.DataFrame(rng.multivariate_normal([0.006, 0.001, 0.002], np.diag([0.045, 0.02, 0.02]) ** 2, 120),
                       index=months, columns=["market", "size", "value"])
B = np.column_stack([rng.uniform(0.7, 1.3, 60), rng.normal(0, 0.6, 60), rng.normal(0, 0.6, 60)])
returns = pd.DataFrame(factors.to_numpy() @ B.T + rng.normal(0, 0.04, (120, 60)), index=months, columns=assets)
model = trimtab.fit_time_series(returns, factors)

benchmark = pd.Series(1.0 / 60, index=assets)
small = model.exposures["size"].nsmallest(20).index
book = pd.Series(0.5 * rng.dirichlet(np.full(60, 2.0)), index=assets)
picks = model.exposures["size"].nsmallest(25).index  # half the fund in small names: a size bet
book[picks] += 0.5 * rng.dirichlet(np.full(25, 2.0))
small_caps = pd.Series(1.0 / 20, index=small)

instruments = {"index_future": benchmark, "small_cap_basket": small_caps}
contracts = pd.DataFrame({"price": [4210.0, 100.0], "multiplier": [50, 1000], "cost": [2.5, 30.0]},
                         index=["index_future", "small_cap_basket"])
result = trimtab.overlay(model, book, instruments, benchmark=benchmark, targets={"market": 0.0, "size": 0.0},
                         contracts=contracts, nav=250e6)
print(result)

# An instrument known only by its returns: here the benchmark's own return history with a little noise,
# so its fitted exposures should be close to the index future's.
future_returns = returns @ benchmark + rng.normal(0, 0.002, len(months))
fitted = trimtab.overlay(model, book, {"future": future_returns, "small_cap_basket": small_caps}, benchmark=benchmark,
                         targets={"market": 0.0, "size": 0.0})
print()
print(fitted.instruments.round(3))
print(fitted.fit.round(4))
