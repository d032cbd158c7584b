"""Shared fixtures: small random factor models whose dense Σ numpy can handle."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel


def random_model(n_assets: int = 40, n_factors: int = 5, seed: int = 0, periods_per_year: float = 252) -> FactorModel:
    """A random model with a well-conditioned PD F and specific variances of daily-return size."""
    rng = np.random.default_rng(seed)
    assets = [f"A{i:04d}" for i in range(n_assets)]
    factors = [f"f{k}" for k in range(n_factors)]
    B = pd.DataFrame(rng.normal(size=(n_assets, n_factors)), index=assets, columns=factors)
    B.iloc[:, 0] = 1.0 + 0.3 * rng.normal(size=n_assets)
    A = rng.normal(size=(n_factors, n_factors))
    F = pd.DataFrame((A @ A.T + n_factors * np.eye(n_factors)) * 1e-5, index=factors, columns=factors)
    d = pd.Series(rng.uniform(1e-4, 9e-4, size=n_assets), index=assets)
    return FactorModel(B, F, d, periods_per_year=periods_per_year)


@pytest.fixture
def small_model() -> FactorModel:
    return random_model()


def french_monthly() -> tuple[pd.DataFrame, pd.DataFrame]:
    """linearmodels' monthly French data: the 30 portfolios' excess returns and MktRF, SMB, HML, Mom."""
    from linearmodels.datasets import french

    data = french.load().set_index("dates")
    portfolios = data.columns[5:]
    return data[portfolios].sub(data["RF"], axis=0), data[["MktRF", "SMB", "HML", "Mom"]]
