"""A primal-dual interior-point method for the rebalance problem in factor form.

The problem, with trades split as w = w0 + u − v (u buys, v sells; x = (u, v) ∈ R²ᴺ)::

    minimise    c_r·(w − b_o)ᵀΣ(w − b_o) − αᵀw + costᵀ(u + v) + Σ impactᵢ·(uᵢ + vᵢ)^{3/2}
                                                                       Σ = B·F·Bᵀ + diag(d)
    subject to  lb ≤ x ≤ ub                                            (per-asset boxes)
                lo ≤ Aw·w + Ay·(Bᵀw) + at·1ᵀ(u + v) + c ≤ hi           (a few dense rows)
                (w − b_k)ᵀQ_k(w − b_k) ≤ τ_k²,  Q_k ∈ {Σ, BFBᵀ, diag(d)}  (risk caps)

Weight bounds l ≤ w ≤ h become bounds on u and v alone: u ∈ [(l − w0)⁺, (h − w0)⁺] and
v ∈ [(w0 − h)⁺, (w0 − l)⁺]. This restriction is exact: every w in [l, h] is reached with
u = (w − w0)⁺, v = (w0 − w)⁺ inside those boxes, and nothing in the problem rewards buying and
selling the same asset at once.

Each iteration solves the Newton system of the perturbed KKT conditions (Mehrotra's
predictor-corrector, one step length for primal and dual). Its matrix is

    H = blockdiag(2×2 per asset) + U·Uᵀ,   U = [Eᵀ·B·R, G·diag(√ρ)],   E = [I, −I],

where R·Rᵀ collects every K×K factor term (objective, caps, factor-exposure rows), the 2×2 blocks
hold the specific-variance diagonal, the impact term's curvature (¾·impactᵢ·(uᵢ + vᵢ)^{-1/2} on
all four entries; u + v > 0 inside the boxes) and the barrier terms of the boxes, and G holds one column per
other dense row and per cap gradient. H⁻¹ is applied with the Woodbury identity: one Cholesky of an
(r × r) matrix, r ≈ K + (number of dense rows), and O(N·r²) dense BLAS work. The few assets whose
2×2 blocks are tiny against their share of U·Uᵀ (strictly inside their boxes near the end of a
linear-like problem, where Woodbury alone cancels catastrophically) are taken out and solved through
a dense Schur complement of their own (see _Newton). No N×N matrix and no sparse factorisation are
formed. Equality rows are handled by a Schur complement A·H⁻¹·Aᵀ.

Tolerances are on the unscaled rows (weights, exposures) and on the caps as q/τ² − 1, so a
converged point is well inside the verification tolerances of :mod:`trimtab.construct._verify`;
the caller verifies it from w regardless and falls back to a general solver when it does not pass.

The module is the driver (the iteration, its stopping rules and warm starts); the problem data and the
solution are in :mod:`trimtab.construct._ipm_problem`, the Newton system in
:mod:`trimtab.construct._ipm_newton`, and the translation from constraint rows in
:mod:`trimtab.construct._fast`.
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np

from trimtab.construct._ipm_boxes import (
    FARKAS_DUAL_TOL,
    FIXED_WIDTH,
    START_OFFSET,
    _objective_gradient,
    _start,
    box_minimum,
    fixed_coordinates,
    implied_upper,
)
from trimtab.construct._ipm_newton import _expand, _Newton
from trimtab.construct._ipm_problem import IMPACT_SMOOTHING, QP, Cap, Solution, Warm, _impact

__all__ = ["FARKAS_DUAL_TOL", "FIXED_WIDTH", "IMPACT_SMOOTHING", "QP", "START_OFFSET", "Cap", "Solution", "Warm",
           "box_minimum", "fixed_coordinates", "implied_upper", "solve"]

#: Stop when the primal and dual residuals and the duality measure are below these.
TOL_PRIMAL = 1e-9
TOL_DUAL = 1e-9
TOL_GAP = 1e-11
#: When the run can go no further (a failed or tiny step, or STALL_ITER iterations without a better
#: iterate: once the barrier parameter is far below the gap tolerance, the multipliers of the binding
#: rows are resolved to fewer digits than the gap, and the dual residual of a few runs stops near
#: 1e-8 to 1e-7), the best iterate is still accepted, as ``optimal_stalled``, if its residuals are
#: within these: the objective is then within ~1e-6 of its optimum (relative, in units of its gradient).
ACCEPT_PRIMAL = 1e-7
ACCEPT_DUAL = 1e-6
ACCEPT_GAP = 1e-6
MAX_ITER = 80
#: Fraction of the distance to the boundary a step may go.
STEP_FRACTION = 0.995
#: Starting slack of the inequality rows (at least) and starting complementarity MU0/N.
SLACK_FLOOR = 0.1
MU0 = 0.1
#: A step shorter than this ends the run (stalled); |x| beyond DIVERGED ends it (unbounded).
MIN_STEP = 1e-10
#: Two steps shorter than this, once an acceptable iterate exists, end the run (stalled).
SHORT_STEP = 1e-3
#: Iterations without a better iterate that end a run once an acceptable one exists.
STALL_ITER = 2
DIVERGED = 1e8
#: A Farkas bound (see :meth:`_Run.farkas`) above this, in units of the rows with the multipliers
#: scaled to a largest of 1, certifies that no point of the boxes satisfies the rows and caps.
FARKAS_TOL = 1e-9
#: A diverging iterate's direction d certifies an unbounded objective when it stays within the
#: limits' recession cone and lowers the objective, to this relative accuracy (see _Run.unbounded).
RECESSION_TOL = 1e-7
#: Warm starts: gaps at least WARM_GAP × the cold start's, multipliers at least WARM_MU·mu0 / gap.
WARM_GAP = 1e-1
WARM_MU = 1e-1
#: A cap's slack is reset to −h(x) when −h(x) is at least this fraction of it.
SLACK_RESET = 0.1
#: A caller's stop test (see :func:`solve`) is asked only below this primal residual.
STOP_PRIMAL = 1e-6


class _Rows:
    """The dense rows split into equalities, factor-only inequalities and general inequalities."""

    def __init__(self, qp: QP) -> None:
        lo, hi = qp.lo, qp.hi
        self.eq = np.flatnonzero(np.isfinite(lo) & (lo == hi))
        ineq = np.flatnonzero(~(np.isfinite(lo) & (lo == hi)) & (np.isfinite(lo) | np.isfinite(hi)))
        aw_zero = ~np.any(qp.Aw != 0, axis=1) & (qp.at == 0)
        self.factor_only = ineq[aw_zero[ineq]]
        self.general = ineq[~aw_zero[ineq]]
        self.ineq = np.concatenate([self.factor_only, self.general])


def _row_columns(qp: QP) -> np.ndarray:
    """The rows' gradients in w-space (N × rows): Awᵀ + B·Ayᵀ (the trade part is ``qp.at``)."""
    return qp.Aw.T + qp.B @ qp.Ay.T


