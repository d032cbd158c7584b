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
   one lot = lot·price/NAV of weight). Rounding can move every limited quantity; the rounded book
   is verified with the rule that a limit may be exceeded only by as much as rounding moved that
   quantity (the ``allowance`` column), and every trade moves by less than one lot: to the nearer
   whole lot, or to the other one when only that keeps the asset inside its bounds (an exit sells
   the whole position, odd lot included).

Each heuristic adds a row to the constraint table and the verification (names held, smallest trade,
largest rounding move).
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from trimtab.construct._verify import describe_failures, failures, verify
from trimtab.construct.constraints._base import Rows, box_rows, merge_boxes
from trimtab.errors import SolverError

if TYPE_CHECKING:
    from trimtab.construct._problem import Outcome, RebalanceProblem

#: A weight above this (in absolute value) counts as a name held.
NAME_TOL = 1e-8
#: A trade above this (in absolute value) counts as a trade.
TRADE_TOL = 1e-10
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


def _hard_box(problem: RebalanceProblem, extra: list[Rows] | None = None) -> tuple[np.ndarray, np.ndarray]:
    hard = [r for r in problem.all_rows(extra or []) if r.box and r.soft is None]
    return merge_boxes(hard, problem.data.n_assets)


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
    data = problem.data
    w0, w_star = data.holdings, outcome.weights
    lot_w = _lot_weight(problem)
    w = rounded_weights(w0, w_star, lot_w, *_hard_box(problem, _fixes(rows)))
    lots = (w - w0) / lot_w
    exits = (np.abs(w_star) <= NAME_TOL) & (np.abs(w0) > NAME_TOL)  # whole position sold, odd lot included
    move = Rows(name="round_lots", kind="round_lots", unit="lots", labels=data.assets, per_asset=True,
                lower=np.full(data.n_assets, -1.0), upper=np.full(data.n_assets, 1.0),
                evaluate=lambda v: np.where(exits, 0.0, (v - w_star) / lot_w))
    rows = [*rows, move]
    before = verify(rows, w_star)
    after = verify(rows, w)
    allowance = np.zeros(len(after))
    for k, r in enumerate(rows, start=1):
        allowance[k] = float(np.max(np.abs(np.asarray(r.evaluate(w)) - np.asarray(r.evaluate(w_star))), initial=0.0))
    after["allowance"] = allowance
    after.loc[after["kind"].isin(["round_lots", "max_names"]), "allowance"] = 0.0
    after["ok"] = after["soft"] | (after["breach"] <= after["tolerance"] + after["allowance"])
    after["ok"] &= before["ok"].to_numpy() | before["soft"].to_numpy()
    if len(failures(after)):
        raise SolverError(f"{problem.spec.source}: after rounding to lots: {describe_failures(after)}")
    notes = [*outcome.notes, f"round_lots: {int((np.abs(lots) > TRADE_TOL).sum())} trades rounded to whole lots"]
    return replace(outcome, weights=w, rows=rows, verification=after, notes=notes, status="optimal (rounded to lots)")


def _fixes(rows: list[Rows]) -> list[Rows]:
    return [r for r in rows if r.name.endswith(".fixed")]


def rounded_weights(w0: np.ndarray, target: np.ndarray, lot: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Round each trade to whole lots: the nearer of floor and ceiling that keeps w inside [lo, hi]
    (the nearer one when neither does); an exit (target 0) sells the whole position, odd lot included."""
    trade = (target - w0) / lot
    down, up = np.floor(trade), np.ceil(trade)
    w_down, w_up = w0 + down * lot, w0 + up * lot
    inside_down = (w_down >= lo - NAME_TOL) & (w_down <= hi + NAME_TOL)
    inside_up = (w_up >= lo - NAME_TOL) & (w_up <= hi + NAME_TOL)
    nearer_up = (up - trade) < (trade - down)
    choose_up = np.where(inside_up & ~inside_down, True, np.where(inside_down & ~inside_up, False, nearer_up))
    w = np.where(choose_up, w_up, w_down)
    exit_ = (np.abs(target) <= NAME_TOL) & (np.abs(w0) > NAME_TOL)
    w[exit_] = 0.0
    unchanged = np.abs(target - w0) <= TRADE_TOL
    w[unchanged] = w0[unchanged]
    return w
