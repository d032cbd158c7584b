"""The infeasibility diagnosis' solves in factor form, by FACTOR_IPM (:mod:`trimtab.construct._ipm`).

The diagnosis (:mod:`trimtab.construct._conflict`, :mod:`trimtab.construct._elastic`) asks three
kinds of question; each is answered here when FACTOR_IPM can take the rows, and by the cvxpy
path otherwise (``None`` or :data:`UNANSWERED` below means: ask cvxpy).

- **Can these limits hold together?** (:func:`feasible`) The rows with the objective "trade as
  little as possible" (a linear cost of 1 on every buy and sell: bounded below, so the answer is
  about the limits alone). A Farkas certificate (``infeasible``) says no; weights that hold every
  row within its verification tolerance say yes.
- **Which limits take part?** Not asked here: the deletion filter's hint stays the elastic
  filter's (:func:`trimtab.construct._elastic.elastic_filter`, through cvxpy), because the hint
  steers which conflict set is found when several exist, and a Farkas certificate's support
  (tried) named a different, equally valid set on the demo's infeasible scenario than the one
  trimtab named before.
- **How far must one limit move, all others as written?** (:func:`extreme`) The elastic problem
  with one group movable has the optimum of min Σs = the group's value at its extreme over the
  other limits: the least tracking error (or other risk of a cap on the full Σ) under them, or the
  least (most) value of a linear row whose upper (lower) limit is breached. Solved as that
  objective; the weights are those of the elastic optimum, so the relaxation table reads the same
  needed values. Per-asset (box) groups and caps on a part of Σ go to cvxpy.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from trimtab.construct import _diagnosis_memo, _fast, _ipm
from trimtab.construct._diagnosis_memo import holds
from trimtab.construct._solve import FACTOR_IPM
from trimtab.construct.constraints._base import Rows

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: :func:`extreme` could not answer (the cvxpy path must).
UNANSWERED = object()


def available(problem: RebalanceProblem) -> bool:
    """FACTOR_IPM is in the problem's solver order (``solvers=["CLARABEL"]`` keeps the cvxpy path)."""
    return FACTOR_IPM in problem.solvers


def _translation(problem: RebalanceProblem, rows: Sequence[Rows]) -> _fast.Translation | None | bool:
    """The QP of the rows (False: its weight boxes are empty; None: FACTOR_IPM cannot take them)."""
    hard = [r for r in rows if np.isfinite(r.lower).any() or np.isfinite(r.upper).any()]
    if not available(problem) or _fast.unsupported(problem, hard) is not None:
        return None
    tr = _fast.translate(problem, hard)
    return False if tr is None else tr


def _least_trading(qp: _ipm.QP) -> _ipm.QP:
    """The same limits with the objective min Σ(u + v): bounded below, so only the limits decide."""
    n = qp.n
    return replace(qp, risk_weight=0.0, alpha=np.zeros(n), cost=np.ones(n), impact=None, trade_regularizer=0.0)


def _run(qp: _ipm.QP, stop: Callable[[np.ndarray], bool] | None = None, warm: _ipm.Warm | None = None) -> _ipm.Solution:
    with _fast._blas_limit():
        return _ipm.solve(qp, stop=stop, warm=warm)


def nearest_point(rows: Sequence[Rows]) -> _ipm.Warm | None:
    """A primal start at the remembered point of this diagnosis that breaches ``rows`` least
    (relative to their tolerances; None outside a diagnosis or without points)."""
    memo = _diagnosis_memo.current()
    if memo is None or not memo.points:
        return None

    def excess(w: np.ndarray) -> float:
        return sum(float(np.sum(r.breach(np.asarray(r.evaluate(w), dtype=np.float64)) / r.tolerance())) for r in rows)

    return _ipm.Warm.from_weights(min(memo.points, key=excess))