def _step_to_boundary(v: np.ndarray, dv: np.ndarray) -> float:
    neg = dv < 0
    if not neg.any():
        return np.inf
    return float(np.min(-v[neg] / dv[neg]))


def solve(qp: QP, *, max_iter: int = MAX_ITER, verbose: bool = False, warm: Warm | None = None,
          stop: Callable[[np.ndarray], bool] | None = None) -> Solution:
    """Minimise the QP of the module docstring; see :class:`Solution`.

    The iterate with the smallest residuals (relative to their tolerances) is kept; the run stops
    when it is within every tolerance (``optimal``), when its steps stall or a Newton solve fails or
    goes non-finite, or after ``max_iter`` iterations. ``converged`` is True for ``optimal`` and for
    ``optimal_stalled`` (a stopped run whose best iterate is within the ACCEPT_* residuals).

    Infeasibility is detected, not waited out: while the primal residual is above its tolerance
    (and no acceptable iterate exists), every iteration tests the multipliers as a Farkas
    certificate (:meth:`_Run.farkas`); a positive bound stops the run as ``infeasible``, with the
    certifying multipliers in the solution (``row_upper``, ``row_lower``, ``cap_duals``). An iterate
    beyond DIVERGED stops it as ``unbounded`` when its direction is a ray along which the objective
    falls without bound (:meth:`_Run.unbounded`; the direction is the solution's x), else as
    ``diverged``. ``stop(x)``, asked once the primal residual is below STOP_PRIMAL, ends the run at
    that iterate as ``stopped`` when it returns True (a feasibility test needs no optimum).
    """
    # overflow or 0/0 near a failing end is caught by the finiteness checks, not by warnings
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        return _Run(qp, verbose, warm).run(max_iter, stop)


