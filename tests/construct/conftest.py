"""Invented funds for the optimizer tests: a random model, benchmark, drifted holdings, alpha, attributes."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel

from ..conftest import random_model

INDUSTRIES = ["alder", "birch", "cedar", "damson", "elm"]


@dataclass
class Fund:
    model: FactorModel
    benchmark: pd.Series
    holdings: pd.Series
    alpha: pd.Series
    attributes: pd.DataFrame
    nav: float = 1e8

    def kwargs(self) -> dict:
        return {"holdings": self.holdings, "benchmark": self.benchmark, "alpha": self.alpha,
                "attributes": self.attributes, "nav": self.nav}


def make_fund(n_assets: int = 40, n_factors: int = 4, seed: int = 0, drift: float = 0.2) -> Fund:
    model = random_model(n_assets, n_factors, seed=seed)
    rng = np.random.default_rng(seed + 100)
    assets = model.assets
    bench = pd.Series(rng.dirichlet(np.full(n_assets, 3.0)), index=assets)
    other = pd.Series(rng.dirichlet(np.full(n_assets, 1.0)), index=assets)
    holdings = (1 - drift) * bench + drift * other
    alpha = pd.Series(rng.normal(0.0, 0.03, n_assets), index=assets)
    attributes = pd.DataFrame(
        {
            "industry": rng.choice(INDUSTRIES, n_assets),
            "price": rng.uniform(10, 100, n_assets),
            "adv": rng.uniform(2e4, 1e6, n_assets),
            "lot": 100.0,
            "spread": rng.uniform(5e-4, 2e-3, n_assets),
            "commission": 3e-4,
            "impact": rng.uniform(0.005, 0.02, n_assets),
        },
        index=assets,
    )
    return Fund(model, bench, holdings, alpha, attributes)


@pytest.fixture
def fund() -> Fund:
    return make_fund()
