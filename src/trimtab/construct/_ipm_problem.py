"""The data of the factor-form interior-point method (:mod:`trimtab.construct._ipm`): the problem,
its risk caps, a run's internal point for warm starts, and the solution read back.

The problem, with trades split as w = w0 + u − v (u buys, v sells; x = (u, v) ∈ R²ᴺ), is stated in
the docstring of :mod:`trimtab.construct._ipm`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: The impact term |t|^{3/2} is exact from this trade size (a weight of NAV) up; below, see _impact.
IMPACT_SMOOTHING = 1e-6


@dataclass(frozen=True, eq=False)
class Cap:
    """(w − b)ᵀQ(w − b) ≤ τ², Q = B·F·Bᵀ·[factor] + diag(d)·[specific] (per-period variance)."""

    center: np.ndarray
    factor: bool
    specific: bool
    tau2: float
    #: the coordinate of w holding an elastic slack σ of the cap: (w − b)ᵀQ(w − b)/τ² − 1 ≤ σ (None: none)
    slack: int | None = None


@dataclass(eq=False)
class QP:
    """The problem data of the module docstring, in model order (N assets, K factors)."""

    B: np.ndarray
    F: np.ndarray
    d: np.ndarray
    w0: np.ndarray
    risk_weight: float
    risk_center: np.ndarray
    alpha: np.ndarray
    cost: np.ndarray
    lb: np.ndarray
    ub: np.ndarray
    Aw: np.ndarray
    Ay: np.ndarray
    at: np.ndarray
    const: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    caps: list[Cap] = field(default_factory=list)
    #: a cost on u + v of this size relative to the objective's gradient, used by the iteration but
    #: left out of :meth:`objective` (it makes the trade split unique when nothing prices trades)
    trade_regularizer: float = 0.0
    #: market-impact coefficients (N), cost impactᵢ·|tradeᵢ|^{3/2}; None for none
    impact: np.ndarray | None = None

    @property
    def n(self) -> int:
        return len(self.w0)

    def weights(self, x: np.ndarray) -> np.ndarray:
        n = self.n
        return self.w0 + x[:n] - x[n:]

    def sigma(self, a: np.ndarray, factor: bool = True, specific: bool = True) -> np.ndarray:
        out = self.B @ (self.F @ (self.B.T @ a)) if factor else np.zeros_like(a)
        return out + self.d * a if specific else out

    def row_values(self, w: np.ndarray, traded: float) -> np.ndarray:
        return self.Aw @ w + self.Ay @ (self.B.T @ w) + self.at * traded + self.const

    def risk_sigma(self, w: np.ndarray) -> np.ndarray | None:
        """Σ(w − b_o), or None when the objective has no risk term."""
        return self.sigma(w - self.risk_center) if self.risk_weight else None

    def objective(self, x: np.ndarray, sa: np.ndarray | None = None) -> float:
        """φ(x); ``sa`` is Σ(w − b_o) when the caller has it (see :meth:`risk_sigma`)."""
        w = self.weights(x)
        n = self.n
        traded = x[:n] + x[n:]
        value = -self.alpha @ w + self.cost @ traded
        if self.risk_weight:
            risk = self.sigma(w - self.risk_center) if sa is None else sa
            value += self.risk_weight * ((w - self.risk_center) @ risk)
        if self.impact is not None:
            value += self.impact @ _impact(traded)[0]
        return float(value)


@dataclass(frozen=True, eq=False)
class Warm:
    """The internal primal-dual point of a run, to start a run of a problem of the same shape from."""

    x: np.ndarray
    s: np.ndarray
    z: np.ndarray
    zl: np.ndarray
    zu: np.ndarray
    nu: np.ndarray
    scale: float
    #: the holdings of the run's problem: with other holdings the same weights are other trades
    w0: np.ndarray | None = None
    #: only x is meant (a point of a problem with other rows): the multipliers start as from cold
    primal_only: bool = False

    @classmethod
    def from_weights(cls, weights: np.ndarray) -> Warm:
        """A primal-only start at ``weights`` (re-expressed as trades from the run's holdings)."""
        w = np.asarray(weights, dtype=np.float64)
        empty = np.zeros(0)
        return cls(np.concatenate([w, np.zeros_like(w)]), empty, empty, empty, empty, empty, 1.0,
                   np.zeros_like(w), primal_only=True)


@dataclass(frozen=True, eq=False)
class Solution:
    """x and the multipliers; ``converged`` False means do not use it."""

    x: np.ndarray
    converged: bool
    status: str
    iterations: int
    seconds: float
    objective: float
    #: per dense row: multiplier of the upper side and of the lower side (objective units, ≥ 0),
    #: or the signed multiplier of an equality row split into those two.
    row_upper: np.ndarray
    row_lower: np.ndarray
    cap_duals: np.ndarray
    #: multipliers of the upper and lower bounds on x, and the Lagrangian gradient without them
    bound_upper: np.ndarray
    bound_lower: np.ndarray
    reduced_gradient: np.ndarray
    residuals: dict[str, float]
    warm: Warm | None = None


def _impact(t: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """f(t) = t^{3/2} for t ≥ ε, ½ε^{-1/2}·t² + ½ε^{1/2}·t below (ε = IMPACT_SMOOTHING); f′ and f″.

    t^{3/2} has unbounded curvature at 0, where every untraded asset ends, and Newton steps then
    predict its gradient badly (the dual residual stalls near 1e-6). Below ε the quadratic matches
    value and slope at ε, is convex and increasing, and lies within 0.1·ε^{3/2} of t^{3/2}; at and
    above ε the cost is exact, so every trade of at least ε is priced exactly.
    """
    e = IMPACT_SMOOTHING
    t = np.maximum(t, 0.0)
    small = t < e
    root = np.sqrt(np.where(small, e, t))
    value = np.where(small, 0.5 * t * t / np.sqrt(e) + 0.5 * np.sqrt(e) * t, t * root)
    slope = np.where(small, t / np.sqrt(e) + 0.5 * np.sqrt(e), 1.5 * root)
    curvature = np.where(small, 1.0 / np.sqrt(e), 0.75 / root)
    return value, slope, curvature
