"""The limits a rounded book is held to, the repair that makes it hold them, and its verification.

Every hard limit of the scenario is checked on the book the orders produce, against the limit itself
plus a tolerance: ``max(verification tolerance, rounding tolerance of its kind)`` (weights,
exposures, beta, risk; :data:`trimtab.construct._repair.ROUNDING_TOLERANCE`, set by
``orders.tolerance``). What rounding moved a quantity is no allowance.

Costs come out of cash: ``cash_after_costs = 1 − Σw − Σ cost(w − w0)`` (fractions of NAV) must be at
least ``orders.min_cash`` (default 0, and at least ``constraints.cash.min``), to the cent. Under
``fully_invested`` it replaces Σw = 1: the cash left after costs is at most one lot (the largest lot
the book could still buy) above that minimum.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd

from trimtab.construct._objective import CostRates
from trimtab.construct._repair import (
    ROUNDING_TOLERANCE,
    Limit,
    RepairProblem,
    jacobian,
    repair_greedy,
    repair_milp,
    tolerance_kind,
    total_excess,
)
from trimtab.construct.constraints._base import Rows

#: Cash is checked to this (fraction of NAV): float noise, far below a cent on any fund.
CASH_TOL = 1e-12
VERIFICATION_COLUMNS = ["name", "kind", "value", "lower", "upper", "breach", "tolerance", "excess", "soft", "ok"]


@dataclass(frozen=True, eq=False)
class BookModel:
    """What the repair needs of the problem: the model's factor form, the objective, the costs."""

    exposures: np.ndarray
    factor_sqrt: np.ndarray
    specific_variance: np.ndarray
    bench: np.ndarray
    periods_per_year: float
    alpha: np.ndarray
    risk_weight: float
    risk_active: bool
    cost_aversion: float
    rates: CostRates

    @property
    def linear_cost(self) -> np.ndarray | None:
        return self.rates.linear

    @property
    def impact_cost(self) -> np.ndarray | None:
        return self.rates.impact

    def cost(self, trade: np.ndarray) -> np.ndarray:
        """Estimated cost per asset (fraction of NAV)."""
        return self.rates.cost(trade)

    def risk_gradient(self, rows: Rows, w: np.ndarray) -> np.ndarray:
        """∂σ/∂w of a risk row: ppy·(B·F·Bᵀa + d∘a)/σ with the parts the row counts."""
        spec = rows.risk
        assert spec is not None
        a = w - self.bench if spec.active else w
        x = self.factor_sqrt.T @ (self.exposures.T @ a)
        sigma2 = (float(x @ x) if spec.factor else 0.0) + (float(self.specific_variance @ (a * a)) if spec.specific else 0.0)
        grad = np.zeros_like(w)
        if spec.factor:
            grad += self.exposures @ (self.factor_sqrt @ x)
        if spec.specific:
            grad += self.specific_variance * a
        sigma = np.sqrt(self.periods_per_year * sigma2)
        return self.periods_per_year * grad / max(sigma, 1e-12)

    def gradient(self, w: np.ndarray, w0: np.ndarray) -> np.ndarray:
        """∂U/∂w of the objective at w (alpha, risk penalty, cost)."""
        grad = self.alpha.copy()
        if self.risk_weight > 0:
            a = w - self.bench if self.risk_active else w
            x = self.factor_sqrt.T @ (self.exposures.T @ a)
            grad -= 2.0 * self.risk_weight * self.periods_per_year * (self.exposures @ (self.factor_sqrt @ x) + self.specific_variance * a)
        if self.cost_aversion > 0:
            t = w - w0
            rate = np.zeros_like(w)
            if self.linear_cost is not None:
                rate += self.linear_cost
            if self.impact_cost is not None:
                rate += 1.5 * self.impact_cost * np.sqrt(np.abs(t))
            grad -= self.cost_aversion * rate * np.sign(t)
        return grad


def book_model(problem: Any) -> BookModel:
    """The :class:`BookModel` of a built :class:`~trimtab.construct.RebalanceProblem`."""
    data, objective = problem.data, problem.objective
    rates = objective.rates
    return BookModel(
        exposures=data.exposures, factor_sqrt=data.factor_sqrt, specific_variance=data.specific_variance,
        bench=data.bench, periods_per_year=data.periods_per_year,
        alpha=data.alpha if objective.kind in ("utility", "alpha") else np.zeros(data.n_assets),
        risk_weight=objective.risk_weight, risk_active=objective.risk_active, cost_aversion=objective.cost_aversion,
        rates=rates,
    )


def rounding_tolerances(settings: Mapping[str, Any] | None) -> dict[str, float]:
    """The scenario's ``orders.tolerance`` over the defaults."""
    return {**ROUNDING_TOLERANCE, **dict((settings or {}).get("tolerance") or {})}


def _limit_of(rows: Rows, tolerances: Mapping[str, float], n: int) -> Limit:
    kind = tolerance_kind(rows)
    tol = np.maximum(rows.tolerance(), tolerances[kind])
    traded = None
    if rows.linear is not None and rows.linear.traded is not None:
        traded = np.full(n, float(np.asarray(rows.linear.traded).ravel()[0]))
    return Limit(name=rows.name, kind=rows.kind, lower=rows.lower, upper=rows.upper, tol=tol, evaluate=rows.evaluate,
                 rows=rows, traded=traded, labels=rows.labels, tolerance_kind=kind)


