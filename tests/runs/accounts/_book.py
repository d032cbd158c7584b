"""Invented books for the many-account tests: a random factor model, alpha, benchmark, prices, ADV."""

from __future__ import annotations

import numpy as np
import pandas as pd

from tests.conftest import random_model

MAX_WEIGHT = 0.05
SCENARIO = {
    "objective": {"maximize": "utility", "risk_aversion": 20.0, "costs": {"spread": "spread"}},
    "constraints": {
        "fully_invested": True,
        "long_only": True,
        "weight": {"min": 0.0, "max": MAX_WEIGHT},
        "tracking_error": {"max": 0.08},
        "turnover": {"max": 0.5},
    },
}


def market(n_assets: int, seed: int = 3, n_factors: int = 6):
    """Model, alpha, benchmark and attributes (price, adv in shares a day, spread) for n assets."""
    model = random_model(n_assets=n_assets, n_factors=n_factors, seed=seed)
    rng = np.random.default_rng(seed + 100)
    assets = model.assets
    cap = np.exp(rng.normal(np.log(5e9), 1.0, n_assets))
    bench = pd.Series(cap / cap.sum(), index=assets)
    alpha = pd.Series(rng.normal(scale=0.02, size=n_assets), index=assets)
    price = np.exp(rng.normal(np.log(40.0), 0.7, n_assets)).round(2)
    adv = np.round(cap * 0.004 / price, -2).clip(100.0, None)
    attributes = pd.DataFrame({"price": price, "adv": adv, "spread": np.full(n_assets, 0.001)}, index=assets)
    return model, alpha, bench, attributes


def accounts(model, n_accounts: int, names_per_account: int, seed: int = 9, nav=(2e6, 2e7)) -> dict:
    """Accounts holding a random subset of names, fully invested, each weight under MAX_WEIGHT."""
    rng = np.random.default_rng(seed)
    out = {}
    for k in range(n_accounts):
        held = rng.choice(model.n_assets, size=names_per_account, replace=False)
        w = rng.dirichlet(np.full(names_per_account, 4.0))
        for _ in range(20):  # clip and spread the excess until every weight is under the cap
            w = np.minimum(w, 0.9 * MAX_WEIGHT)
            w = w / w.sum()
        out[f"acct{k:04d}"] = {
            "holdings": pd.Series(w, index=model.assets[held]),
            "nav": float(np.exp(rng.uniform(np.log(nav[0]), np.log(nav[1])))),
        }
    return out
