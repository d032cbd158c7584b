"""Liquidity: |wᵢ − w0ᵢ| ≤ f·days·ADVᵢ·priceᵢ / NAV (ADV in shares a day)."""

from __future__ import annotations

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
