"""Verification of a solution with plain numpy, independent of cvxpy.

Every constraint row is re-evaluated from the returned weights; a hard row passes when its breach is
at most max(ABS_TOL, REL_TOL·|limit|) = max(1e-7, 1e-6·|limit|) in the row's own unit (weights,
exposures, beta or annualised volatility). Two further checks: every weight is finite, and the
objective recomputed from w agrees with the solver's to within OBJECTIVE_TOL·max(|U|, OBJECTIVE_FLOOR) = 1e-6·max(|U|, 1e-3).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd

from trimtab.construct.constraints._base import Rows, check_rows

#: Solver objective vs the numpy recomputation, relative to max(|U|, OBJECTIVE_FLOOR).
OBJECTIVE_TOL = 1e-6
OBJECTIVE_FLOOR = 1e-3
COLUMNS = ["name", "kind", "value", "lower", "upper", "breach", "tolerance", "soft", "ok"]


def verify(rows: Iterable[Rows], weights: np.ndarray, *, solver_objective: float | None = None,
           numpy_objective: float | None = None) -> pd.DataFrame:
    """One line per constraint block (its worst element) plus the finiteness and objective checks."""
    records = []
    finite = bool(np.isfinite(weights).all())
    records.append({"name": "weights_finite", "kind": "verification", "value": float(np.sum(~np.isfinite(weights))),
                    "lower": np.nan, "upper": 0.0, "breach": 0.0 if finite else 1.0, "tolerance": 0.0,
                    "soft": False, "ok": finite})
    if finite:
        records.extend(check_rows(r, weights) for r in rows)
    if solver_objective is not None and numpy_objective is not None and finite:
        gap = abs(solver_objective - numpy_objective)
        tol = OBJECTIVE_TOL * max(abs(numpy_objective), OBJECTIVE_FLOOR)
        records.append({"name": "objective", "kind": "verification", "value": numpy_objective,
                        "lower": solver_objective, "upper": solver_objective, "breach": gap, "tolerance": tol,
                        "soft": False, "ok": bool(gap <= tol)})
    return pd.DataFrame.from_records(records, columns=COLUMNS)


def failures(table: pd.DataFrame) -> pd.DataFrame:
    """The rows that did not pass."""
    return table[~table["ok"].astype(bool)]


def describe_failures(table: pd.DataFrame, limit: int = 5) -> str:
    """``name breached by x (tolerance t)`` for the worst failed checks."""
    bad = failures(table).sort_values("breach", ascending=False)
    parts = [f"{r.name} breached by {r.breach:.3g} (tolerance {r.tolerance:.1g})" for r in bad.head(limit).itertuples()]
    more = len(bad) - limit
    return "; ".join(parts) + (f" (and {more} more)" if more > 0 else "")


def soft_penalty(rows: Sequence[Rows], weights: np.ndarray) -> float:
    """Σ penalty·breach over soft rows: the penalty term recomputed from w."""
    total = 0.0
    for r in rows:
        if r.soft is not None:
            total += r.soft * float(r.breach(np.asarray(r.evaluate(weights), dtype=np.float64)).sum())
    return total
