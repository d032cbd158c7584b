"""The demo's hedge instruments: an index future on the demo benchmark and two style baskets.

Invented like the rest of the demo: the contract names, prices, multipliers and costs are made up.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

#: Invented contract terms: price per unit, units per contract, cost per contract (currency).
DEMO_CONTRACTS = pd.DataFrame(
    {"price": [4210.0, 100.0, 100.0], "multiplier": [50.0, 1000.0, 1000.0], "cost": [2.5, 30.0, 30.0]},
    index=pd.Index(["index_future", "small_cap_basket", "value_basket"], name="instrument"),
)


def _cap_weighted(caps: pd.Series) -> pd.Series:
    return caps / caps.sum()


def demo_instruments(fund: Any) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Baskets in long form (instrument, asset, weight) and the contract table, from a demo fund.

    ``index_future`` holds the benchmark; ``small_cap_basket`` the smallest third of the universe
    by market value and ``value_basket`` the third with the highest value score, each weighted by
    market value.
    """
    caps = fund.attributes["market_cap"].astype(float)
    third = max(1, len(caps) // 3)
    small = caps.nsmallest(third)
    value = caps.loc[fund.characteristics["value"].astype(float).nlargest(third).index]
    parts = {"index_future": fund.benchmark[fund.benchmark > 0], "small_cap_basket": _cap_weighted(small),
             "value_basket": _cap_weighted(value)}
    long = pd.concat(
        [pd.DataFrame({"instrument": name, "asset": weights.index, "weight": weights.to_numpy()}) for name, weights in parts.items()],
        ignore_index=True,
    )
    return long, DEMO_CONTRACTS.copy()
