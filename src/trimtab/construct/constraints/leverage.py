"""Long only (w ≥ 0), or short books: gross Σ|w|, net Σw and short Σmax(−w, 0) limits."""

from __future__ import annotations

import numpy as np

from trimtab.construct._cvxpy import cp
from trimtab.construct.constraints._base import Constraint, Linear, Rows, box_rows, scalar


class LongOnly(Constraint):
    """wᵢ ≥ 0 for every asset."""

    key = "long_only"
    kind = "long_only"

    def make_rows(self) -> list[Rows]:
        n = self.data.n_assets
        return [box_rows(self.key, self.kind, np.zeros(n), np.full(n, np.inf), self.data.assets, soft=self.soft_penalty)]


class Leverage(Constraint):
    """Σ|wᵢ| ≤ gross, net ∈ [lower, upper] for Σwᵢ, Σmax(−wᵢ, 0) ≤ short.

    Gross uses the short part s ≥ max(−w, 0): Σw + 2Σs ≤ gross, exact because s can be tight.
    """

    key = "leverage"
    kind = "leverage"

    def make_rows(self) -> list[Rows]:
        o, soft, out = self.options, self.soft_penalty, []
        if o["gross"] is not None:
            out.append(Rows(
                name=f"{self.key}.gross", kind=self.kind, unit="weight", labels=[f"{self.key}.gross"],
                lower=np.array([-np.inf]), upper=scalar(o["gross"], np.inf),
                evaluate=lambda w: np.array([np.abs(w).sum()]),
                expression=lambda v: cp.sum(v.w) + 2.0 * cp.sum(v.short), soft=soft,
            ))
        if o["net"] is not None:
            lo, hi = o["net"]
            out.append(Rows(
                name=f"{self.key}.net", kind=self.kind, unit="weight", labels=[f"{self.key}.net"],
                lower=scalar(lo, -np.inf), upper=scalar(hi, np.inf),
                evaluate=lambda w: np.array([w.sum()]), expression=lambda v: cp.sum(v.w), soft=soft,
                linear=Linear(w=np.ones((1, self.data.n_assets))),
            ))
        if o["short"] is not None:
            out.append(Rows(
                name=f"{self.key}.short", kind=self.kind, unit="weight", labels=[f"{self.key}.short"],
                lower=np.array([-np.inf]), upper=scalar(o["short"], np.inf),
                evaluate=lambda w: np.array([np.maximum(-w, 0.0).sum()]),
                expression=lambda v: cp.sum(v.short), soft=soft,
            ))
        return out
