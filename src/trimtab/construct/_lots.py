"""Whole lots: the hard per-asset bounds a rounded book keeps, and the rounding rule itself.

Shared by the ``round_lots`` heuristic and the order-ready trade list.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from trimtab.construct.constraints._base import Rows, merge_boxes

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: A weight above this (in absolute value) counts as a name held.
NAME_TOL = 1e-8
#: A trade above this (in absolute value) counts as a trade.
TRADE_TOL = 1e-10


def hard_box(problem: RebalanceProblem, extra: list[Rows] | None = None) -> tuple[np.ndarray, np.ndarray]:
    hard = [r for r in problem.all_rows(extra or []) if r.box and r.soft is None]
    return merge_boxes(hard, problem.data.n_assets)


def fixes(rows: list[Rows]) -> list[Rows]:
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