def cash_limit(model: BookModel, w0: np.ndarray, lower: float, upper: float) -> Limit:
    """cash after trades and costs = 1 − Σw − Σcost(w − w0) within [lower, upper] (fractions of NAV)."""
    n = len(w0)
    rate = np.zeros(n) if model.linear_cost is None else model.linear_cost.copy()
    return Limit(
        name="cash_after_costs", kind="cash", lower=np.array([lower]), upper=np.array([upper]), tol=np.array([CASH_TOL]),
        evaluate=lambda w: np.array([1.0 - w.sum() - model.cost(w - w0).sum()]),
        traded=-rate, labels=["cash_after_costs"], tolerance_kind="weight",
    )


def _impact_rate(model: BookModel, t: np.ndarray) -> np.ndarray:
    """The impact cost's slope in |t| at t: 1.5·impact·√|t| (the cash row's curvature, linearised)."""
    return np.zeros_like(t) if model.impact_cost is None else 1.5 * model.impact_cost * np.sqrt(np.abs(t))


def book_limits(
    rows: Sequence[Rows], model: BookModel, w0: np.ndarray, *, min_cash: float, fully_invested_lot: float | None,
    tolerances: Mapping[str, float],
) -> tuple[list[Limit], list[Limit]]:
    """(limits the repair works on, per-asset box limits it keeps by construction), hard rows only.

    ``fully_invested`` (Σw = 1) is replaced by the cash row: cash after costs in
    [min_cash, min_cash + fully_invested_lot]; without it, cash after costs ≥ min_cash.
    """
    n = len(w0)
    repair, boxes = [], []
    for r in rows:
        if r.soft is not None or r.kind in ("rounding", "round_lots", "max_names", "min_trade"):
            continue
        if r.kind == "budget" and r.name == "fully_invested":
            continue
        (boxes if r.box else repair).append(_limit_of(r, tolerances, n))
    upper = np.inf if fully_invested_lot is None else min_cash + fully_invested_lot
    repair.append(cash_limit(model, w0, min_cash, upper))
    return repair, boxes


def repair_book(
    start: np.ndarray, w0: np.ndarray, lot_w: np.ndarray, lower: np.ndarray, upper: np.ndarray, movable: np.ndarray,
    limits: Sequence[Limit], model: BookModel, *, method: str = "auto",
) -> np.ndarray:
    """Add or remove whole lots until every limit holds (or as near as the lots allow).

    ``auto`` runs the greedy search and, when it leaves a limit breached, the MILP from its book."""
    lot = np.where(np.isfinite(lot_w) & (lot_w > 0), lot_w, 0.0)
    safe_start = np.where(np.isfinite(start), start, w0)
    t = safe_start - w0
    jacs = []
    for limit in limits:
        if limit.rows is None:  # the cash row: −1 per unit bought, its cost through |t|
            jacs.append(-np.ones((1, len(w0))))
            continue
        jacs.append(jacobian(limit.rows, limit.evaluate, safe_start, lot, model.exposures, model.risk_gradient))
    limits = [
        Limit(**{**lim.__dict__, "traded": lim.traded - _impact_rate(model, t)}) if lim.kind == "cash" else lim
        for lim in limits
    ]
    problem = RepairProblem(w0=w0, start=safe_start, lot_w=lot, lower=lower, upper=upper, movable=movable & (lot > 0),
                            limits=limits, gradient=model.gradient(safe_start, w0), jacobians=jacs)
    if method == "milp":
        return repair_milp(problem)
    w = repair_greedy(problem)
    if method == "greedy" or total_excess(limits, w) <= 0:
        return w
    return repair_milp(replace(problem, start=w))


def verification_table(limits: Sequence[Limit], soft_rows: Sequence[Rows], w: np.ndarray) -> pd.DataFrame:
    """One row per limit block on the rounded book: its worst element against the limit + tolerance."""
    records = []
    for limit in limits:
        value = np.asarray(limit.evaluate(w), dtype=np.float64)
        excess = limit.excess(value)
        with np.errstate(invalid="ignore"):
            breach = np.nan_to_num(np.maximum(np.fmax(value - limit.upper, limit.lower - value), 0.0), nan=np.inf)
        i = int(np.argmax(excess)) if (excess > 0).any() else int(np.argmax(breach - limit.tol)) if len(value) else 0
        label = limit.labels[i] if len(limit.labels) > 1 or (len(limit.labels) and limit.labels[0] != limit.name) else None
        records.append({
            "name": limit.name if label is None else f"{limit.name}[{label}]", "kind": limit.kind,
            "value": float(value[i]), "lower": _finite(limit.lower[i]), "upper": _finite(limit.upper[i]),
            "breach": float(breach[i]), "tolerance": float(limit.tol[i]), "excess": float(excess[i]),
            "soft": False, "ok": bool(np.all(excess <= 0)),
        })
    for r in soft_rows:
        from trimtab.construct.constraints._base import check_rows

        record = check_rows(r, w)
        records.append({**record, "excess": 0.0})
    return pd.DataFrame.from_records(records, columns=VERIFICATION_COLUMNS)


def _finite(x: float) -> float:
    return float(x) if np.isfinite(x) else float("nan")
