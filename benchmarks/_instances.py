"""Seeded random rebalance instances shared by the benchmarks (invented data, nothing downloaded).

:func:`random_model` builds a factor model Σ = B·F·Bᵀ + diag(d) per trading day: a market factor
with betas near 1 and standardised style exposures, factor volatilities 16 % (market) and 2–7 %
(styles) a year with mild correlations, specific volatilities 18–45 % a year.

:func:`speed_instance` adds a benchmark, current holdings near it, alpha scores, spreads and
commissions, and the scenario of the optimizer's speed brief: fully invested, 0 ≤ w ≤ 5 %,
|active exposure| ≤ 0.1 on every factor, a one-way turnover cap, linear trading costs and a
tracking-error cap, with a utility objective. The limits are also returned as plain numbers so a
benchmark can write the same problem by hand.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from trimtab import FactorModel

PERIODS_PER_YEAR = 252


def random_model(n_assets: int, n_factors: int, seed: int = 0) -> FactorModel:
    """A well-conditioned random factor model with per-day quantities (see the module notes)."""
    rng = np.random.default_rng(seed)
    assets = pd.Index([f"X{i:06d}" for i in range(n_assets)])
    factors = ["market", *[f"style_{k:03d}" for k in range(1, n_factors)]]
    exposures = np.empty((n_assets, n_factors))
    exposures[:, 0] = rng.normal(1.0, 0.3, n_assets)
    exposures[:, 1:] = rng.standard_normal((n_assets, n_factors - 1))
    vols = np.r_[0.16, rng.uniform(0.02, 0.07, n_factors - 1)] / np.sqrt(PERIODS_PER_YEAR)
    root = np.eye(n_factors) + np.tril(rng.normal(scale=0.1, size=(n_factors, n_factors)), -1)
    corr = root @ root.T
    inv = 1.0 / np.sqrt(np.diag(corr))
    cov = corr * np.outer(inv, inv) * np.outer(vols, vols)
    specific = (rng.uniform(0.18, 0.45, n_assets) / np.sqrt(PERIODS_PER_YEAR)) ** 2
    return FactorModel(
        pd.DataFrame(exposures, index=assets, columns=factors),
        pd.DataFrame(cov, index=factors, columns=factors),
        pd.Series(specific, index=assets),
        periods_per_year=PERIODS_PER_YEAR,
    )


@dataclass(frozen=True, eq=False)
class SpeedInstance:
    """One benchmark problem: the model, the book, the scenario and its limits as numbers."""

    model: FactorModel
    holdings: pd.Series
    benchmark: pd.Series
    alpha: pd.Series
    attributes: pd.DataFrame
    risk_aversion: float
    cost_aversion: float
    weight_max: float
    exposure_max: float
    turnover_max: float
    tracking_error_max: float

    @property
    def linear_cost(self) -> np.ndarray:
        """Cost per unit traded, fraction of NAV: spread/2 + commission."""
        return 0.5 * self.attributes["spread"].to_numpy() + self.attributes["commission"].to_numpy()

    def scenario(self, **limits: float) -> dict[str, Any]:
        """The scenario mapping; ``tracking_error_max=``, ``turnover_max=`` override the limits."""
        te = limits.get("tracking_error_max", self.tracking_error_max)
        turnover = limits.get("turnover_max", self.turnover_max)
        return {
            "objective": {
                "maximize": "utility",
                "risk_aversion": self.risk_aversion,
                "cost_aversion": self.cost_aversion,
                "costs": {"spread": "spread", "commission": "commission"},
            },
            "constraints": {
                "fully_invested": True,
                "long_only": True,
                "weight": {"min": 0.0, "max": self.weight_max},
                "factor_exposure": {"active": True, "bounds": {"default": [-self.exposure_max, self.exposure_max]}},
                "turnover": {"max": turnover},
                "tracking_error": {"max": te},
            },
        }

    def book(self) -> dict[str, Any]:
        """Keyword arguments for ``rebalance`` / ``build_problem``."""
        return {"holdings": self.holdings, "benchmark": self.benchmark, "alpha": self.alpha,
                "attributes": self.attributes}

    def arrays(self) -> dict[str, np.ndarray]:
        """B, L (F = L·Lᵀ), d, b, w0, α and the linear cost rate as float64 arrays in model order."""
        m = self.model
        return {
            "B": m.exposures.to_numpy(dtype=np.float64),
            "L": np.asarray(m.factor_sqrt, dtype=np.float64),
            "d": m.specific_variance.to_numpy(dtype=np.float64),
            "b": self.benchmark.reindex(m.assets).to_numpy(dtype=np.float64),
            "w0": self.holdings.reindex(m.assets).to_numpy(dtype=np.float64),
            "alpha": self.alpha.reindex(m.assets).to_numpy(dtype=np.float64),
            "cost": self.linear_cost,
        }


def random_book(model: FactorModel, seed: int, weight_max: float = 0.05) -> tuple[pd.Series, pd.Series, pd.Series]:
    """(benchmark, holdings, alpha): a skewed cap-weight-like benchmark (log-normal sizes, capped at
    weight_max / 2 before renormalising), holdings as the benchmark tilted by ±50 % noise (fully
    invested, capped at weight_max before renormalising), alpha with 2 % a year dispersion."""
    rng = np.random.default_rng(seed)
    n = model.n_assets
    raw = rng.lognormal(0.0, 1.0, n)
    bench = raw / raw.sum()
    bench = np.minimum(bench, weight_max / 2)
    bench /= bench.sum()
    tilt = bench * rng.uniform(0.5, 1.5, n)
    holdings = np.minimum(tilt / tilt.sum(), weight_max)
    holdings /= holdings.sum()
    alpha = rng.normal(0.0, 0.02, n)
    index = model.assets
    return pd.Series(bench, index=index), pd.Series(holdings, index=index), pd.Series(alpha, index=index)


def speed_instance(n_assets: int, n_factors: int, seed: int = 0) -> SpeedInstance:
    """The speed-brief instance at size N × K (deterministic for a given seed)."""
    model = random_model(n_assets, n_factors, seed)
    bench, holdings, alpha = random_book(model, seed + 1)
    rng = np.random.default_rng(seed + 2)
    attributes = pd.DataFrame(
        {"spread": rng.uniform(5e-4, 3e-3, n_assets), "commission": np.full(n_assets, 2e-4)},
        index=model.assets,
    )
    return SpeedInstance(
        model=model, holdings=holdings, benchmark=bench, alpha=alpha, attributes=attributes,
        risk_aversion=1.0, cost_aversion=1.0, weight_max=0.05, exposure_max=0.1,
        turnover_max=0.15, tracking_error_max=0.02,
    )
