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
from trimtab.construct._diagnosis_ipm import UNANSWERED, available, feasible, nearest_point
from trimtab.construct.constraints._base import Rows, split_box_duals

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: Majorise–minimise steps for a movable cap's slack, and the relative change of its price that ends them.
MM_ITER = 12
MM_TOL = 1e-7
#: Residuals within which a stalled elastic run is taken (FACTOR_IPM's own ACCEPT_* are 1e-7, 1e-6, 1e-6).
#: A cap's residual is in q/τ² − 1, so 1e-5 leaves its risk within 5e-6 of the cap, relative. A movable
#: cap's residual is kept at zero by its slack column (_ipm._Run._cover_with_slack_columns), so this
#: is a hard cap's: the moves are read on the movable limits, and a remembered point answers a later
#: question only if it holds every row within its verification tolerance.
DIAGNOSIS_ACCEPT = {"primal_rows": 1e-7, "primal_caps": 1e-5, "dual": 1e-5, "gap": 1e-6}
#: A phase-one start's slacks exceed the breach they cover by this much (relative, and absolute).
START_MARGIN = 1e-3
#: A slack column at or below this counts as zero (an interior-point optimum leaves ~μ/price).
ZERO_SLACK = 1e-9
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
    sol = _majorised(qp, caps, tr.qp.n, _phase_one_start(qp, tr.qp.n, rows))
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


def _phase_one_start(qp: _ipm.QP, n: int, rows: Sequence[Rows]) -> _ipm.Warm | None:
    """A primal start at the diagnosis' remembered point nearest to holding ``rows`` (an earlier
    elastic optimum or feasibility point), with every slack column set to what that point breaches
    its row or cap by: the movable limits then hold from the first iterate, and only the rows held as
    written are left to reach (None outside a diagnosis or without a point)."""
    near = nearest_point(rows)
    if near is None:
        return None
    w = near.x[:n]
    m = qp.n - n
    ext = np.concatenate([w, np.zeros(m)])
    values = qp.row_values(ext, float(np.abs(w - qp.w0[:n]).sum()))
    slack = np.zeros(m)
    coefficient = qp.Aw[:, n:] + qp.at[:, None]  # ±1 on its row (a slack bought is not a trade)
    for j in range(m):
        row = int(np.argmax(np.abs(coefficient[:, j])))
        if coefficient[row, j] < 0:
            slack[j] = max(values[row] - qp.hi[row], 0.0)
        elif coefficient[row, j] > 0:
            slack[j] = max(qp.lo[row] - values[row], 0.0)
    for cap in qp.caps:
        if cap.slack is not None:
            a = ext - cap.center
            slack[cap.slack - n] = max(float(a @ qp.sigma(a, cap.factor, cap.specific)) / cap.tau2 - 1.0, 0.0)
    return _ipm.Warm.from_weights(np.concatenate([w, slack * (1.0 + START_MARGIN) + START_MARGIN]))


def _majorised(qp: _ipm.QP, caps: list[tuple[int, float, float]], n_assets: int,
               start: _ipm.Warm | None = None) -> _ipm.Solution | None:
    """Solve, re-pricing each cap's slack σ until the prices settle (None: they did not).

    A cap's slack is in volatility: the penalty is pₐ·s with s = cap·(√(1 + σ) − 1), concave in σ.
    Its tangent at σₖ lies above it, so minimising with σ priced at pₐ·cap/(2√(1 + σₖ)) and
    updating σₖ is a majorise–minimise iteration: the true penalty falls at every step and its
    fixed point satisfies the optimality conditions of the elastic problem in s, which is convex.
    Each step starts warm from the last.
    """
    sol = None
    alpha = qp.alpha.copy()
    if start is not None:  # the first tangent at the start's σ (the MM may start anywhere: each tangent lies above)
        for column, price, cap in caps:
            alpha[column] = -price * cap / (2.0 * np.sqrt(1.0 + max(float(start.x[column]), 0.0)))
        qp = replace(qp, alpha=alpha.copy())
    for _ in range(MM_ITER):
        with _fast._blas_limit():
            sol = _ipm.solve(qp, warm=start if sol is None else sol.warm)
            if sol.status in ("stalled", "numerical") and not _close_enough(sol):
                # a step blocked at the boundary near the end (measured: primal 7.5e-7, a zero step):
                # the same point pushed back into the interior (a warm start) usually finishes
                sol = _ipm.solve(qp, warm=sol.warm)
            if sol.status in ("stalled", "numerical") and _close_enough(sol):
                sol = replace(sol, converged=True, status="optimal_stalled")
        if sol.status == "infeasible" or not sol.converged or not caps:
            return sol
        w = qp.weights(sol.x)
        if _only_one_cap_moved(w, caps, n_assets, alpha):
            return sol  # settled already: see _only_one_cap_moved
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


def _close_enough(sol: _ipm.Solution) -> bool:
    """A stopped run's best iterate answers the elastic problem when its residuals are within
    DIAGNOSIS_ACCEPT: the diagnosis reads which limits moved (at 1e-6 of each limit, ELASTIC_TOL)
    and how far, shown to four digits; a warm restart for the last digits costs ~20 iterations
    and often stalls again (measured: 1,500 × 15 stalled at a cap residual of 1.2e-6, 5,000 × 50
    at 3.6e-6, both with a dual residual near 6e-6, and their cvxpy fall-back took 1.3–1.5 s)."""
    res = sol.residuals
    return (res.get("primal_rows", np.inf) <= DIAGNOSIS_ACCEPT["primal_rows"]
            and res.get("primal_caps", np.inf) <= DIAGNOSIS_ACCEPT["primal_caps"]
            and res.get("dual", np.inf) <= DIAGNOSIS_ACCEPT["dual"] and res.get("gap", np.inf) <= DIAGNOSIS_ACCEPT["gap"])


def _only_one_cap_moved(w: np.ndarray, caps: list[tuple[int, float, float]], n_assets: int,
                        alpha: np.ndarray) -> bool:
    """One cap's slack σ is positive, every other slack is zero, and the next price of σ is no higher
    than the one just solved with (``alpha``: the run's objective): the point is then the fixed point.

    With every linear slack at zero the objective Σ pₐ·sₐ + P·σ is met at this point by multipliers
    that all scale with P (the elastic problem has no other objective term, but the trade
    regulariser of 1e-9 of its gradient). The next step prices σ lower, P′ = pₐ·cap/(2√(1 + σ)) < P:
    the multipliers scaled by P′/P still satisfy the optimality conditions (a zero slack's price
    pₐ only has to be at least its multiplier, and a held box bound's multiplier only falls), so this
    point is optimal at P′ too, σ does not change, and neither would the price after it. A price that
    would rise (the run priced σ at a start beyond this σ) scales the multipliers up, past a zero
    slack's price perhaps, so then the iteration goes on.
    """
    moved = [(column, price, cap) for column, price, cap in caps if w[column] > ZERO_SLACK]
    cap_columns = {column for column, _, _ in caps}
    linear = [j for j in range(n_assets, len(w)) if j not in cap_columns]  # the slack columns follow the assets
    if len(moved) != 1 or np.any(w[linear] > ZERO_SLACK):
        return False
    column, price, cap = moved[0]
    return price * cap / (2.0 * np.sqrt(1.0 + float(w[column]))) <= -float(alpha[column]) * (1.0 + MM_TOL)


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
