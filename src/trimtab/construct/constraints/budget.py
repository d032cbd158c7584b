"""Budget: fully invested (Σw = 1) or a cash range (cash = 1 − Σw within [min, max])."""

from __future__ import annotations

import numpy as np

from trimtab.construct._cvxpy import cp
from trimtab.construct.constraints._base import Constraint, Linear, Rows, scalar


class FullyInvested(Constraint):
    """Σᵢ wᵢ = 1."""

    key = "fully_invested"
    kind = "budget"

    def make_rows(self) -> list[Rows]:
        return [Rows(
            name=self.key, kind=self.kind, unit="weight", labels=[self.key],
            lower=np.array([1.0]), upper=np.array([1.0]),
            evaluate=lambda w: np.array([w.sum()]), expression=lambda v: cp.sum(v.w),
            soft=self.soft_penalty, linear=Linear(w=np.ones((1, self.data.n_assets))),
        )]


class Cash(Constraint):
    """min ≤ 1 − Σᵢ wᵢ ≤ max (cash as a fraction of NAV)."""

    key = "cash"
    kind = "budget"

    def make_rows(self) -> list[Rows]:
        return [Rows(
            name=self.key, kind=self.kind, unit="weight", labels=[self.key],
            lower=scalar(self.options["min"], -np.inf), upper=scalar(self.options["max"], np.inf),
            evaluate=lambda w: np.array([1.0 - w.sum()]), expression=lambda v: 1.0 - cp.sum(v.w),
            soft=self.soft_penalty, linear=Linear(w=-np.ones((1, self.data.n_assets)), constant=1.0),
        )]
