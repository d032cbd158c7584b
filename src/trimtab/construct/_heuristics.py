"""Post-solve practicalities that are not convex: maximum number of names, minimum trade size, round lots.

Applied in this order after the convex solve, each followed by verification:

1. ``max_names: n`` — when more than n assets are held (|wᵢ| > NAME_TOL), keep the n assets that must
   stay (a hard lower bound above 0 or upper bound below 0, e.g. must-hold) and then the largest
   |wᵢ|; every other asset is fixed at 0 and the convex problem is solved again.
2. ``min_trade: {weight: m}`` — trades with TRADE_TOL < |wᵢ − w0ᵢ| < m are cancelled (the asset is
   fixed at w0ᵢ) and the problem is solved again; repeated (at most MAX_ROUNDS times) while the
   re-solve creates new small trades. A trade that a hard per-asset limit requires (the current
   weight lies outside the asset's bounds, including a ``max_names`` exit) is exempt and kept.
3. ``round_lots`` — each trade is rounded to the nearest whole lot (``lot`` shares at ``price``,
   one lot = lot·price/NAV of weight): to the nearer whole lot, or to the other one when only that
   keeps the asset inside its bounds (an exit sells the whole position, odd lot included). Rounding
   can move every limited quantity, so a repair then adds or removes single lots until each limit
   holds on the rounded book itself within its rounding tolerance (issue #19; what rounding moved a
   quantity is no allowance).

Each heuristic adds a row to the constraint table and the verification (names held, smallest trade,
largest rounding move).
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from trimtab.construct._lots import NAME_TOL, TRADE_TOL, rounded_weights
from trimtab.construct._lots import fixes as _fixes
from trimtab.construct._lots import hard_box as _hard_box
from trimtab.construct._verify import describe_failures, failures, verify
from trimtab.construct.constraints._base import Rows, box_rows
from trimtab.errors import SolverError

if TYPE_CHECKING:
    from trimtab.construct._problem import Outcome, RebalanceProblem

MAX_ROUNDS = 5


def check(problem: RebalanceProblem) -> None:
    """Check what the heuristics need before any solve."""
    spec, data = problem.spec, problem.data
    c = spec.constraints
    if "round_lots" in c:
        path = spec.path("constraints", "round_lots")
        if data.nav is None:
            raise path.fail("needs the fund's NAV to turn lots into weights (pass nav=...)")
        data.column(c["round_lots"]["lot_column"], path / "lot_column", positive=True)
        data.column(c["round_lots"]["price_column"], path / "price_column", positive=True)
    if "max_names" in c and "must_hold" in c:
        n_hold = len(c["must_hold"]["assets"])
        if n_hold > c["max_names"]["max"]:
            raise spec.path("constraints", "max_names", "max").fail(
                f"must be ≥ the {n_hold} must_hold assets (got {c['max_names']['max']})"
            )


def _lot_weight(problem: RebalanceProblem) -> np.ndarray:
    o = problem.spec.constraints["round_lots"]
    data = problem.data
    lot = data.attributes[o["lot_column"]].to_numpy(dtype=np.float64)  # type: ignore[index]
    price = data.attributes[o["price_column"]].to_numpy(dtype=np.float64)  # type: ignore[index]
    return lot * price / data.nav  # type: ignore[operator]



def _fix(name: str, mask: np.ndarray, offset: np.ndarray | None, labels: pd.Index) -> Rows:
    lower = np.where(mask, 0.0, -np.inf)
    upper = np.where(mask, 0.0, np.inf)
    return box_rows(f"{name}.fixed", name, lower, upper, labels, offset=offset)


def apply(problem: RebalanceProblem, outcome: Outcome) -> Outcome:
    """Run the heuristics the scenario asks for; return the final, verified outcome."""
    c = problem.spec.constraints
    if not any(k in c for k in ("max_names", "min_trade", "round_lots")):
        return outcome
    data = problem.data
    assets, w0 = data.assets, data.holdings
    extra: list[Rows] = []
    checks: list[Rows] = []
    notes = list(outcome.notes)
    if "max_names" in c:
        n_max = c["max_names"]["max"]
        held = np.abs(outcome.weights) > NAME_TOL
        if held.sum() > n_max:
            lo, hi = _hard_box(problem)
            forced = (lo > NAME_TOL) | (hi < -NAME_TOL)
            order = np.lexsort((-np.abs(outcome.weights), ~forced))
            keep = np.zeros(data.n_assets, dtype=bool)
            keep[order[:n_max]] = True
            keep &= held | forced
            extra.append(_fix("max_names", ~keep, None, assets))
            notes.append(f"max_names: {int(held.sum())} names held after the convex solve; kept {int(keep.sum())}, re-solved")
            outcome = problem.solve_convex(extra)
        checks.append(Rows(name="max_names", kind="max_names", unit="names", labels=["max_names"],
                           lower=np.array([-np.inf]), upper=np.array([float(n_max)]),
                           evaluate=lambda w: np.array([float((np.abs(w) > NAME_TOL).sum())])))
    if "min_trade" in c:
        m = c["min_trade"]["weight"]
        fixed = np.zeros(data.n_assets, dtype=bool)
        lo, hi = _hard_box(problem, extra)
        required = (w0 < lo - NAME_TOL) | (w0 > hi + NAME_TOL)
        if required.any():
            notes.append(f"min_trade: {int(required.sum())} trades required by hard limits are exempt")
        for _ in range(MAX_ROUNDS):
            trade = np.abs(outcome.weights - w0)
            small = (trade > TRADE_TOL) & (trade < m) & ~fixed & ~required
            if not small.any():
                break
            fixed |= small
            extra = [r for r in extra if r.name != "min_trade.fixed"] + [_fix("min_trade", fixed, w0, assets)]
            notes.append(f"min_trade: cancelled {int(small.sum())} trades below {m:g}, re-solved")
            outcome = problem.solve_convex(extra)
        checks.append(Rows(name="min_trade", kind="min_trade", unit="weight", labels=assets,
                           lower=np.full(data.n_assets, m), upper=np.full(data.n_assets, np.inf), per_asset=True,
                           evaluate=lambda w: np.where((np.abs(w - w0) > TRADE_TOL) & ~required, np.abs(w - w0), m)))
    rows = outcome.rows + checks
    if "round_lots" in c:
        return _round(problem, replace(outcome, notes=notes), rows)
    table = verify(rows, outcome.weights)
    table = pd.concat([outcome.verification[outcome.verification["name"] == "objective"], table[table["name"] != "weights_finite"]])
    if len(failures(table)):
        raise SolverError(f"{problem.spec.source}: after the post-solve heuristics: {describe_failures(table)}")
    return replace(outcome, rows=rows, verification=table.reset_index(drop=True), notes=notes)


def _round(problem: RebalanceProblem, outcome: Outcome, rows: list[Rows]) -> Outcome:
    """Round each trade to whole lots, repair the book until every limit holds within its rounding
    tolerance (:mod:`trimtab.construct._rounded_book`), and verify it against the limits themselves.
    A book no repair can make hold is kept: the trade list marks its orders not fit to send."""
    from trimtab.construct._orders import min_cash, order_settings
    from trimtab.construct._rounded_book import book_limits, book_model, repair_book, rounding_tolerances, verification_table

    data = problem.data
    w0, w_star = data.holdings, outcome.weights
    lot_w = _lot_weight(problem)
    lower, upper = _hard_box(problem, _fixes(rows))
    w = rounded_weights(w0, w_star, lot_w, lower, upper)
    model = book_model(problem)
    settings = order_settings(problem)
    limits, boxes = book_limits(rows, model, w0, min_cash=min_cash(problem), fully_invested_lot=None,
                                tolerances=rounding_tolerances(settings))
    exits = (np.abs(w) <= NAME_TOL) & (np.abs(w0) > NAME_TOL)  # whole position sold, odd lot included
    w = repair_book(w, w0, lot_w, lower, upper, ~exits, limits, model, method=settings.get("repair", "auto"))
    table = verification_table([*limits, *boxes], [r for r in rows if r.soft is not None], w)
    lots = (w - w0) / lot_w
    notes = [*outcome.notes, f"round_lots: {int((np.abs(lots) > TRADE_TOL).sum())} trades rounded to whole lots"]
    return replace(outcome, weights=w, rows=rows, verification=table, notes=notes, status="optimal (rounded to lots)")


__all__ = ["NAME_TOL", "TRADE_TOL", "apply", "check", "rounded_weights"]
