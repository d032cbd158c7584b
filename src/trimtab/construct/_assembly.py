"""Turning constraint rows into cvxpy constraints, and the solver's duals back into shadow prices.

Hard box rows (per-asset bounds on w − offset) are merged into one lower and one upper bound on w:
the tightest limit wins element by element and receives the dual. Other rows become
``expr ≤ factor·upper``, ``expr ≥ factor·lower`` or ``expr == factor·value``. A soft row gets a
slack s ≥ 0: ``expr ≤ factor·(upper + s)`` and ``expr ≥ factor·(lower − s)``, with ``penalty·Σs``
subtracted from the objective (the infeasibility diagnosis makes the limits it may move soft).

Shadow prices: the problem is solved as minimise −U. For ``e ≤ c`` the dual μ ≥ 0 is −∂(−U*)/∂c, so
∂U*/∂upper = μ·factor: the objective gained per unit the limit is loosened (alpha given up per unit
of limit, read the other way). Lower bounds alike (gain per unit the lower limit is lowered); an
equality's signed dual ν is given to its upper side when ν > 0 and its lower side when ν < 0.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from trimtab.construct._cvxpy import cp
from trimtab.construct._variables import Variables
from trimtab.construct.constraints._base import Rows, merge_boxes, split_box_duals

#: Box limits equal within this are one equality.
_EQUAL_TOL = 0.0


class Assembly:
    """Collects cvxpy constraints and penalty terms for a set of rows.

    Parameters
    ----------
    variables : Variables
    """

    def __init__(self, variables: Variables) -> None:
        self.variables = variables
        self.constraints: list[cp.Constraint] = []
        self.penalty_terms: list[cp.Expression] = []
        self.rows: list[Rows] = []
        self.slacks: dict[int, cp.Variable] = {}
        self._handles: dict[int, list[tuple[str, cp.Constraint, np.ndarray | None]]] = {}
        self._box: list[Rows] = []
        self._box_handles: list[tuple[str, cp.Constraint, np.ndarray]] = []
        self._box_limits: tuple[np.ndarray, np.ndarray] | None = None

    # ------------------------------------------------------------------ building
    def add(self, rows: Rows) -> None:
        self.rows.append(rows)
        penalty = rows.soft
        if rows.box and penalty is None:
            self._box.append(rows)
            return
        v = self.variables
        expr = v.w - rows.offset if rows.box else rows.expression(v)  # type: ignore[misc]
        if expr.ndim == 0:
            expr = cp.reshape(expr, (1,), order="C")
        f = rows.factor
        lower, upper = rows.lower, rows.upper
        equal = np.isfinite(lower) & (lower == upper)
        up = np.flatnonzero(np.isfinite(upper) & (~equal if penalty is None else True))
        lo = np.flatnonzero(np.isfinite(lower) & (~equal if penalty is None else True))
        eq = np.flatnonzero(equal) if penalty is None else np.array([], dtype=int)
        slack = None
        if penalty is not None and (len(up) or len(lo)):
            slack = cp.Variable(rows.size, nonneg=True, name=f"slack_{rows.name}")
            self.slacks[id(rows)] = slack
            self.penalty_terms.append(penalty * cp.sum(slack))
        handles: list[tuple[str, cp.Constraint, np.ndarray | None]] = []
        for side, idx in (("upper", up), ("lower", lo), ("equal", eq)):
            if not len(idx):
                continue
            whole = len(idx) == rows.size
            e = expr if whole else expr[idx]
            limit = (upper if side == "upper" else lower)[idx] * f
            s = None if slack is None else (slack if whole else slack[idx]) * f
            if side == "upper":
                con = e <= (limit if s is None else limit + s)
            elif side == "lower":
                con = e >= (limit if s is None else limit - s)
            else:
                con = e == limit
            self.constraints.append(con)
            handles.append((side, con, None if whole else idx))
        self._handles[id(rows)] = handles

    def finish(self) -> list[cp.Constraint]:
        """Merge the hard box rows into bounds on w; return every constraint (definitions first)."""
        if self._box:
            n = self.variables.data.n_assets
            lo, hi = merge_boxes(self._box, n)
            self._box_limits = (lo, hi)
            w = self.variables.w
            equal = np.isfinite(lo) & (np.abs(hi - lo) <= _EQUAL_TOL)
            for side, mask, limit in (
                ("upper", np.isfinite(hi) & ~equal, hi),
                ("lower", np.isfinite(lo) & ~equal, lo),
                ("equal", equal, lo),
            ):
                idx = np.flatnonzero(mask)
                if not len(idx):
                    continue
                whole = len(idx) == n
                e = w if whole else w[idx]
                target = limit if whole else limit[idx]
                con = e <= target if side == "upper" else (e >= target if side == "lower" else e == target)
                self.constraints.append(con)
                self._box_handles.append((side, con, idx))
        return [*self.variables.definitions, *self.constraints]

    @property
    def penalty(self) -> cp.Expression | float:
        return cp.sum(cp.hstack(self.penalty_terms)) if self.penalty_terms else 0.0

    # ------------------------------------------------------------------ reading back
    def duals(self) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        """id(rows) → (gain per unit loosening of the upper limits, of the lower limits), objective units."""
        out: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        for rows in self.rows:
            up, lo = np.zeros(rows.size), np.zeros(rows.size)
            for side, con, idx in self._handles.get(id(rows), []):
                value = _dual(con, rows.size if idx is None else len(idx))
                _assign(up, lo, side, value * rows.factor, idx)
            out[id(rows)] = (up, lo)
        if self._box_limits is not None:
            self._box_duals(out)
        return out

    def _box_duals(self, out: dict[int, tuple[np.ndarray, np.ndarray]]) -> None:
        assert self._box_limits is not None
        n = len(self._box_limits[0])
        up_all, lo_all = np.zeros(n), np.zeros(n)
        for side, con, idx in self._box_handles:
            _assign(up_all, lo_all, side, _dual(con, len(idx)), idx)
        out.update(split_box_duals(self._box, self._box_limits, up_all, lo_all))

    def slack_values(self) -> dict[int, np.ndarray]:
        """id(rows) → slack per row (elastic or soft rows only)."""
        return {key: np.maximum(np.asarray(var.value, dtype=np.float64), 0.0) for key, var in self.slacks.items()
                if var.value is not None}


def _dual(con: cp.Constraint, size: int) -> np.ndarray:
    value: Any = con.dual_value
    if value is None:
        return np.full(size, np.nan)
    return np.broadcast_to(np.asarray(value, dtype=np.float64).ravel(), (size,)).copy()


def _assign(up: np.ndarray, lo: np.ndarray, side: str, value: np.ndarray, idx: np.ndarray | None) -> None:
    target = slice(None) if idx is None else idx
    if side == "upper":
        up[target] = value
    elif side == "lower":
        lo[target] = value
    else:
        up[target] = np.maximum(value, 0.0)
        lo[target] = np.maximum(-value, 0.0)
