"""Module-level task functions for the executor tests (pool processes and Dask workers import them by name)."""

from __future__ import annotations

import numpy as np

from tests.conftest import random_model
from trimtab.errors import InputError


def portfolio_risk(seed: int) -> dict[str, float]:
    """The per-period variance of a seeded random portfolio on a seeded random model, two ways."""
    if seed < 0:
        raise InputError(f"portfolio_risk: seed must be ≥ 0, got {seed}")
    model = random_model(n_assets=30, n_factors=4, seed=seed)
    w = np.random.default_rng(seed + 1000).dirichlet(np.ones(model.n_assets))
    return {"variance": float(model.variance(w)), "dense": float(w @ model.covariance() @ w)}
