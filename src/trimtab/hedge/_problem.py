"""The overlay's M-dimensional quadratic problem, in factor form.

For a relative book a (N: w − b against a benchmark, or w) and notionals h (M, fractions of NAV),
the hedged book is a + X·h, with factor exposures x(h) = Bᵀa + E·h and variance

    x(h)ᵀ F x(h) + Σᵢ dᵢ (aᵢ + (Xh)ᵢ)² + Σⱼ sⱼ hⱼ²  =  hᵀQh + 2cᵀh + const,
    Q = EᵀFE + Xᵀ diag(d) X + diag(s),   c = EᵀF·Bᵀa + Xᵀ(d∘a),

computed without any N×N matrix. Targets fix some exposures: A·h = r with A the targeted rows of E.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from trimtab.errors import InfeasibleError, SolverError

#: A target counts as reachable when the least-squares fit of A·h = r misses by less than this
#: (in exposure units) relative to max(1, |r|).
TARGET_TOLERANCE = 1e-9


@dataclass(frozen=True, eq=False)
class Quadratic:
    """hᵀQh + 2cᵀh + constant: the variance of the hedged relative book, per period."""

    Q: np.ndarray
    c: np.ndarray
    constant: float


def quadratic(B: np.ndarray, F: np.ndarray, d: np.ndarray, a: np.ndarray, E: np.ndarray, X: np.ndarray, s: np.ndarray) -> Quadratic:
    """Q, c and the constant aᵀΣa in O(N·(K + M)·M) time."""
    x0 = B.T @ a
    FE = F @ E
    dX = d[:, None] * X
    Q = E.T @ FE + X.T @ dX + np.diag(s)
    Q = 0.5 * (Q + Q.T)
    c = FE.T @ x0 + dX.T @ a
    constant = float(x0 @ F @ x0 + d @ (a * a))
    return Quadratic(Q, c, constant)


def solve_exact(quad: Quadratic, A: np.ndarray, r: np.ndarray, names: list[str]) -> np.ndarray:
    """argmin hᵀQh + 2cᵀh subject to A·h = r, by the null-space method (targets met to rounding).

    h = h₀ + Z·y with h₀ the minimum-norm solution of A·h = r and Z an orthonormal basis of A's null
    space; y solves (ZᵀQZ)·y = −Zᵀ(Q·h₀ + c) (minimum-norm least squares when ZᵀQZ is singular, i.e.
    some instruments are redundant).
    """
    M = quad.Q.shape[0]
    if A.shape[0]:
        u, sv, vt = np.linalg.svd(A, full_matrices=True)
        tol = max(A.shape) * np.finfo(float).eps * (sv[0] if len(sv) else 0.0)
        rank = int(np.sum(sv > tol))
        h0 = vt[:rank].T @ ((u[:, :rank].T @ r) / sv[:rank])
        miss = A @ h0 - r
        if np.any(np.abs(miss) > TARGET_TOLERANCE * np.maximum(1.0, np.abs(r))):
            worst = [names[i] for i in np.argsort(-np.abs(miss))[: min(5, len(names))] if abs(miss[i]) > TARGET_TOLERANCE]
            raise InfeasibleError(
                f"targets: the {M} instruments cannot reach all {len(names)} target exposures together "
                f"(largest miss on {', '.join(worst)}); target fewer factors or add an instrument exposed to them"
            )
        Z = vt[rank:].T
    else:
        h0 = np.zeros(M)
        Z = np.eye(M)
    if Z.shape[1] == 0:
        return h0
    H = Z.T @ quad.Q @ Z
    g = -(Z.T @ (quad.Q @ h0 + quad.c))
    y = np.linalg.lstsq(H, g, rcond=None)[0]
    return h0 + Z @ y


def solve_capped(quad: Quadratic, A: np.ndarray, r: np.ndarray, max_gross: float, names: list[str]) -> np.ndarray:
    """The same problem with Σⱼ|hⱼ| ≤ max_gross, solved with cvxpy (Clarabel), then checked."""
    import cvxpy as cp

    M = quad.Q.shape[0]
    scale = 1.0 / max(float(np.max(np.abs(np.diag(quad.Q)))), 1e-300)
    h = cp.Variable(M)
    objective = cp.quad_form(h, cp.psd_wrap(quad.Q * scale)) + 2 * (quad.c * scale) @ h
    constraints: list[Any] = [cp.norm1(h) <= max_gross]
    if A.shape[0]:
        constraints.append(A @ h == r)
    problem = cp.Problem(cp.Minimize(objective), constraints)
    try:
        problem.solve(solver=cp.CLARABEL, tol_gap_abs=1e-12, tol_gap_rel=1e-12, tol_feas=1e-12)
    except cp.error.SolverError as err:
        raise SolverError(f"overlay: the solver failed on the max_gross problem: {err}") from err
    if problem.status in ("infeasible", "infeasible_inaccurate"):
        raise InfeasibleError(f"max_gross {max_gross:g}: the targets need more gross notional than that ({', '.join(names) or 'no targets'})")
    if problem.status not in ("optimal", "optimal_inaccurate") or h.value is None:
        raise SolverError(f"overlay: the solver returned {problem.status} on the max_gross problem")
    value = np.asarray(h.value, dtype=float)
    if A.shape[0]:
        # polish onto the targets: the smallest move that makes A·h = r hold to rounding
        value = value + np.linalg.lstsq(A, r - A @ value, rcond=None)[0]
    return value
