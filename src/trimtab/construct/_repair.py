"""Repair a book rounded to whole lots until every limit holds on it (within the rounding tolerance).

Rounding each trade to the nearer whole lot moves every limited quantity a little: a group band, a
factor exposure set neutral, the beta, the tracking error, the cash left after costs. The repair adds
or removes single lots, preferring the lots that cost the objective least, until each hard limit
holds on the rounded book within its kind's rounding tolerance (:data:`ROUNDING_TOLERANCE`).

Two searches, both on the limits linearised at the rounded book (``value(w + Δ) ≈ value(w) + J·Δ``,
and Σ|t| kept exact through u ≥ |t| for turnover and the linear cost), each followed by an exact
check with plain numpy:

- ``milp``: one mixed-integer program (scipy.optimize.milp, HiGHS): integer lots kᵢ per
  asset inside the hard per-asset bounds; every linearised limit with an elastic slack whose penalty
  dominates; then the objective's first-order loss Σ −gᵢ·lotᵢ·kᵢ plus a small charge per lot moved.
  A limit the exact check finds still breached (a curved one: a risk cap, the impact cost) has its
  linear target moved inside by the excess and the program is solved again (at most MAX_ROUNDS).
- ``greedy``: one lot at a time, the move that removes the most linearised breach (ties: the least
  objective loss), re-evaluated exactly after each move.

``auto`` (the default) runs the greedy search, then the MILP from its book when a breach is left.
``benchmarks/rounding_repair.py`` compares them on the demo fund in lots of 100 shares: at NAV 5M and
1M both remove every breach; the greedy search takes about 0.02 s and moves 3–4 lots, the MILP
10–20 s (HiGHS proving its optimum on ~5,000 variables) for a few hundredths of a bp of objective
more. Hence greedy first, the MILP as the harder search when greedy leaves a breach.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np

from trimtab.construct.constraints._base import Rows

#: Rounding tolerance per kind of limit, in the limit's own unit: a weight-like limit (fractions of
#: NAV: positions, groups, turnover, cash, stress losses) 1e-4 = 1 bp of NAV; a factor exposure and a
#: beta 1e-3; an annualised risk 1e-4 = 0.01 percentage point a year. ``orders.tolerance`` sets them.
ROUNDING_TOLERANCE = {"weight": 1e-4, "exposure": 1e-3, "beta": 1e-3, "risk": 1e-4}
MAX_ROUNDS = 4
_DEBUG = False
#: Lots one asset may move in the repair, each way.
MAX_LOTS = 50
#: Relative optimality gap of the MILP: the objective's first-order loss is a preference among books
#: that all hold the limits, not worth proving to the last digit.
MIP_GAP = 0.02
#: Charge per unit of weight moved (objective units): prefers fewer, smaller moves among equals.
MOVE_CHARGE = 1e-6


def tolerance_kind(rows: Rows) -> str:
    """Which rounding tolerance applies: weight, exposure, beta or risk (by the row's unit)."""
    unit = rows.unit
    if unit == "exposure":
        return "exposure"
    if unit == "beta":
        return "beta"
    if rows.risk is not None or "volatility" in unit:
        return "risk"
    return "weight"


@dataclass(frozen=True, eq=False)
class Limit:
    """One block of limits the rounded book must hold: ``lower ≤ value(w) ≤ upper`` within ``tol``."""

    name: str
    kind: str
    lower: np.ndarray
    upper: np.ndarray
    tol: np.ndarray
    evaluate: Callable[[np.ndarray], np.ndarray]
    rows: Rows | None = None
    #: Per-asset coefficients of |tᵢ| in the value (turnover: ½; cash: −cost rate), or None.
    traded: np.ndarray | None = None
    labels: Sequence[object] = ()
    tolerance_kind: str = "weight"

    def excess(self, value: np.ndarray) -> np.ndarray:
        """How far beyond limit + tolerance each value lies (0 when it holds)."""
        with np.errstate(invalid="ignore"):
            out = np.fmax(value - self.upper, self.lower - value) - self.tol
        return np.where(np.isfinite(value), np.maximum(np.nan_to_num(out, nan=0.0), 0.0), np.inf)


@dataclass(frozen=True, eq=False)
class RepairProblem:
    """A rounded book and what the repair may do to it."""

    w0: np.ndarray
    start: np.ndarray
    lot_w: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    movable: np.ndarray
    limits: Sequence[Limit]
    gradient: np.ndarray
    jacobians: Sequence[np.ndarray] = field(default_factory=list)

    def lot_bounds(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Whole lots each asset may move from ``w`` and stay inside its hard bounds."""
        with np.errstate(invalid="ignore", divide="ignore"):
            lo = np.ceil((self.lower - w) / self.lot_w - 1e-9)
            hi = np.floor((self.upper - w) / self.lot_w + 1e-9)
        lo = np.clip(np.nan_to_num(lo, nan=0.0, neginf=-MAX_LOTS), -MAX_LOTS, 0.0)
        hi = np.clip(np.nan_to_num(hi, nan=0.0, posinf=MAX_LOTS), 0.0, MAX_LOTS)
        lo[~self.movable] = 0.0
        hi[~self.movable] = 0.0
        return lo, hi


def breaches(limits: Sequence[Limit], w: np.ndarray) -> list[tuple[Limit, np.ndarray, np.ndarray]]:
    """(limit, value, excess) of every limit on ``w``."""
    out = []
    for limit in limits:
        value = np.asarray(limit.evaluate(w), dtype=np.float64)
        out.append((limit, value, limit.excess(value)))
    return out


def total_excess(limits: Sequence[Limit], w: np.ndarray) -> float:
    """Σ excess / tolerance over every limit (0: the book holds every limit)."""
    return float(sum(np.sum(e / np.maximum(lim.tol, 1e-12)) for lim, _, e in breaches(limits, w)))


def jacobian(rows: Rows | None, evaluate: Callable[[np.ndarray], np.ndarray], w: np.ndarray, lot_w: np.ndarray,
             exposures: np.ndarray, risk_gradient: Callable[[Rows, np.ndarray], np.ndarray]) -> np.ndarray:
    """∂value/∂w at w (size × N), the |t| term left out (it is kept exact in :class:`Limit.traded`)."""
    if rows is not None and rows.linear is not None:
        lin = rows.linear
        n = len(w)
        jac = np.zeros((rows.size, n))
        if lin.w is not None:
            jac += np.asarray(lin.w.todense() if hasattr(lin.w, "todense") else lin.w, dtype=np.float64).reshape(rows.size, n)
        if lin.y is not None:
            jac += np.asarray(lin.y, dtype=np.float64).reshape(rows.size, -1) @ exposures.T
        return jac
    if rows is not None and rows.risk is not None:
        return risk_gradient(rows, w)[None, :]
    # no closed form (gross or short leverage): one-sided differences of one lot
    base = np.asarray(evaluate(w), dtype=np.float64)
    jac = np.zeros((len(base), len(w)))
    for i in np.flatnonzero(lot_w > 0):
        step = w.copy()
        step[i] += lot_w[i]
        jac[:, i] = (np.asarray(evaluate(step), dtype=np.float64) - base) / lot_w[i]
    return jac


def _linear_parts(problem: RepairProblem, w: np.ndarray) -> list[tuple[Limit, np.ndarray, np.ndarray]]:
    """(limit, value at w, J) per limit; a limit with a |t| term has it removed from the value."""
    out = []
    t = np.abs(w - problem.w0)
    for limit, jac in zip(problem.limits, problem.jacobians):
        value = np.asarray(limit.evaluate(w), dtype=np.float64)
        if limit.traded is not None:
            value = value - limit.traded @ t
        out.append((limit, value, jac))
    return out


def repair_greedy(problem: RepairProblem, max_moves: int | None = None) -> np.ndarray:
    """One lot at a time: the move that removes the most linearised breach, least objective loss first."""
    w = problem.start.copy()
    n = len(w)
    limit_moves = max_moves if max_moves is not None else 20 * n
    scale = [np.maximum(lim.tol, 1e-12) for lim in problem.limits]
    for _ in range(limit_moves):
        if total_excess(problem.limits, w) <= 0:
            break
        lo, hi = problem.lot_bounds(w)
        t = w - problem.w0
        best: tuple[float, float, int, int] | None = None
        for d in (1.0, -1.0):
            allowed = (hi >= 1) if d > 0 else (lo <= -1)
            if not allowed.any():
                continue
            dt_abs = np.abs(t + d * problem.lot_w) - np.abs(t)
            gain = np.zeros(n)
            for (limit, value, jac), s in zip(_linear_parts(problem, w), scale):
                now = np.asarray(limit.evaluate(w), dtype=np.float64)
                moved = now[:, None] + jac * (d * problem.lot_w)[None, :]
                if limit.traded is not None:
                    moved = moved + limit.traded[None, :] * dt_abs[None, :] * np.ones((len(now), 1))
                with np.errstate(invalid="ignore"):
                    after = np.maximum(np.fmax(moved - limit.upper[:, None], limit.lower[:, None] - moved) - limit.tol[:, None], 0.0)
                    before = limit.excess(now)
                gain += np.sum((before[:, None] - np.nan_to_num(after)) / s[:, None], axis=0)
            gain[~allowed] = -np.inf
            loss = -problem.gradient * d * problem.lot_w
            i = int(np.argmax(gain - 1e-9 * loss))
            if gain[i] > 1e-12 and (best is None or gain[i] > best[0] + 1e-12 or (abs(gain[i] - best[0]) <= 1e-12 and loss[i] < best[1])):
                best = (float(gain[i]), float(loss[i]), i, int(d))
        if best is None:
            break
        trial = w.copy()
        trial[best[2]] += best[3] * problem.lot_w[best[2]]
        if total_excess(problem.limits, trial) >= total_excess(problem.limits, w):
            break  # the linearisation misled: stop at the last exact improvement
        w = trial
    return w


def repair_milp(problem: RepairProblem, time_limit: float = 5.0) -> np.ndarray:
    """Mixed-integer programs on the linearised limits (HiGHS): first with every limit hard and the
    fewest, cheapest lots moved; when no whole-lot book holds them all, the book with the least breach
    (elastic limits). A limit the exact check still finds breached (a curved one) has its linear target
    moved inside by its excess and the program is solved again, at most MAX_ROUNDS times."""
    w = problem.start
    best, best_excess = w.copy(), total_excess(problem.limits, w)
    if best_excess <= 0:
        return best
    shift_up = [np.zeros(len(lim.lower)) for lim in problem.limits]
    shift_lo = [np.zeros(len(lim.lower)) for lim in problem.limits]
    elastic = False
    for _ in range(MAX_ROUNDS):
        k = _solve_lots(problem, shift_up, shift_lo, elastic=elastic, time_limit=time_limit)
        if k is None:
            if elastic:
                break
            elastic = True
            continue
        trial = w + k * problem.lot_w
        excess = total_excess(problem.limits, trial)
        if excess < best_excess:
            best, best_excess = trial, excess
        if excess <= 0:
            break
        for j, (limit, value, excess_j) in enumerate(breaches(problem.limits, trial)):
            step = np.where(np.isfinite(excess_j) & (excess_j > 0), excess_j + limit.tol, 0.0)
            shift_up[j] = shift_up[j] + np.where(value > limit.upper, step, 0.0)
            shift_lo[j] = shift_lo[j] + np.where(value < limit.lower, step, 0.0)
    return best


def _solve_lots(problem: RepairProblem, shift_up: Sequence[np.ndarray], shift_lo: Sequence[np.ndarray], *,
                elastic: bool, time_limit: float) -> np.ndarray | None:
    """Whole lots k per asset from one MILP; None when it finds no solution."""
    from scipy.optimize import Bounds, LinearConstraint, milp
    from scipy.sparse import bmat, csr_matrix, diags, identity, vstack

    w, lot = problem.start, problem.lot_w
    n = len(w)
    t0 = w - problem.w0
    lo_k, hi_k = problem.lot_bounds(w)
    rows_k, rows_u, lows, highs, weights = [], [], [], [], []
    for (limit, value, jac), up, dn in zip(_linear_parts(problem, w), shift_up, shift_lo):
        m = len(value)
        # value(k) ≈ value_without_|t| + (J·lot)·k + traded·u, with u ≥ |t0 + lot·k|; each row in
        # units of its tolerance, so that HiGHS's own feasibility tolerance is far below a limit's
        unit = 1.0 / np.maximum(limit.tol, 1e-9)[:, None]
        rows_k.append(csr_matrix(unit * jac * lot[None, :]))
        rows_u.append(csr_matrix(unit * (np.zeros((m, n)) if limit.traded is None else np.tile(limit.traded, (m, 1)))))
        lows.append(unit[:, 0] * np.where(np.isfinite(limit.lower), limit.lower + dn - value, -np.inf))
        highs.append(unit[:, 0] * np.where(np.isfinite(limit.upper), limit.upper - up - value, np.inf))
        weights.append(np.ones(m))
    if not rows_k:
        return np.zeros(n)
    m_total = sum(len(x) for x in lows)
    Kk, Ku = vstack(rows_k).tocsr(), vstack(rows_u).tocsr()
    scale_u = 1.0 / max(float(np.min(lot[lot > 0], initial=1.0)), 1e-12)
    Ku = Ku / scale_u
    n_slack = 2 * m_total if elastic else 0
    eye_m = identity(m_total, format="csr")
    # variables: p, q ≥ 0 whole lots bought and sold (k = p − q), u ≥ |t|, then (elastic) s+, s− ≥ 0
    blocks = [Kk, -Kk, Ku] + ([eye_m, -eye_m] if elastic else [])
    a_lim = bmat([blocks], format="csr")
    # u − lot·k ≥ t0 and u + lot·k ≥ −t0, u in units of the smallest lot
    lot_d, eye_n = diags(lot * scale_u), identity(n, format="csr")
    a_abs = bmat([[-lot_d, lot_d, eye_n], [lot_d, -lot_d, eye_n]], format="csr")
    if elastic:
        a_abs = bmat([[a_abs, csr_matrix((2 * n, n_slack))]], format="csr")
    # a lot costs what it loses of the objective to first order (the optimal book is the reference,
    # so a lot never gains), plus a small charge; elastic: any breach costs more than every lot
    gain = problem.gradient * lot
    cost_p = np.maximum(-gain, 0.0) + MOVE_CHARGE * lot
    cost_q = np.maximum(gain, 0.0) + MOVE_CHARGE * lot
    norm = 1.0 / max(float(np.max(np.concatenate([cost_p, cost_q]))), 1e-300)  # largest lot cost 1
    cost_p, cost_q = norm * cost_p, norm * cost_q
    c = [cost_p, cost_q, np.zeros(n)]
    if elastic:
        big = 1e3 * (1.0 + float(np.sum(np.maximum(cost_p, cost_q) * np.maximum(hi_k, -lo_k))))
        penalty = big * np.concatenate(weights)
        c += [penalty, penalty]
    res = milp(
        np.concatenate(c),
        constraints=[LinearConstraint(a_lim, np.concatenate(lows), np.concatenate(highs)),
                     LinearConstraint(a_abs, scale_u * np.concatenate([t0, -t0]), np.inf)],
        bounds=Bounds(np.zeros(3 * n + n_slack), np.concatenate([hi_k, -lo_k, np.full(n + n_slack, np.inf)])),
        integrality=np.concatenate([np.ones(2 * n), np.zeros(n + n_slack)]),
        options={"time_limit": time_limit, "mip_rel_gap": MIP_GAP},
    )
    if _DEBUG:
        print("milp", elastic, res.status, res.message, res.fun)
    if res.x is None:
        return None
    return np.round(res.x[:n]) - np.round(res.x[n:2 * n])
