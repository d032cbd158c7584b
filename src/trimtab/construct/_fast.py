"""The rebalance problem handed to the factor-form interior-point method, and its answer read back.

:func:`translate` turns a :class:`~trimtab.construct._problem.RebalanceProblem` (its objective and
constraint rows) into the :class:`~trimtab.construct._ipm.QP` of :mod:`trimtab.construct._ipm`, or
says why it cannot: soft constraints, gross or short leverage limits (they need the short-part
variable), risk budgeting, or a row without a linear or risk description. Those problems go to
cvxpy and Clarabel, as every problem did before this solver existed.

:func:`solve` runs the method and returns the weights, the duals in the form
:meth:`~trimtab.construct._assembly.Assembly.duals` gives them (gain in U per unit each limit is
loosened, for the upper and the lower side), and U as the solver sees it (for the objective check
of the verification).
"""

from __future__ import annotations

import contextlib
import functools
import time
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import scipy.sparse as sp
from threadpoolctl import ThreadpoolController

from trimtab.construct import _ipm
from trimtab.construct._solve import FACTOR_IPM as NAME
from trimtab.construct._solve import SOLVER_SETTINGS
from trimtab.construct.constraints._base import Rows, merge_boxes, split_box_duals

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: With nothing in the problem pricing trades (no costs, no turnover row), buying and selling the
#: same asset is free and the split w = w0 + buy − sell is not unique; a cost of this size relative
#: to the objective's gradient picks the smallest trades (its effect on U is below 1e-9 of it).
TRADE_REGULARIZER = 1e-9


@dataclass(frozen=True, eq=False)
class Translation:
    """The QP and how to read its answer back onto the rows."""

    qp: _ipm.QP
    box_rows: list[Rows]
    box_limits: tuple[np.ndarray, np.ndarray]
    linear_rows: list[tuple[Rows, np.ndarray]]
    cap_rows: list[tuple[Rows, int]]
    alpha_constant: float


class WarmBox:
    """Holds the last converged interior-point state shared by a problem and its what-if variants."""

    def __init__(self) -> None:
        self.state: _ipm.Warm | None = None
        #: the last warm run did not converge: the next run starts cold (then warm again)
        self.failed = False

    def __getstate__(self) -> dict[str, object]:  # not worth shipping to other processes
        return {"state": None, "failed": False}


@dataclass(frozen=True, eq=False)
class Answer:
    weights: np.ndarray
    duals: dict[int, tuple[np.ndarray, np.ndarray]]
    solver_objective: float
    solution: _ipm.Solution
    build_seconds: float


def settings() -> dict[str, object]:
    """The settings reported in a result's provenance (the method's tolerances and BLAS threads)."""
    return {"tol_primal": _ipm.TOL_PRIMAL, "tol_dual": _ipm.TOL_DUAL, "tol_gap": _ipm.TOL_GAP,
            "max_iter": _ipm.MAX_ITER, **SOLVER_SETTINGS.get(NAME, {})}


@functools.cache
def _thread_controller() -> ThreadpoolController:
    return ThreadpoolController()  # inspects the loaded BLAS libraries once (a few ms)


def _blas_limit() -> contextlib.AbstractContextManager[object]:
    threads = SOLVER_SETTINGS.get(NAME, {}).get("blas_threads")
    if threads is None:
        return contextlib.nullcontext()
    return _thread_controller().limit(limits=int(threads), user_api="blas")


def unsupported(problem: RebalanceProblem, rows: Sequence[Rows]) -> str | None:
    """Why the problem cannot go to the interior-point method, or None when it can."""
    objective = problem.objective
    if problem.data.overlay is not None:
        return "a hedge overlay (its notionals are extra columns; the cvxpy path takes them)"
    if objective.kind not in ("utility", "alpha", "active_risk", "total_risk"):
        return f"objective {objective.kind}"
    for r in rows:
        if r.soft is not None:
            return f"soft constraint {r.name}"
        if r.box:
            continue
        if r.risk is None and r.linear is None:
            return f"constraint {r.name} (no linear form)"
        if r.linear is not None and r.factor != 1.0:
            return f"constraint {r.name} (scaled row)"
        if r.risk is not None and np.any(np.isfinite(r.upper)) and float(r.upper[0]) <= 0:
            return f"constraint {r.name} (a zero risk cap)"
    return None


