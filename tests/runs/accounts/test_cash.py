"""The summary's cash after trades and costs, recomputed from the written orders.

Cash accounting identity (common practice): cash after = cash before − buys + sells − costs, the
same figure a single rebalance's trade list reports (construct/_orders.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

import trimtab
from tests.runs.accounts._book import SCENARIO, accounts, market


def test_cash_after_is_after_trades_and_costs() -> None:
    model, alpha, bench, attributes = market(60)
    books = accounts(model, 4, 20)
    name = next(iter(books))
    books[name] = {**books[name], "holdings": books[name]["holdings"] * 0.97}  # 3% in cash before
    result = trimtab.rebalance_accounts(model, SCENARIO, books, alpha=alpha, benchmark=bench, attributes=attributes,
                                        aggregate={"impact": 0.1})
    orders = result.orders
    assert (orders["cost"] > 0).any()  # costs are charged: the check bites
    for k, body in books.items():
        mine = orders[orders["account"] == k]
        signed = np.where(mine["side"] == "buy", -1.0, 1.0) * mine["notional"]
        before = body["nav"] * (1.0 - float(pd.Series(body["holdings"]).sum()))
        expected = before + float(signed.sum()) - float(mine["cost"].sum())
        assert abs(result.summary.loc[k, "cash_after"] - expected) < 1e-6 * body["nav"], k
