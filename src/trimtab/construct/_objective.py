"""Objectives, as U(w) to maximise, in cvxpy and again with plain numpy for the breakdown.

With a = w − b (active; a = w without a benchmark), σ²ₐ = ppy·aᵀΣa the annualised active variance,
σ²_w = ppy·wᵀΣw the annualised total variance, t = w − w0 the trades and κ the cost aversion:

- utility:     U = αᵀa − λ·σ²ₐ − κ·C(t)
- alpha:       U = αᵀa − κ·C(t)             (bounded by the risk caps and limits)
- active_risk: U = −σ²ₐ − κ·C(t)            (κ·C only when costs are named)
- total_risk:  U = −σ²_w − κ·C(t)

minus Σ penalty·slack for soft constraints. With a hedge overlay, a and σ² read the hedged book
w + X·h (construct/_overlay.py) and the costs the cash book's trades only. Transaction costs C(t) = Σ (spreadᵢ/2 + commissionᵢ)·|tᵢ|
+ Σ impactᵢ·|tᵢ|^{3/2} (fractions of NAV; the impact term is a power cone), with |t| written as
buy + sell on the trade split.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from trimtab.construct._cvxpy import cp
from trimtab.construct._data import ProblemData
from trimtab.construct._spec import RebalanceSpec
from trimtab.construct._variables import Variables, variance_numpy


@dataclass(frozen=True, eq=False)
class CostRates:
    """Per-asset linear cost rate (half-spread + commission) and impact coefficient, or None."""

    linear: np.ndarray | None
    impact: np.ndarray | None

    @property
    def any(self) -> bool:
        return self.linear is not None or self.impact is not None

    def cost(self, trade: np.ndarray) -> np.ndarray:
        """Estimated cost per asset, fraction of NAV."""
        size = np.abs(trade)
        out = np.zeros_like(size)
        if self.linear is not None:
            out += self.linear * size
        if self.impact is not None:
            out += self.impact * size**1.5
        return out


def cost_rates(spec: RebalanceSpec, data: ProblemData) -> CostRates:
    """Read the cost columns named by ``objective.costs`` from the attributes."""
    columns = spec.objective.get("costs")
    if not columns:
        return CostRates(None, None)
    path = spec.path("objective", "costs")
    linear = None
    for term, weight in (("spread", 0.5), ("commission", 1.0)):
        if term in columns:
            values = weight * data.column(columns[term], path / term).to_numpy(dtype=np.float64)
            linear = values if linear is None else linear + values
    impact = None
    if "impact" in columns:
        impact = data.column(columns["impact"], path / "impact").to_numpy(dtype=np.float64)
    return CostRates(linear, impact)


class Objective:
    """The objective of one spec on one data set."""

    def __init__(self, spec: RebalanceSpec, data: ProblemData) -> None:
        self.spec = spec
        self.data = data
        self.kind: str = spec.objective["kind"]
        self.risk_aversion = float(spec.objective.get("risk_aversion", 0.0))
        self.cost_aversion = float(spec.objective.get("cost_aversion", 0.0))
        self.rates = cost_rates(spec, data)
        #: w → the book the alpha and risk terms read: w + X·h with an overlay (set by the problem), else w
        self.hedge: Callable[[np.ndarray], np.ndarray] = lambda w: w

    @property
    def risk_weight(self) -> float:
        """Multiplier of the annualised variance term: λ, 1 (minimise risk) or 0 (alpha)."""
        return {"utility": self.risk_aversion, "alpha": 0.0}.get(self.kind, 1.0)

    @property
    def risk_active(self) -> bool:
        return self.kind not in ("total_risk", "risk_budget")

    def expression(self, v: Variables) -> cp.Expression:
        """U(w) without penalties, in cvxpy (constants included, so the value is comparable)."""
        data = self.data
        terms: list[Any] = []
        if self.kind in ("utility", "alpha") and np.any(data.alpha):
            held = np.flatnonzero(data.alpha)
            scored = v.hedged if len(held) == data.n_assets else v.hedged[held]
            terms.append(data.alpha[held] @ scored - float(data.alpha @ data.bench))
        if self.risk_weight > 0:
            active = self.risk_active
            variance = v.variance(active)
            terms.append(-self.risk_weight * data.periods_per_year * variance)
        if self.rates.any and self.cost_aversion > 0:
            terms.append(-self.cost_aversion * self._cost_expression(v))
        if not terms:
            return cp.Constant(0.0)
        return sum(terms[1:], terms[0])

    def _cost_expression(self, v: Variables) -> cp.Expression:
        terms = []
        if self.rates.linear is not None:
            idx = np.flatnonzero(self.rates.linear)
            if len(idx) == self.data.n_assets:
                terms.append(self.rates.linear @ v.traded)
            elif len(idx):
                terms.append(self.rates.linear[idx] @ (v.buy[idx] + v.sell[idx]))
        if self.rates.impact is not None:
            idx = np.flatnonzero(self.rates.impact)
            if len(idx):
                terms.append(self.rates.impact[idx] @ v.impact_epigraph(idx))
        return sum(terms[1:], terms[0]) if terms else cp.Constant(0.0)

    def breakdown(self, weights: np.ndarray, penalties: float = 0.0) -> dict[str, float]:
        """alpha, risk_penalty, costs, penalties and total, recomputed with numpy from w."""
        data = self.data
        hedged = self.hedge(weights)
        alpha = float(data.alpha @ (hedged - data.bench)) if self.kind in ("utility", "alpha") else 0.0
        fv, sv = variance_numpy(data, hedged, self.risk_active)
        risk = -self.risk_weight * data.periods_per_year * (fv + sv)
        costs = 0.0
        if self.rates.any and self.cost_aversion > 0:
            costs = -self.cost_aversion * float(self.rates.cost(weights - data.holdings).sum())
        total = alpha + risk + costs - penalties
        return {"alpha": alpha, "risk_penalty": risk, "costs": costs, "penalties": -penalties, "total": total}