def translate(problem: RebalanceProblem, rows: Sequence[Rows]) -> Translation | None:
    """The QP for ``rows`` under the problem's objective; None when the boxes are empty."""
    data, objective = problem.data, problem.objective
    n, k = data.n_assets, data.model.n_factors
    B = np.ascontiguousarray(data.exposures, dtype=np.float64)
    L = data.factor_sqrt
    F = L @ L.T
    d = np.asarray(data.specific_variance, dtype=np.float64)
    w0 = np.asarray(data.holdings, dtype=np.float64)
    ppy = data.periods_per_year

    # weight boxes, merged as the cvxpy assembly merges them (the tightest limit wins)
    boxes = [r for r in rows if r.box]
    lo, hi = merge_boxes(boxes, n)
    if np.any(lo > hi):
        return None
    lb = np.concatenate([np.maximum(0.0, lo - w0), np.maximum(0.0, w0 - hi)])
    ub = np.concatenate([np.maximum(0.0, hi - w0), np.maximum(0.0, w0 - lo)])

    Aw, Ay, at, const, lower, upper = [], [], [], [], [], []
    linear_rows: list[tuple[Rows, np.ndarray]] = []
    caps: list[_ipm.Cap] = []
    cap_rows: list[tuple[Rows, int]] = []
    count = 0
    for r in rows:
        if r.box:
            continue
        if r.risk is not None:
            cap = float(r.upper[0])
            if np.isfinite(cap):
                center = data.bench if r.risk.active else np.zeros(n)
                cap_rows.append((r, len(caps)))
                caps.append(_ipm.Cap(np.asarray(center, dtype=np.float64), r.risk.factor, r.risk.specific,
                                     cap * cap / ppy))
            continue
        lin = r.linear
        assert lin is not None
        m = r.size
        Aw.append(np.zeros((m, n)) if lin.w is None else _dense(lin.w, m, n))
        Ay.append(np.zeros((m, k)) if lin.y is None else np.asarray(lin.y, dtype=np.float64).reshape(m, k))
        at.append(np.zeros(m) if lin.traded is None else np.broadcast_to(np.asarray(lin.traded, dtype=np.float64), (m,)))
        const.append(np.broadcast_to(np.asarray(lin.constant, dtype=np.float64), (m,)))
        lower.append(r.lower)
        upper.append(r.upper)
        linear_rows.append((r, np.arange(count, count + m)))
        count += m

    def stack(parts: list[np.ndarray], shape: tuple[int, ...]) -> np.ndarray:
        return np.concatenate(parts) if parts else np.zeros(shape)

    kind = objective.kind
    alpha = np.asarray(data.alpha, dtype=np.float64) if kind in ("utility", "alpha") else np.zeros(n)
    cost = np.zeros(n)
    if objective.cost_aversion > 0 and objective.rates.linear is not None:
        cost = objective.cost_aversion * np.asarray(objective.rates.linear, dtype=np.float64)
    impact = None
    if objective.cost_aversion > 0 and objective.rates.impact is not None and np.any(objective.rates.impact):
        impact = objective.cost_aversion * np.asarray(objective.rates.impact, dtype=np.float64)
    at_all = stack(at, (0,))
    regularize = not np.any(cost) and objective.rates.impact is None
    qp = _ipm.QP(
        B=B, F=F, d=d, w0=w0, risk_weight=objective.risk_weight * ppy,
        risk_center=np.asarray(data.bench if objective.risk_active else np.zeros(n), dtype=np.float64),
        alpha=alpha, cost=cost, lb=lb, ub=ub, Aw=stack(Aw, (0, n)), Ay=stack(Ay, (0, k)), at=at_all,
        const=stack(const, (0,)), lo=stack(lower, (0,)), hi=stack(upper, (0,)), caps=caps,
        trade_regularizer=TRADE_REGULARIZER if regularize else 0.0, impact=impact,
    )
    return Translation(qp, boxes, (lo, hi), linear_rows, cap_rows, float(alpha @ data.bench))


