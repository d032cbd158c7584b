"""Liquidity: |wᵢ − w0ᵢ| ≤ f·days·ADVᵢ·priceᵢ / NAV (ADV in shares a day)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from trimtab.construct.constraints._base import Constraint, Rows, box_rows


class Liquidity(Constraint):
    """Trade at most ``max_adv_fraction`` of average daily volume over ``days`` days, in each asset."""

    key = "liquidity"
    kind = "liquidity"

    def make_rows(self) -> list[Rows]:
        o, data = self.options, self.data
        if data.nav is None:
            raise self.path.fail("needs the fund's NAV to turn volumes into weights (pass nav=...)")
        adv = data.column(o["adv_column"], self.path / "adv_column", positive=True).to_numpy(dtype=np.float64)
        price = data.column(o["price_column"], self.path / "price_column", positive=True).to_numpy(dtype=np.float64)
        cap = o["max_adv_fraction"] * o["days"] * adv * price / data.nav
        return [box_rows(self.key, self.kind, -cap, cap, data.assets, offset=data.holdings, soft=self.soft_penalty)]

    def describe(self, weights: np.ndarray, duals: Mapping[int, tuple[np.ndarray, np.ndarray]]) -> list[dict[str, Any]]:
        """The table row in the limit's own terms: the trade as a fraction of a day's volume
        (|tᵢ|·NAV / (priceᵢ·ADVᵢ·days)) against ``max_adv_fraction``; the shadow price per unit of weight."""
        out = []
        o, data = self.options, self.data
        for record in super().describe(weights, duals):
            asset = record.get("asset")
            if asset is not None and data.nav is not None:
                i = int(data.assets.get_loc(asset))
                adv = float(data.attributes[o["adv_column"]].iloc[i])  # type: ignore[index]
                price = float(data.attributes[o["price_column"]].iloc[i])  # type: ignore[index]
                per_day = data.nav / (price * adv * o["days"])
                limit = float(o["max_adv_fraction"])
                value = abs(record["value"]) * per_day
                record = {**record, "value": value, "lower": np.nan, "upper": limit, "slack": limit - value,
                          "unit": f"fraction of ADV ({o['days']:g} day{'s' if o['days'] != 1 else ''})"}
            out.append(record)
        return out
