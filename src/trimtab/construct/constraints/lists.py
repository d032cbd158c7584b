"""Asset lists: no-buy (wᵢ ≤ w0ᵢ), no-sell (wᵢ ≥ w0ᵢ), no-trade (wᵢ = w0ᵢ), must-hold (wᵢ ≥ min_weight)."""

from __future__ import annotations

import numpy as np

from trimtab.construct.constraints._base import Constraint, Rows, box_rows


class _TradeList(Constraint):
    lower_open = True
    upper_open = True

    def assets_listed(self) -> list[object]:
        return list(self.options)

    def make_rows(self) -> list[Rows]:
        n = self.data.n_assets
        pos = self.data.index_of(self.assets_listed(), self.path)
        lower, upper = np.full(n, -np.inf), np.full(n, np.inf)
        if not self.lower_open:
            lower[pos] = 0.0
        if not self.upper_open:
            upper[pos] = 0.0
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets, offset=self.data.holdings)]


class NoBuy(_TradeList):
    """wᵢ − w0ᵢ ≤ 0 for the listed assets."""

    key = "no_buy"
    kind = "no_buy"
    upper_open = False


class NoSell(_TradeList):
    """wᵢ − w0ᵢ ≥ 0 for the listed assets."""

    key = "no_sell"
    kind = "no_sell"
    lower_open = False


class NoTrade(_TradeList):
    """wᵢ = w0ᵢ for the listed assets."""

    key = "no_trade"
    kind = "no_trade"
    lower_open = False
    upper_open = False


class MustHold(Constraint):
    """wᵢ ≥ min_weight for the listed assets (they stay in the book)."""

    key = "must_hold"
    kind = "must_hold"

    def make_rows(self) -> list[Rows]:
        n = self.data.n_assets
        pos = self.data.index_of(self.options["assets"], self.path / "assets")
        lower, upper = np.full(n, -np.inf), np.full(n, np.inf)
        lower[pos] = self.options["min_weight"]
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets)]