class _Run:
    """One interior-point run: the fixed structure, the state and the iteration."""

    def __init__(self, qp: QP, verbose: bool, warm: Warm | None = None) -> None:
        self.qp, self.verbose = qp, verbose
        n = self.n = qp.n
        rows = self.rows = _Rows(qp)
        self.fixed = fixed_coordinates(qp)
        self.free = ~self.fixed
        self.has_lb = self.free & np.isfinite(qp.lb)
        self.has_ub = self.free & np.isfinite(qp.ub)
        self.Gw = _row_columns(qp)
        self.implied_ub = implied_upper(qp)
        self.b_norm2 = np.einsum("ij,ij->i", qp.B, qp.B)
        self.at = qp.at
        self.Ay_fac = qp.Ay[rows.factor_only]
        self.n_rows = len(qp.lo)
        ineq = rows.ineq
        self.up_side = ineq[np.isfinite(qp.hi[ineq])]
        self.lo_side = ineq[np.isfinite(qp.lo[ineq])]
        self.m_up = len(self.up_side)
        self.m_lin = self.m_up + len(self.lo_side)
        self.n_caps = len(qp.caps)
        self.b_eq = qp.hi[rows.eq]
        # caps on the full Σ around the objective's own centre reuse its Σ(w − b_o)
        self.cap_shares_risk = [bool(qp.risk_weight) and cap.factor and cap.specific
                                and (cap.center is qp.risk_center or np.array_equal(cap.center, qp.risk_center))
                                for cap in qp.caps]
        # starting point; the objective is divided by its gradient's size so multipliers are O(1)
        x = _start(qp, self.fixed)
        grad0 = _objective_gradient(qp, x)
        self.scale = max(float(np.max(np.abs(grad0[self.free]))) if self.free.any() else 1.0, 1e-8)
        self.reg = qp.trade_regularizer
        self.x = x
        h = self.evaluate()
        self.s = np.maximum(-h, SLACK_FLOOR)
        mu0 = MU0 / max(n, 1)
        self.z = mu0 / self.s
        self.gap_l = np.where(self.has_lb, x - qp.lb, 1.0)
        self.gap_u = np.where(self.has_ub, qp.ub - x, 1.0)
        self.zl = np.where(self.has_lb, mu0 / self.gap_l, 0.0)
        self.zu = np.where(self.has_ub, mu0 / self.gap_u, 0.0)
        self.nu = np.zeros(len(rows.eq))
        self.n_comp = int(self.has_lb.sum() + self.has_ub.sum() + len(self.s))
        if warm is not None and self.compatible(warm):
            self.warm_start(warm, mu0)

    def compatible(self, warm: Warm) -> bool:
        return (len(warm.x) == len(self.x) and (warm.primal_only or (len(warm.z) == len(self.z) and len(warm.nu) == len(self.nu)))
                and bool(np.all(np.isfinite(warm.x))))

    def warm_start(self, warm: Warm, mu0: float) -> None:
        """Start from a previous solution of a problem of the same shape, pushed back into the interior.

        Each bound gap is at least WARM_GAP times the cold start's offset, every slack at least
        WARM_GAP·SLACK_FLOOR, and every multiplier at least WARM_MU·mu0 over its gap (duals rescaled to
        this run's objective scale), so the iteration starts near the old central path, not on its edge.
        """
        qp = self.qp
        cold = self.x
        previous = warm.x
        if warm.w0 is not None and not np.array_equal(warm.w0, qp.w0):
            # the previous weights, reached from the new holdings
            n = self.n
            w = warm.w0 + previous[:n] - previous[n:]
            previous = np.concatenate([np.maximum(w - qp.w0, 0.0), np.maximum(qp.w0 - w, 0.0)])
        floor = WARM_GAP * np.where(np.isfinite(cold - qp.lb), cold - qp.lb, 1.0)
        lo = qp.lb + np.minimum(floor, 0.5 * (qp.ub - qp.lb))
        hi = qp.ub - np.minimum(floor, 0.5 * (qp.ub - qp.lb))
        x = np.where(self.free, np.clip(previous, np.where(self.has_lb, lo, -np.inf), np.where(self.has_ub, hi, np.inf)),
                     cold)
        self.x = x
        h = self.evaluate()
        ratio = warm.scale / self.scale
        mu = mu0 if warm.primal_only else WARM_MU * mu0
        self.s = np.maximum(-h, WARM_GAP * SLACK_FLOOR)
        self.gap_l = np.where(self.has_lb, x - qp.lb, 1.0)
        self.gap_u = np.where(self.has_ub, qp.ub - x, 1.0)
        if warm.primal_only:  # multipliers on the central path at the cold start's complementarity
            self.z, self.zl, self.zu = mu / self.s, np.where(self.has_lb, mu / self.gap_l, 0.0), np.where(self.has_ub, mu / self.gap_u, 0.0)
            return
        self.z = np.maximum(warm.z * ratio, mu / self.s)
        self.zl = np.where(self.has_lb, np.maximum(warm.zl * ratio, mu / self.gap_l), 0.0)
        self.zu = np.where(self.has_ub, np.maximum(warm.zu * ratio, mu / self.gap_u), 0.0)
        self.nu = warm.nu * ratio

    # ------------------------------------------------------------------ functions of x
    def evaluate(self) -> np.ndarray:
        """h(x) (inequalities ≤ 0), and the row values, Σ(w − b_o) and cap gradients at x (kept on self)."""
        qp, x = self.qp, self.x
        w = qp.weights(x)
        self.values = qp.row_values(w, float(x.sum()))
        self.sa = qp.risk_sigma(w)
        caps = np.zeros(self.n_caps)
        self.cap_grads = []
        for k, cap in enumerate(qp.caps):
            a = w - cap.center
            shared = self.sa if self.cap_shares_risk[k] else None
            qa = shared if shared is not None else qp.sigma(a, cap.factor, cap.specific)
            caps[k] = a @ qa / cap.tau2 - 1.0
            grad = 2.0 * qa / cap.tau2
            if cap.slack is not None:  # an elastic slack column (_elastic_ipm): no exposure, no d
                caps[k] -= w[cap.slack]
                grad[cap.slack] -= 1.0
            self.cap_grads.append(grad)
        self.h = np.concatenate([self.values[self.up_side] - qp.hi[self.up_side],
                                 qp.lo[self.lo_side] - self.values[self.lo_side], caps])
        return self.h

    def jac(self, dx: np.ndarray) -> np.ndarray:
        n = self.n
        dw = dx[:n] - dx[n:]
        row_change = self.Gw.T @ dw + self.at * dx.sum()
        caps = np.array([g @ dw for g in self.cap_grads])
        return np.concatenate([row_change[self.up_side], -row_change[self.lo_side], caps])

    def row_multipliers(self, vec: np.ndarray, lower_sign: float = -1.0) -> np.ndarray:
        """Per row, from a vector over the inequality sides: the upper side's entry plus
        ``lower_sign`` × the lower side's (−1: a signed multiplier; +1: the summed weights ρ)."""
        rm = np.zeros(self.n_rows)
        rm[self.up_side] += vec[: self.m_up]
        rm[self.lo_side] += lower_sign * vec[self.m_up: self.m_lin]
        return rm

    def jac_t(self, vec: np.ndarray, nu: np.ndarray | None = None) -> np.ndarray:
        """J_hᵀ·vec (+ Aᵀ·nu), in x-space with the fixed coordinates zeroed."""
        rm = self.row_multipliers(vec)
        if nu is not None:
            rm[self.rows.eq] += nu
        w_part = self.Gw @ rm
        for k, g in enumerate(self.cap_grads):
            w_part = w_part + vec[self.m_lin + k] * g
        out = _expand(w_part, float(self.at @ rm))
        out[self.fixed] = 0.0
        return out

    def lagrangian_gradient(self, *, fixed_too: bool = False, regularizer: bool = True) -> np.ndarray:
        """∇φ/scale + J_hᵀz + Aᵀν, without the bounds' multipliers; 0 on the fixed coordinates
        unless ``fixed_too`` (their own gradient, for their prices)."""
        g = _objective_gradient(self.qp, self.x, self.sa) / self.scale + (self.reg if regularizer else 0.0)
        if not fixed_too:
            g[self.fixed] = 0.0
            return g + self.jac_t(self.z, self.nu)
        rm = self.row_multipliers(self.z)
        rm[self.rows.eq] += self.nu
        w_part = self.Gw @ rm
        for k, gk in enumerate(self.cap_grads):
            w_part = w_part + self.z[self.m_lin + k] * gk
        return g + _expand(w_part, float(self.at @ rm))

    # ------------------------------------------------------------------ certificates
    def farkas(self) -> float:
        """A lower bound on min over the boxes of yᵀg(x), y = (z, ν) scaled to a largest entry of 1.

        g collects the inequality rows and caps (h ≤ 0) and the equality rows (Ax − b = 0). For y with
        z ≥ 0, yᵀg is convex, so it lies above its linearisation at the iterate x̄:
        yᵀg(x) ≥ yᵀg(x̄) + cᵀ(x − x̄), c = J_hᵀz + Aᵀν, whose minimum over the boxes lb ≤ x ≤ ub is
        separable: Σⱼ min(cⱼ(lbⱼ − x̄ⱼ), cⱼ(ubⱼ − x̄ⱼ)). ub may be tightened by any bound every feasible
        point keeps (:func:`implied_upper`: a turnover cap bounds every trade), which keeps the
        minimum finite where the boxes alone have no upper bound. Any feasible x gives yᵀg(x) ≤ 0, so a positive
        bound proves that none exists (Farkas' lemma in its convex form; e.g. Boyd & Vandenberghe,
        Convex Optimization, §5.8). As an infeasible problem is iterated the multipliers of the
        conflicting rows grow without bound and the scaled y approaches such a certificate; on a
        feasible problem the bound cannot be positive, whatever the iterate. Where a coordinate has
        no bound on the side cⱼ points to, the exact minimum is −∞ unless cⱼ = 0; an iterate's y
        never makes it exactly 0, so |cⱼ| ≤ FARKAS_DUAL_TOL counts as 0: an approximate certificate
        to that tolerance, the rule general conic solvers apply to theirs (Clarabel's
        ``tol_infeas_rel``, OSQP's ``eps_prim_inf``).
        """
        size = max(float(np.max(self.z, initial=0.0)), float(np.max(np.abs(self.nu), initial=0.0)))
        if not size > 0 or not np.isfinite(size):
            return -np.inf
        z, nu = self.z / size, self.nu / size
        c = self.jac_t(z, nu)
        r_eq = self.values[self.rows.eq] - self.b_eq
        return box_minimum(float(z @ self.h + nu @ r_eq), c, self.qp, self.x, self.free, self.implied_ub)

    def unbounded(self) -> bool:
        """Whether the direction d = x/‖x‖ of a diverging iterate certifies an unbounded objective:
        d keeps every box (dⱼ ≥ 0 where lbⱼ is finite, ≤ 0 where ubⱼ is), moves no equality row,
        moves no inequality row towards its finite limit, leaves every cap's and the objective's
        quadratic part at 0 (dᵀΣd = 0 along it) and lowers the linear part of the objective."""
        qp = self.qp
        d = np.where(self.free, self.x, 0.0)
        d = d / max(float(np.max(np.abs(d))), 1e-300)
        n = self.n
        dw = d[:n] - d[n:]
        tol = RECESSION_TOL
        if np.any(d[np.isfinite(qp.lb) & self.free] < -tol) or np.any(d[np.isfinite(qp.ub) & self.free] > tol):
            return False
        change = self.Gw.T @ dw + self.at * d.sum()
        finite_hi, finite_lo = np.isfinite(qp.hi), np.isfinite(qp.lo)
        if np.any(change[finite_hi] > tol) or np.any(change[finite_lo] < -tol):
            return False
        for cap in qp.caps:
            if dw @ qp.sigma(dw, cap.factor, cap.specific) > tol:
                return False
        if qp.risk_weight and dw @ qp.sigma(dw) > tol:
            return False
        slope = float(-qp.alpha @ dw + qp.cost @ (d[:n] + d[n:]))
        return slope < -tol

    # ------------------------------------------------------------------ state
    def state(self) -> tuple[np.ndarray, ...]:
        return tuple(v.copy() for v in (self.x, self.s, self.z, self.zl, self.zu, self.nu, self.gap_l, self.gap_u))

    def restore(self, state: tuple[np.ndarray, ...]) -> None:
        self.x, self.s, self.z, self.zl, self.zu, self.nu, self.gap_l, self.gap_u = (v.copy() for v in state)
        self.evaluate()

    def residuals(self) -> dict[str, float]:
        self.r_d = self.lagrangian_gradient() - self.zl + self.zu
        self.r_d[self.fixed] = 0.0
        self.r_h = self.h + self.s
        self.r_eq = self.values[self.rows.eq] - self.b_eq
        hl, hu = self.has_lb, self.has_ub
        self.comp = float(self.s @ self.z + (self.gap_l * self.zl)[hl].sum() + (self.gap_u * self.zu)[hu].sum())
        self.mu = self.comp / max(self.n_comp, 1)
        obj = self.qp.objective(self.x, self.sa) / self.scale
        # the linear rows' and the caps' largest residuals apart (a cap's is in q/τ² − 1: its risk is
        # off by about half of it, relative), and the larger of the two
        rows = float(max(np.max(np.abs(self.r_h[: self.m_lin]), initial=0.0), np.max(np.abs(self.r_eq), initial=0.0)))
        caps = float(np.max(np.abs(self.r_h[self.m_lin:]), initial=0.0))
        return {
            "primal": max(rows, caps),
            "primal_rows": rows,
            "primal_caps": caps,
            "dual": float(np.max(np.abs(self.r_d), initial=0.0)),
            "gap": self.comp / (1.0 + abs(obj)),
            "objective": obj,
        }

    # ------------------------------------------------------------------ one Newton system
    def newton(self) -> _Newton:
        qp, n = self.qp, self.n
        z_cap = self.z[self.m_lin:]
        weight = 2.0 * qp.risk_weight / self.scale
        dW = weight * qp.d
        S = weight * qp.F
        for k, cap in enumerate(qp.caps):
            c = 2.0 * z_cap[k] / cap.tau2
            if cap.specific:
                dW = dW + c * qp.d
            if cap.factor:
                S = S + c * qp.F
        rho = self.z / self.s
        rho_row = self.row_multipliers(rho, lower_sign=1.0)
        if len(self.rows.factor_only):
            S = S + self.Ay_fac.T @ (rho_row[self.rows.factor_only][:, None] * self.Ay_fac)
        barrier = np.where(self.has_lb, self.zl / self.gap_l, 0.0) + np.where(self.has_ub, self.zu / self.gap_u, 0.0)
        curvature = np.zeros(n)
        if qp.impact is not None:
            curvature = qp.impact * _impact(self.x[:n] + self.x[n:])[2] / self.scale
        kkt = _Newton(qp.B, dW, S, barrier, self.fixed, n, curvature, self.b_norm2)
        gen = self.rows.general
        root = np.sqrt(rho_row[gen])
        root_caps = np.sqrt(rho[self.m_lin:])
        W = np.hstack([self.Gw[:, gen] * root[None, :], *[(r * g)[:, None] for r, g in zip(root_caps, self.cap_grads)]])
        T = np.concatenate([self.at[gen] * root, np.zeros(self.n_caps)])
        eq = self.rows.eq
        kkt.factor(W, T, self.Gw[:, eq], self.at[eq])
        return kkt

    def direction(self, kkt: _Newton, r_s: np.ndarray, r_l: np.ndarray, r_u: np.ndarray) -> tuple[np.ndarray, ...]:
        hl, hu = self.has_lb, self.has_ub
        rhs = -self.r_d - self.jac_t((-r_s + self.z * self.r_h) / self.s)
        rhs -= np.where(hl, r_l / self.gap_l, 0.0)
        rhs += np.where(hu, r_u / self.gap_u, 0.0)
        dx, dnu = kkt.solve(rhs, -self.r_eq)
        dx[self.fixed] = 0.0
        ds = -self.r_h - self.jac(dx)
        dz = (-r_s - self.z * ds) / self.s
        dzl = np.where(hl, (-r_l - self.zl * dx) / self.gap_l, 0.0)
        dzu = np.where(hu, (-r_u + self.zu * dx) / self.gap_u, 0.0)
        return dx, dnu, ds, dz, dzl, dzu

    def max_step(self, dx: np.ndarray, ds: np.ndarray, dz: np.ndarray, dzl: np.ndarray, dzu: np.ndarray) -> float:
        hl, hu = self.has_lb, self.has_ub
        # one pass over the x-coordinates: where a side has no bound its gap and multiplier are held
        # positive (gap 1, multiplier 0 with a zero direction), so they never limit the step
        x_side = np.concatenate([np.where(hl, dx, 0.0), np.where(hu, -dx, 0.0), np.where(hl, dzl, 0.0),
                                 np.where(hu, dzu, 0.0), ds, dz])
        value = np.concatenate([self.gap_l, self.gap_u, np.where(hl, self.zl, 1.0), np.where(hu, self.zu, 1.0),
                                self.s, self.z])
        return _step_to_boundary(value, x_side)

    def iterate(self) -> float:
        """One predictor-corrector step; returns the step length."""
        kkt = self.newton()
        hl, hu = self.has_lb, self.has_ub
        r_s = self.s * self.z
        r_l = np.where(hl, self.gap_l * self.zl, 0.0)
        r_u = np.where(hu, self.gap_u * self.zu, 0.0)
        dxa, _, dsa, dza, dzla, dzua = self.direction(kkt, r_s, r_l, r_u)
        a = min(1.0, self.max_step(dxa, dsa, dza, dzla, dzua))
        comp_aff = float((self.s + a * dsa) @ (self.z + a * dza)
                         + ((self.gap_l + a * dxa) * (self.zl + a * dzla))[hl].sum()
                         + ((self.gap_u - a * dxa) * (self.zu + a * dzua))[hu].sum())
        sigma = min(1.0, (comp_aff / max(self.comp, 1e-300)) ** 3)
        target = sigma * self.mu
        r_s = self.s * self.z + dsa * dza - target
        r_l = np.where(hl, self.gap_l * self.zl + dxa * dzla - target, 0.0)
        r_u = np.where(hu, self.gap_u * self.zu - dxa * dzua - target, 0.0)
        dx, dnu, ds, dz, dzl, dzu = self.direction(kkt, r_s, r_l, r_u)
        if not all(np.isfinite(v).all() for v in (dx, dnu, ds, dz, dzl, dzu)):
            raise FloatingPointError("non-finite Newton direction")
        step = min(1.0, STEP_FRACTION * self.max_step(dx, ds, dz, dzl, dzu))
        if self.verbose:
            print(f"    sigma {sigma:.2e} alpha_aff {a:.3f} step {step:.3f}")
        self.x = self.x + step * dx
        self.s = self.s + step * ds
        self.z = self.z + step * dz
        self.zl = self.zl + step * dzl
        self.zu = self.zu + step * dzu
        self.nu = self.nu + step * dnu
        self.gap_l = np.where(hl, self.gap_l + step * dx, 1.0)
        self.gap_u = np.where(hu, self.gap_u - step * dx, 1.0)
        self.evaluate()
        # slack reset for the caps: a step is exact for linear rows, but a cap's slack and value
        # drift apart by the curvature of q; where the cap holds (−h > 0) and the slack is not far
        # from −h, the slack is set to −h, so an inactive cap's residual is zero, not slowly shrinking
        caps = slice(self.m_lin, None)
        self._cover_with_slack_columns()
        held = -self.h[caps]
        reset = (held > 0) & (held >= SLACK_RESET * self.s[caps])
        self.s[caps] = np.where(reset, held, self.s[caps])
        return step

    def _cover_with_slack_columns(self) -> None:
        """A cap with an elastic slack column σ (:mod:`trimtab.construct._elastic_ipm`) that the step
        left breached beyond its slack s (h + s > 0: the step is exact for linear rows, but q curves
        by step²·dwᵀQdw/τ², which a tight cap magnifies) has σ raised by the breach, so the cap's
        residual is zero again. σ enters no other row (its trade is netted out) and only its lower
        bound limits it, so the point stays inside every box; the objective pays σ's price for it.
        Measured at 5,000 × 50 with a 0.02% TE cap: without it the cap's residual fell by about half
        an iteration and the run stalled at 7.8e-4."""
        for k, cap in enumerate(self.qp.caps):
            j = self.m_lin + k
            if cap.slack is None or not self.free[cap.slack]:
                continue
            excess = float(self.h[j] + self.s[j])
            if excess > 0:
                self.x[cap.slack] += excess
                self.gap_l[cap.slack] += excess if self.has_lb[cap.slack] else 0.0
                self.h[j] -= excess

    # ------------------------------------------------------------------ the loop
    def run(self, max_iter: int, stop: Callable[[np.ndarray], bool] | None = None) -> Solution:
        start = time.perf_counter()
        status = "max_iter"
        best: tuple[float, tuple[np.ndarray, ...], dict[str, float]] | None = None
        acceptable: tuple[float, tuple[np.ndarray, ...], dict[str, float]] | None = None
        short_steps = since_best = 0
        it = 0
        for it in range(1, max_iter + 1):
            res = self.residuals()
            merit = max(res["primal"] / TOL_PRIMAL, res["dual"] / TOL_DUAL, res["gap"] / TOL_GAP)
            if not np.isfinite(merit):
                status = "numerical"
                break
            if best is None or merit < best[0]:
                best = (merit, self.state(), res)
            if (res["primal"] <= ACCEPT_PRIMAL and res["dual"] <= ACCEPT_DUAL and res["gap"] <= ACCEPT_GAP
                    and (acceptable is None or res["gap"] < acceptable[0])):
                acceptable = (res["gap"], self.state(), res)
            if self.verbose:
                print(f"{it:3d} {res['objective']:+.6e} primal {res['primal']:.1e} dual {res['dual']:.1e} "
                      f"gap {res['gap']:.1e} mu {self.mu:.1e}")
            if merit <= 1.0:
                status = "optimal"
                break
            if stop is not None and res["primal"] <= STOP_PRIMAL and stop(self.x):
                status = "stopped"
                break
            if acceptable is None and res["primal"] > TOL_PRIMAL and self.farkas() > FARKAS_TOL:
                status = "infeasible"
                break
            if np.max(np.abs(self.x[self.free]), initial=0.0) > DIVERGED:
                status = "unbounded" if self.unbounded() else "diverged"
                break
            try:
                step = self.iterate()
            except (np.linalg.LinAlgError, FloatingPointError, ValueError):
                status = "numerical"
                break
            short_steps = short_steps + 1 if step < SHORT_STEP else 0
            if step < MIN_STEP or (acceptable is not None and short_steps >= 2):
                status = "stalled"
                break
            # once an acceptable iterate exists, STALL_ITER iterations that do not improve on the best
            # end the run: past the point where the Newton solves lose their last digits the
            # duality gap still shrinks but the dual residual no longer does
            since_best = 0 if best[0] == merit else since_best + 1
            if acceptable is not None and since_best >= STALL_ITER:
                status = "stalled"
                break
        assert best is not None
        if status in ("infeasible", "unbounded", "stopped"):
            # the last iterate is the certificate: its multipliers (infeasible), its direction (unbounded)
            state = self.state()
        elif status != "optimal" and acceptable is not None:
            _, state, res = acceptable
            status = "optimal_stalled"
        else:
            _, state, res = best
        self.restore(state)
        self.residuals()
        return self.solution(status, it, time.perf_counter() - start, res)

    def solution(self, status: str, iterations: int, seconds: float, res: dict[str, float]) -> Solution:
        qp, scale, rows = self.qp, self.scale, self.rows
        z_up, z_lo, z_cap = self.z[: self.m_up], self.z[self.m_up: self.m_lin], self.z[self.m_lin:]
        row_upper, row_lower = np.zeros(self.n_rows), np.zeros(self.n_rows)
        row_upper[self.up_side] = z_up * scale
        row_lower[self.lo_side] = z_lo * scale
        row_upper[rows.eq] = np.maximum(self.nu, 0.0) * scale
        row_lower[rows.eq] = np.maximum(-self.nu, 0.0) * scale
        g = self.lagrangian_gradient(fixed_too=True, regularizer=False)
        return Solution(
            x=self.x, converged=status in ("optimal", "optimal_stalled"), status=status, iterations=iterations, seconds=seconds,
            objective=qp.objective(self.x, self.sa), row_upper=row_upper, row_lower=row_lower, cap_duals=z_cap * scale,
            bound_upper=self.zu * scale, bound_lower=self.zl * scale, reduced_gradient=g * scale,
            residuals={k: v for k, v in res.items() if k != "objective"},
            warm=Warm(self.x.copy(), self.s.copy(), self.z.copy(), self.zl.copy(), self.zu.copy(), self.nu.copy(),
                      self.scale, qp.w0.copy()),
        )