def feasible(problem: RebalanceProblem, rows: Sequence[Rows]) -> bool | None:
    """True/False as above, or None when FACTOR_IPM cannot take the rows or tell."""
    tr = _translation(problem, rows)
    if not isinstance(tr, _fast.Translation):
        return None if tr is None else False  # empty weight boxes cannot hold
    memo = _diagnosis_memo.current()
    known = None if memo is None else memo.answer(rows)
    if known is not None:
        return known
    qp = tr.qp
    # a feasibility test needs no optimum: the run stops at the first iterate that holds every row
    sol = _run(_least_trading(qp), stop=lambda x: holds(rows, qp.weights(x)))
    if sol.status == "infeasible":
        if memo is not None:
            memo.learn(rows, False)
        return False
    # a point that holds every row answers the question, converged or not
    weights = qp.weights(sol.x)
    if holds(rows, weights):
        _diagnosis_memo.point(weights)
        return True
    return None


def extreme(problem: RebalanceProblem, others: Sequence[Rows], moved: Rows) -> object:
    """Weights of the one-group elastic optimum (see the module notes): an array; None when the
    other limits cannot hold together; :data:`UNANSWERED` for the cvxpy path."""
    element = np.flatnonzero(np.isfinite(moved.lower) | np.isfinite(moved.upper))
    if moved.box or len(element) != 1:
        return UNANSWERED
    tr = _translation(problem, others)
    if not isinstance(tr, _fast.Translation):
        return UNANSWERED if tr is None else None
    i = int(element[0])
    sides = []
    if np.isfinite(moved.upper[i]):
        sides.append(1.0)  # minimise the value
    if np.isfinite(moved.lower[i]):
        sides.append(-1.0)  # maximise it
    start = nearest_point(others)  # an elastic optimum of the same limits is usually close
    for sign in sides:
        qp = _objective(problem, tr.qp, moved, i, sign)
        if qp is None:
            return UNANSWERED
        sol = _run(qp, warm=start)
        if sol.status == "infeasible":
            return None
        weights = tr.qp.weights(sol.x)
        if not sol.converged or not holds(others, weights):
            return UNANSWERED
        value = float(np.asarray(moved.evaluate(weights), dtype=np.float64)[i])
        if (sign > 0 and value > moved.upper[i]) or (sign < 0 and value < moved.lower[i]) or sign == sides[-1]:
            return weights
    return UNANSWERED


def _objective(problem: RebalanceProblem, qp: _ipm.QP, moved: Rows, i: int, sign: float) -> _ipm.QP | None:
    """The QP minimising sign × the moved row's value (None: not a FACTOR_IPM objective)."""
    data = problem.data
    n = qp.n
    if moved.risk is not None:
        risk = moved.risk
        if sign < 0 or not (risk.factor and risk.specific):
            return None
        center = np.asarray(data.bench if risk.active else np.zeros(n), dtype=np.float64)
        return replace(qp, risk_weight=1.0, risk_center=center, alpha=np.zeros(n), cost=np.zeros(n), impact=None,
                       trade_regularizer=_fast.TRADE_REGULARIZER)
    lin = moved.linear
    if lin is None or moved.factor != 1.0:
        return None
    gradient = np.zeros(n) if lin.w is None else _fast._dense(lin.w, moved.size, n)[i]
    if lin.y is not None:
        gradient = gradient + qp.B @ np.asarray(lin.y, dtype=np.float64).reshape(moved.size, -1)[i]
    traded = 0.0 if lin.traded is None else float(np.broadcast_to(np.asarray(lin.traded, dtype=np.float64),
                                                                   (moved.size,))[i])
    if sign * traded < 0:
        return None  # a cost below zero on trades: not in the method's class
    cost = np.full(n, sign * traded)
    return replace(qp, risk_weight=0.0, alpha=-sign * gradient, cost=cost, impact=None,
                   trade_regularizer=0.0 if traded else _fast.TRADE_REGULARIZER)
