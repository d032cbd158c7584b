"""The demo's separately managed accounts: invented books that follow the demo fund's strategy.

Each account holds a random part of the fund's names (60% to 100% of them) at the fund's weights
scaled by a lognormal factor (σ = 0.3), the way client books drift apart after years of their own
flows, and keeps 1% of its value in cash. NAVs are log-uniform between 1m and 30m. About one account
in ten has a restricted list (three of its names, sold to zero), one in seven a tighter tracking-error
budget (2.5%), one in ten a lower turnover cap (15%). Invented data for the demo only.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

#: Accounts the demo writes.
N_DEMO_ACCOUNTS = 200
CASH_FRACTION = 0.01


def demo_accounts(fund: Any, n_accounts: int = N_DEMO_ACCOUNTS, seed: int = 11) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The accounts table (account, nav, cash, exclude, tracking_error.max, turnover.max) and the
    long holdings table (account, asset, shares) of ``n_accounts`` invented accounts."""
    rng = np.random.default_rng(seed)
    base = fund.holdings_weights
    names = base.index.to_numpy()
    price = fund.attributes["price"]
    rows, holdings = [], []
    for k in range(n_accounts):
        name = f"SMA-{k + 1:04d}"
        nav = float(np.exp(rng.uniform(np.log(1e6), np.log(3e7))))
        keep = rng.random(len(names)) < rng.uniform(0.6, 1.0)
        held = names[keep]
        weights = base[held].to_numpy() * np.exp(0.3 * rng.normal(size=len(held)))
        weights = weights / weights.sum() * (1.0 - CASH_FRACTION)
        shares = np.floor(weights * nav / price[held].to_numpy())
        invested = float((shares * price[held].to_numpy()).sum())
        row: dict[str, Any] = {"account": name, "nav": round(invested + CASH_FRACTION * nav, 2),
                               "cash": round(CASH_FRACTION * nav, 2), "exclude": "",
                               "tracking_error.max": np.nan, "turnover.max": np.nan}
        draw = rng.random(3)
        if draw[0] < 0.10:
            row["exclude"] = ";".join(sorted(rng.choice(held, size=3, replace=False)))
        if draw[1] < 1 / 7:
            row["tracking_error.max"] = 0.025
        if draw[2] < 0.10:
            row["turnover.max"] = 0.15
        rows.append(row)
        holdings.append(pd.DataFrame({"account": name, "asset": held, "shares": shares.astype(np.int64)})
                        .query("shares > 0"))
    return pd.DataFrame(rows), pd.concat(holdings, ignore_index=True)




def demo_account_tables(fund: Any) -> dict[str, pd.DataFrame]:
    """The demo's accounts as the files ``trimtab demo`` writes: file stem → table."""
    accounts, holdings = demo_accounts(fund)
    return {"accounts": accounts, "account_holdings": holdings}
