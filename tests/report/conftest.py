"""A stand-in for RebalanceResult with the agreed fields, built from invented data (tests only)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel
from trimtab.attribution import RiskAttribution, attribute

from ..conftest import random_model


@dataclass(frozen=True, eq=False)
class StandInResult:
    """The agreed fields of trimtab.construct.RebalanceResult, nothing more."""

    weights: pd.Series
    initial_weights: pd.Series
    benchmark: pd.Series | None
    trades: pd.DataFrame
    constraints: pd.DataFrame
    objective: Mapping[str, float]
    status: str
    solver: str
    iterations: int
    solve_time: float
    build_time: float
    verification: pd.DataFrame
    pre_trade: RiskAttribution | None
    post_trade: RiskAttribution | None
    provenance: dict[str, Any] = field(default_factory=dict)
    scenario: Mapping[str, Any] = field(default_factory=dict)

    def summary(self) -> str:
        return f"{self.status}: {len(self.trades)} trades"


def stand_in(model: FactorModel, seed: int = 0, te_cap: float = 0.03, shrink: float = 0.4) -> StandInResult:
    """Holdings drift from a benchmark; the 'rebalance' moves part of the way back (no optimizer)."""
    rng = np.random.default_rng(seed)
    assets = model.assets
    benchmark = pd.Series(rng.dirichlet(np.full(len(assets), 5.0)), index=assets)
    initial = pd.Series(rng.dirichlet(np.full(len(assets), 1.0)), index=assets)
    target = benchmark + shrink * (initial - benchmark)
    trade = target - initial
    price = pd.Series(rng.uniform(10, 200, len(assets)), index=assets)
    nav = 50_000_000.0
    trades = pd.DataFrame(
        {
            "initial_weight": initial,
            "target_weight": target,
            "trade": trade,
            "shares": (trade * nav / price).round(),
            "notional": trade * nav,
            "adv_fraction": (trade.abs() * nav / (price * 1e6)),
            "cost": trade.abs() * 0.0005,
        }
    )
    trades.index.name = "asset"
    sectors = ["energy", "health", "retail", "banks", "software"]
    attributes = pd.DataFrame(
        {
            "sector": [sectors[i % 5] for i in range(len(assets))],
            "country": ["north" if i % 3 else "south" for i in range(len(assets))],
            "price": price,
        },
        index=assets,
    )
    pre = attribute(model, initial, benchmark, attributes=attributes)
    post = attribute(model, target, benchmark, attributes=attributes)
    constraints = pd.DataFrame(
        {
            "name": ["fully_invested", "tracking_error", "turnover", "weight_max"],
            "kind": ["budget", "tracking_error", "turnover", "weight"],
            "value": [1.0, post.risk, 0.5 * trade.abs().sum(), target.max()],
            "lower": [1.0, np.nan, np.nan, np.nan],
            "upper": [1.0, te_cap, 0.6, 0.2],
            "slack": [0.0, te_cap - post.risk, 0.6 - 0.5 * trade.abs().sum(), 0.2 - target.max()],
            "binding": [True, False, False, False],
            "shadow_price": [0.01, 0.0, 0.0, 0.0],
            "unit": ["weight", "annualised volatility", "weight", "weight"],
            "soft": [False, False, True, False],
        }
    )
    verification = pd.DataFrame({"name": constraints["name"], "breach": 0.0, "ok": True})
    return StandInResult(
        weights=target,
        initial_weights=initial,
        benchmark=benchmark,
        trades=trades,
        constraints=constraints,
        objective={"alpha": 0.012, "risk_penalty": -0.004, "costs": -0.0003, "penalties": 0.0, "total": 0.0077},
        status="optimal",
        solver="CLARABEL",
        iterations=17,
        solve_time=0.042,
        build_time=0.011,
        verification=verification,
        pre_trade=pre,
        post_trade=post,
        provenance={"scenario_hash": "ab12cd34", "model": "invented demo model", "version": "test"},
        scenario={"objective": {"maximize": "utility", "risk_aversion": 10},
                  "constraints": {"tracking_error": {"max": te_cap},
                                  "group": [{"by": "country", "active": True, "bounds": {"default": [-0.1, 0.1]}}]}},
    )


@pytest.fixture
def report_model() -> FactorModel:
    base = random_model(n_assets=60, n_factors=6, seed=5)
    groups = {"f0": "market", "f1": "style", "f2": "style", "f3": "industry", "f4": "industry", "f5": "industry"}
    return FactorModel(base.exposures, base.factor_covariance, base.specific_variance, factor_groups=groups)


@pytest.fixture
def result(report_model: FactorModel) -> StandInResult:
    return stand_in(report_model)
