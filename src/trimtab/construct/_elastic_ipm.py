"""The elastic problem of the infeasibility diagnosis in factor form, by FACTOR_IPM (#21).

:func:`trimtab.construct._elastic.elastic_weights` minimises Σ pₐ·sₐ over the slacks s ≥ 0 of the
movable limits (``value ≤ upper + s``, ``value ≥ lower − s``, one slack per element, pₐ = 1/|limit|
of its group), every other hard limit as written. Here each slack is one more coordinate of w: a
*slack column* with no exposure and no specific variance, held at w₀ = 0, that may only be bought
(its u ≥ 0, its v fixed at 0), whose alpha is −pₐ (so the objective −αᵀw is the penalty). A movable
linear row gets a column with coefficient −1 (upper side) or +1 (lower side); a row on trades (a
turnover cap) gets −at on every slack column, so that buying a slack is not a trade.

A movable risk cap's slack is in volatility (√(ppy·q) ≤ cap + s), not linear in the method's form
q/τ² − 1 ≤ 0. It gets a slack σ on that form (:attr:`trimtab.construct._ipm_problem.Cap.slack`):
σ ≥ q/τ² − 1 means s = cap·(√(1 + σ) − 1), and σ is priced by majorise–minimise (:func:`_majorised`):
pₐ·cap/(2√(1 + σₖ)), re-solved warm until the price settles. Pricing σ once at pₐ·cap/2 (the first
order) was tried and moved the limits differently from the cvxpy path once the cap had to move far
(the demo's 0.5% TE cap to 2.2%).

Per-asset (box) limits cannot get a slack column each without N more dense rows, so a movable box
limit is held as written, and the answer is kept only if holding it was optimal anyway: the
multiplier of each of its bounds is at most its price pₐ (then the soft problem's optimality
conditions hold with that slack at 0). When holding it leaves no feasible point, the rows that may
not move are tested alone: infeasible, the elastic problem has no solution (None). Otherwise, and whenever FACTOR_IPM cannot take the rows,
the cvxpy path answers (:data:`UNANSWERED`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from trimtab.construct import _fast, _ipm
from trimtab.construct._diagnosis_ipm import UNANSWERED, available, feasible
from trimtab.construct.constraints._base import Rows, split_box_duals

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: Majorise–minimise steps for a movable cap's slack, and the relative change of its price that ends them.
MM_ITER = 12
MM_TOL = 1e-7
#: A held box bound is optimal for the soft problem when its multiplier is at most its price × (1 + this).
PRICE_TOL = 1e-6


def elastic(problem: RebalanceProblem, rows: Sequence[Rows], movable: Mapping[int, tuple[np.ndarray, float]]) -> object:
    """Weights minimising the priced slacks of the movable elements, every other row as written.

    Parameters
    ----------
    problem : RebalanceProblem
    rows : sequence of Rows
        Every hard row of the problem.
    movable : mapping id(rows) → (mask of movable elements, price per unit of slack)

    Returns
    -------
    numpy.ndarray, None or UNANSWERED
        The weights; None when the rows held as written cannot hold together; UNANSWERED for cvxpy.
    """
    if not available(problem) or _fast.unsupported(problem, rows) is not None:
        return UNANSWERED
    tr = _fast.translate(problem, rows)
    if tr is None:
        return UNANSWERED
    qp, columns, caps = _with_slacks(tr, movable)
    # cold: a primal start at an earlier round's optimum (tried) stalled twice at the boundary on 1,500 x 15
    sol = _majorised(qp, caps)
    if sol is None:
        return UNANSWERED
    if sol.status == "infeasible":
        held = [r for r in tr.box_rows if id(r) in movable]
        if not held:
            return None
        # a movable box held as written might have been the way out: the rows that may not move
        # decide alone (their feasibility test, in factor form when it can answer)
        fixed = [r for r in rows if id(r) not in movable]
        return None if feasible(problem, fixed) is False else UNANSWERED
    if not sol.converged or not _boxes_optimal(tr, sol, movable, columns):
        return UNANSWERED
    return qp.weights(sol.x)[: tr.qp.n]


def _majorised(qp: _ipm.QP, caps: list[tuple[int, float, float]]) -> _ipm.Solution | None:
    """Solve, re-pricing each cap's slack σ until the prices settle (None: they did not).

    A cap's slack is in volatility: the penalty is pₐ·s with s = cap·(√(1 + σ) − 1), concave in σ.
    Its tangent at σₖ lies above it, so minimising with σ priced at pₐ·cap/(2√(1 + σₖ)) and
    updating σₖ is a majorise–minimise iteration: the true penalty falls at every step and its
    fixed point satisfies the optimality conditions of the elastic problem in s, which is convex.
    Each step starts warm from the last.
    """
    sol = None
    alpha = qp.alpha.copy()
    for _ in range(MM_ITER):
        with _fast._blas_limit():
            sol = _ipm.solve(qp, warm=None if sol is None else sol.warm)
            if sol.status in ("stalled", "numerical"):
                # a step blocked at the boundary near the end (measured: primal 7.5e-7, a zero step):
                # the same point pushed back into the interior (a warm start) usually finishes
                sol = _ipm.solve(qp, warm=sol.warm)
        if sol.status == "infeasible" or not sol.converged or not caps:
            return sol
        w = qp.weights(sol.x)
        settled = True
        for column, price, cap in caps:
            sigma = max(float(w[column]), 0.0)
            new = price * cap / (2.0 * np.sqrt(1.0 + sigma))
            settled &= abs(new + alpha[column]) <= MM_TOL * new
            alpha[column] = -new
        if settled:
            return sol
        qp = replace(qp, alpha=alpha.copy())
    return None


def _with_slacks(tr: _fast.Translation, movable: Mapping[int, tuple[np.ndarray, float]]
                 ) -> tuple[_ipm.QP, int, list[tuple[int, float, float]]]:
    """The QP with one slack column per movable side of a linear row and per movable cap, and per cap
    slack (its column, its price per unit of volatility, the cap)."""
    qp = tr.qp
    n, n_rows = qp.n, len(qp.lo)
    coefficients: list[np.ndarray] = []  # per column: its coefficients on the rows
    prices: list[float] = []
    cap_list = list(qp.caps)
    cap_slacks: list[tuple[int, float, float]] = []
    for r, idx in tr.linear_rows:
        mask, price = movable.get(id(r), (None, 0.0))
        if mask is None:
            continue
        for element in np.flatnonzero(mask):
            row = idx[element]
            for sign, limit in ((-1.0, qp.hi[row]), (1.0, qp.lo[row])):
                if np.isfinite(limit):
                    column = np.zeros(n_rows)
                    column[row] = sign
                    coefficients.append(column)
                    prices.append(price)
    for r, k in tr.cap_rows:
        mask, price = movable.get(id(r), (None, 0.0))
        if mask is None or not mask.any():
            continue
        column = n + len(prices)
        cap_list[k] = replace(cap_list[k], slack=column)
        cap_slacks.append((column, price, float(r.upper[0])))
        coefficients.append(np.zeros(n_rows))
        prices.append(price * float(r.upper[0]) / 2.0)  # the first tangent, at σ = 0
    m = len(prices)
    slack_aw = np.column_stack(coefficients) if m else np.zeros((n_rows, 0))
    slack_aw = slack_aw - qp.at[:, None]  # a slack bought is not a trade
    zeros, inf = np.zeros(m), np.full(m, np.inf)
    widened = replace(
        qp,
        B=np.vstack([qp.B, np.zeros((m, qp.B.shape[1]))]), d=np.concatenate([qp.d, zeros]),
        w0=np.concatenate([qp.w0, zeros]), risk_weight=0.0,
        risk_center=np.concatenate([qp.risk_center, zeros]),
        alpha=np.concatenate([np.zeros(n), -np.asarray(prices)]), cost=np.zeros(n + m),
        lb=np.concatenate([qp.lb[:n], zeros, qp.lb[n:], zeros]),
        ub=np.concatenate([qp.ub[:n], inf, qp.ub[n:], zeros]),
        Aw=np.hstack([qp.Aw, slack_aw]),
        caps=[replace(c, center=np.concatenate([c.center, zeros])) for c in cap_list],
        impact=None, trade_regularizer=_fast.TRADE_REGULARIZER,
    )
    return widened, m, cap_slacks


def _boxes_optimal(tr: _fast.Translation, sol: _ipm.Solution, movable: Mapping[int, tuple[np.ndarray, float]],
                   m: int) -> bool:
    """Every movable box bound held as written has a multiplier within its price (see the module notes)."""
    boxes = [r for r in tr.box_rows if id(r) in movable]
    if not boxes:
        return True
    n = tr.qp.n

    def real(v: np.ndarray) -> np.ndarray:  # the (u, v) of the assets, without the slack columns
        return np.concatenate([v[:n], v[n + m: 2 * n + m]])

    trimmed = replace(sol, reduced_gradient=real(sol.reduced_gradient), bound_upper=real(sol.bound_upper),
                      bound_lower=real(sol.bound_lower))
    up_all, lo_all = _fast._box_duals(tr, trimmed)
    duals = split_box_duals(tr.box_rows, tr.box_limits, up_all, lo_all)
    for r in boxes:
        mask, price = movable[id(r)]
        up, lo = duals[id(r)]
        limit = price * (1.0 + PRICE_TOL)
        if np.any(up[mask] > limit) or np.any(lo[mask] > limit):
            return False
    return True
