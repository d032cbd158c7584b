"""Risk caps (annualised volatility): tracking error, total risk, factor risk and specific risk.

Each is one second-order cone in factor form. With a = w − b (active) or w (total):
σ = √ppy·‖[Lᵀ(Bᵀa); √d∘a]‖ (factor and specific parts), σ_factor = √ppy·‖LᵀBᵀa‖,
σ_specific = √ppy·‖√d∘a‖. The cone is written per period, so the cvxpy row is σ/√ppy.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from trimtab.construct._cvxpy import cp
from trimtab.construct._variables import Variables, variance_numpy
from trimtab.construct.constraints._base import Constraint, Risk, Rows, scalar

#: A risk cap's unit of concern (Rows.scale) is the cap, but at least this (1%).
MIN_RISK_SCALE = 0.01


class _RiskCap(Constraint):
    unit = "annualised volatility"
    parts: tuple[bool, bool] = (True, True)  # (factor, specific)

    def active(self) -> bool:
        return True

    def make_rows(self) -> list[Rows]:
        data, active = self.data, self.active()
        ppy = data.periods_per_year
        use_factor, use_specific = self.parts

        def evaluate(w: np.ndarray) -> np.ndarray:
            fv, sv = variance_numpy(data, w, active)
            return np.array([np.sqrt(ppy * (fv * use_factor + sv * use_specific))])

        def expression(v: Variables) -> cp.Expression:
            pieces = ([v.factor_part(active)] if use_factor else []) + ([v.specific_part(active)] if use_specific else [])
            return cp.norm(cp.hstack(pieces) if len(pieces) > 1 else pieces[0], 2)

        cap = self.options["max"]
        return [Rows(
            name=self.key, kind=self.kind, unit=self.unit, labels=[self.key],
            lower=np.array([-np.inf]), upper=scalar(cap, np.inf),
            evaluate=evaluate, expression=expression, factor=1.0 / np.sqrt(ppy),
            scale=max(cap, MIN_RISK_SCALE), soft=self.soft_penalty, convex=True,
            risk=Risk(active=active, factor=use_factor, specific=use_specific),
        )]


class TrackingError(_RiskCap):
    """√(ppy·(w − b)ᵀΣ(w − b)) ≤ max (without a benchmark, the benchmark is cash)."""

    key = "tracking_error"
    kind = "tracking_error"


class TotalRisk(_RiskCap):
    """√(ppy·wᵀΣw) ≤ max."""

    key = "total_risk"
    kind = "total_risk"

    def active(self) -> bool:
        return False


class _PartCap(_RiskCap):
    def active(self) -> bool:
        return bool(self.options["active"])


class FactorRisk(_PartCap):
    """√(ppy·aᵀBFBᵀa) ≤ max, a active (default) or total."""

    key = "factor_risk"
    kind = "factor_risk"
    parts = (True, False)


class SpecificRisk(_PartCap):
    """√(ppy·Σdᵢaᵢ²) ≤ max, a active (default) or total."""

    key = "specific_risk"
    kind = "specific_risk"
    parts = (False, True)


RISK_CAPS: tuple[Callable[..., Constraint], ...] = (TrackingError, TotalRisk, FactorRisk, SpecificRisk)
