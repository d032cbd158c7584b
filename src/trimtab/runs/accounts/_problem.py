"""One account's rebalance problem: the shared scenario plus the account's exclusions, its share of the
aggregate cap and the impact price of the pooled trade.

The account problem is the fund's :class:`~trimtab.construct.RebalanceProblem` with two more limit
blocks (box rows on w, so the factor-form interior-point method takes them and every answer is
verified against them with numpy like any scenario limit) and one more linear cost rate:

- ``exclude``: wᵢ = 0 for the excluded assets;
- ``aggregate_cap``: |wᵢ − w0ᵢ| ≤ aᵢ·priceᵢ/NAV, aᵢ the shares of name i allotted to this account;
- the pooled impact price πᵢ (fraction of the price) added to the linear cost rate, so the account
  pays πᵢ·|tᵢ| of NAV on its trade tᵢ, the price every share of the pooled block pays.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from trimtab.construct._data import ProblemData
from trimtab.construct._objective import CostRates
from trimtab.construct._problem import RebalanceProblem
from trimtab.construct._spec import RebalanceSpec
from trimtab.construct.constraints._base import Constraint, Rows, box_rows


#: Weight of NAV added to each allotment: 1e-10 of a 100m account is a hundredth of a unit of currency.
CAP_SLACK = 1e-10


class _AccountBox(Constraint):
    """Per-asset bounds that come with the account, not with the scenario."""

    def __init__(self, bounds: tuple[np.ndarray, np.ndarray], data: ProblemData, spec: RebalanceSpec) -> None:
        super().__init__(bounds, data, spec)

    def add(self, assembly: Any) -> None:
        for rows in self.rows:
            assembly.add(rows)


class Exclude(_AccountBox):
    """wᵢ = 0 for the account's excluded assets."""

    key = "exclude"
    kind = "exclude"

    def make_rows(self) -> list[Rows]:
        lower, upper = self.options
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets)]


class AggregateCap(_AccountBox):
    """|wᵢ − w0ᵢ| ≤ the account's share of the aggregate cap (weights of its NAV)."""

    key = "aggregate_cap"
    kind = "aggregate_cap"

    def make_rows(self) -> list[Rows]:
        lower, upper = self.options
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets, offset=self.data.holdings)]


class AccountProblem(RebalanceProblem):
    """A rebalance problem with an account's own per-asset bounds and the pooled impact price.

    Parameters
    ----------
    spec, data, solvers, unknown_assets, warm
        As for :class:`~trimtab.construct.RebalanceProblem`.
    exclude : sequence of int
        Positions of the assets the account must end without.
    allotment : numpy.ndarray, optional
        Most shares the account may trade in each asset (its share of the aggregate caps).
    pool_price : numpy.ndarray, optional
        πᵢ, the pooled impact price (fraction of the price) paid per unit traded.
    prices : numpy.ndarray, optional
        Prices, to turn allotted shares into weights of NAV.
    """

    def __init__(self, spec: RebalanceSpec, data: ProblemData, solvers: Sequence[str] | None = None,
                 unknown_assets: str = "error", warm: Any = None, *, exclude: Sequence[int] = (),
                 allotment: np.ndarray | None = None, pool_price: np.ndarray | None = None,
                 prices: np.ndarray | None = None) -> None:
        super().__init__(spec, data, solvers, unknown_assets, warm)
        self.account_options = {"exclude": tuple(exclude), "allotment": allotment,
                                "pool_price": pool_price, "prices": prices}
        self._attach()

    def _attach(self) -> None:
        o, data, n = self.account_options, self.data, self.data.n_assets
        if o["exclude"]:
            lower, upper = np.full(n, -np.inf), np.full(n, np.inf)
            lower[list(o["exclude"])] = 0.0
            upper[list(o["exclude"])] = 0.0
            self.constraints.append(Exclude((lower, upper), data, self.spec))
        if o["allotment"] is not None:
            # + CAP_SLACK: a forced sale allotted exactly its size stays feasible in floating point
            cap = o["allotment"] * o["prices"] / float(data.nav) + CAP_SLACK  # type: ignore[operator]
            self.constraints.append(AggregateCap((-cap, cap), data, self.spec))
        for c in self.constraints:
            _ = c.rows
        price = o["pool_price"]
        if price is not None and np.any(price):
            rates = self.objective.rates
            linear = price if rates.linear is None else rates.linear + price
            self.objective.rates = CostRates(np.asarray(linear, dtype=np.float64), rates.impact)

    def relaxed(self, moves: Sequence[Mapping[str, Any]]) -> RebalanceProblem:
        """The same account problem with the limits of a relaxation option loosened."""
        from trimtab.construct import _elastic

        o = self.account_options
        fresh = AccountProblem(self.spec, self.data, self.solvers, self.unknown_assets, self.warm,
                               exclude=o["exclude"], allotment=o["allotment"], pool_price=o["pool_price"],
                               prices=o["prices"])
        moved = {id(m["rows"]) for m in moves}
        for old, new in zip(self.constraints, fresh.constraints, strict=True):
            new.__dict__["rows"] = [_elastic.loosen(r, moves) if id(r) in moved else r for r in old.rows]
        fresh.changed = self.changed
        return fresh
