"""The boxes of FACTOR_IPM's problem (:mod:`trimtab.construct._ipm`): which coordinates are fixed, the
upper bounds every feasible point keeps, the least value of a linear function over the boxes (the
Farkas test's bound), the objective's gradient and the cold starting point."""

from __future__ import annotations

import numpy as np

from trimtab.construct._ipm_problem import QP, _impact

#: A box narrower than this (relative to max(1, |lower|)) fixes its variable at the lower bound.
FIXED_WIDTH = 1e-13
#: The cold start sits START_OFFSET/N inside each box (or half-way, in a narrower box).
START_OFFSET = 1.0
#: ... with entries of J_hᵀy (y so scaled) this small counted as 0 where a coordinate is unbounded.
FARKAS_DUAL_TOL = 1e-9


def fixed_coordinates(qp: QP) -> np.ndarray:
    """Coordinates of x whose box is narrower than FIXED_WIDTH: held at their lower bound."""
    return qp.ub - qp.lb <= FIXED_WIDTH * np.maximum(1.0, np.abs(qp.lb))



def implied_upper(qp: QP) -> np.ndarray:
    """Upper bounds on x that every feasible point keeps: ub, and from a row on trades alone
    (at·1ᵀ(u + v) + c ≤ hi with at > 0, as a turnover cap) each uⱼ, vⱼ ≤ (hi − c)/at."""
    ub = qp.ub.copy()
    only_trades = ~np.any(qp.Aw != 0, axis=1) & ~np.any(qp.Ay != 0, axis=1) & (qp.at > 0) & np.isfinite(qp.hi)
    for i in np.flatnonzero(only_trades):
        ub = np.minimum(ub, max((qp.hi[i] - qp.const[i]) / qp.at[i], 0.0))
    return np.maximum(ub, qp.lb)


def box_minimum(base: float, c: np.ndarray, qp: QP, x: np.ndarray, free: np.ndarray,
                upper: np.ndarray | None = None) -> float:
    """base + min over lb ≤ x′ ≤ upper of cᵀ(x′ − x) on the free coordinates (see _Run.farkas);
    ``upper`` defaults to :func:`implied_upper`."""
    ub = implied_upper(qp) if upper is None else upper
    # a side without a bound contributes −∞ unless |cⱼ| ≤ FARKAS_DUAL_TOL (then 0)
    c = np.where(np.abs(c) <= FARKAS_DUAL_TOL, 0.0, c)
    with np.errstate(invalid="ignore"):
        down = np.where(c > 0, c * (qp.lb - x), 0.0)
        up = np.where(c < 0, c * (ub - x), 0.0)
    bound = base + float(down[free].sum() + up[free].sum())
    return bound if np.isfinite(bound) else -np.inf


def _objective_gradient(qp: QP, x: np.ndarray, sa: np.ndarray | None = None) -> np.ndarray:
    """∇φ in x-space; ``sa`` is Σ(w − b_o) when the caller has it."""
    gw = -qp.alpha
    if qp.risk_weight:
        risk = qp.sigma(qp.weights(x) - qp.risk_center) if sa is None else sa
        gw = gw + 2.0 * qp.risk_weight * risk
    gt = qp.cost
    if qp.impact is not None:
        n = qp.n
        gt = gt + qp.impact * _impact(x[:n] + x[n:])[1]
    return np.concatenate([gw + gt, -gw + gt])


def _start(qp: QP, fixed: np.ndarray) -> np.ndarray:
    """Strictly inside every box, u and v moved alike (so w starts at the holdings where it can)."""
    n = qp.n
    delta = START_OFFSET / max(n, 1)
    width = qp.ub - qp.lb
    step = np.where(np.isfinite(width), np.minimum(0.5 * width, delta), delta)
    x = qp.lb + step
    x[fixed] = qp.lb[fixed]
    return x
