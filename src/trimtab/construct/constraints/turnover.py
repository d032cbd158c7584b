"""One-way turnover: ½·Σ|wᵢ − w0ᵢ| ≤ max, on the trade split w = w0 + buy − sell."""

from __future__ import annotations

import numpy as np

from trimtab.construct._cvxpy import cp
from trimtab.construct.constraints._base import Constraint, Linear, Rows, scalar


class Turnover(Constraint):
    """½·Σ(buyᵢ + sellᵢ) + (sales outside the optimizer) ≤ max; verified as ½·Σ|wᵢ − w0ᵢ|."""

    key = "turnover"
    kind = "turnover"

    def make_rows(self) -> list[Rows]:
        w0, outside = self.data.holdings, self.data.outside_turnover
        return [Rows(
            name=self.key, kind=self.kind, unit="weight (one-way)", labels=[self.key],
            lower=np.array([-np.inf]), upper=scalar(self.options["max"], np.inf),
            evaluate=lambda w: np.array([0.5 * np.abs(w - w0).sum() + outside]),
            expression=lambda v: 0.5 * cp.sum(v.traded) + outside,
            soft=self.soft_penalty, linear=Linear(traded=np.array([0.5]), constant=outside),
        )]