def solve(problem: RebalanceProblem, rows: Sequence[Rows], warm: WarmBox | None = None) -> Answer | None:
    """Run the interior-point method on a problem :func:`unsupported` accepted; None when its boxes are empty.

    With ``warm`` holding a state of a problem of the same shape the run starts from it; a warm run
    that does not converge is repeated from the cold start, and the next run of the family starts
    cold (measured: failures come in runs, at the linear-like end of a TE sweep). A converged run's
    state is kept in ``warm``.
    """
    start = time.perf_counter()
    tr = translate(problem, rows)
    if tr is None:
        return None
    build = time.perf_counter() - start
    sol = None
    with _blas_limit():
        if warm is not None and warm.state is not None and not warm.failed:
            sol = _ipm.solve(tr.qp, warm=warm.state)
            warm.failed = not sol.converged
        elif warm is not None:
            warm.failed = False
        if sol is None or not sol.converged:
            sol = _ipm.solve(tr.qp)
    if warm is not None and sol.converged:
        warm.state = sol.warm
    return Answer(
        weights=tr.qp.weights(sol.x), duals=_duals(tr, sol),
        solver_objective=-sol.objective - tr.alpha_constant, solution=sol, build_seconds=build,
    )


def _duals(tr: Translation, sol: _ipm.Solution) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    out: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    for r, idx in tr.linear_rows:
        out[id(r)] = (sol.row_upper[idx].copy(), sol.row_lower[idx].copy())
    for r, k in tr.cap_rows:
        # h = q/τ² − 1 with τ² = cap²/ppy: ∂U*/∂cap = 2·z/cap
        out[id(r)] = (np.array([2.0 * sol.cap_duals[k] / float(r.upper[0])]), np.zeros(1))
    if tr.box_rows:
        out.update(split_box_duals(tr.box_rows, tr.box_limits, *_box_duals(tr, sol)))
    return out


def _box_duals(tr: Translation, sol: _ipm.Solution) -> tuple[np.ndarray, np.ndarray]:
    """Gain per unit of loosening each asset's merged upper and lower weight bound.

    The bound w ≤ h is u ≤ h − w0 when h > w0, v ≥ w0 − h when h < w0, and fixes u at 0 when
    h = w0; the bound w ≥ l alike on v. A fixed coordinate's price is its Lagrangian gradient
    (the gain from freeing it), taken with the sign that loosening allows.
    """
    qp = tr.qp
    n = qp.n
    lo_eff, hi_eff = tr.box_limits
    w0 = qp.w0
    fixed = _ipm.fixed_coordinates(qp)
    g = sol.reduced_gradient

    def upper_of(i: np.ndarray) -> np.ndarray:
        return np.where(fixed[i], np.maximum(-g[i], 0.0), sol.bound_upper[i])

    def lower_of(i: np.ndarray) -> np.ndarray:
        return np.where(fixed[i], np.maximum(g[i], 0.0), sol.bound_lower[i])

    u, v = np.arange(n), np.arange(n, 2 * n)
    up = np.where(hi_eff >= w0, upper_of(u), lower_of(v))
    lo = np.where(lo_eff <= w0, upper_of(v), lower_of(u))
    up = np.where(np.isfinite(hi_eff), up, 0.0)
    lo = np.where(np.isfinite(lo_eff), lo, 0.0)
    return up, lo


def _dense(matrix: object, m: int, n: int) -> np.ndarray:
    if sp.issparse(matrix):
        return np.asarray(matrix.toarray(), dtype=np.float64).reshape(m, n)  # type: ignore[attr-defined]
    return np.asarray(matrix, dtype=np.float64).reshape(m, n)
