"""Infeasibility diagnosis: the elastic re-solve.

Every hard row gets a slack s ≥ 0 (``expr ≤ upper + s``, ``expr ≥ lower − s``) and the problem
minimises Σ s / scale, where a row's scale is the size of one unit of concern: 1 for weights,
exposures and beta, the cap itself (at least 1%) for risk caps. The rows whose slack is positive at
the optimum are the conflicting limits; each must move by at least its slack for the others to hold
as they are (one minimal-weighted way of restoring feasibility, not the only one).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab.construct import _solve
from trimtab.construct.constraints._base import Rows
from trimtab.errors import InfeasibleError

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

COLUMNS = ["constraint", "kind", "side", "limit", "needed", "relax_by", "scale", "unit"]
#: A slack counts when above max(ELASTIC_TOL, ELASTIC_TOL·|limit|).
ELASTIC_TOL = 1e-6


def diagnose(problem: RebalanceProblem, extra: Sequence[Rows], attempts: list[Any]) -> None:
    """Solve the elastic problem; raise InfeasibleError naming the conflicts when there are any."""
    cvx, variables, assembly = problem.build(extra, elastic=True)
    # the same ladder of settings as the main solve: Clarabel can stall at its tightest tolerance
    for solver, settings in _solve.plan(problem.solvers):
        attempt = _solve.run(cvx, solver, settings)
        attempts.append(attempt)
        if attempt.status == _solve.cp.OPTIMAL and variables.w.value is not None:
            break
    else:
        raise InfeasibleError(
            f"{problem.spec.source}: the problem is infeasible and the elastic re-solve failed "
            f"({', '.join(a.status for a in attempts)})", None)
    weights = np.asarray(variables.w.value, dtype=np.float64)
    table = relaxation_table(problem.all_rows(extra), weights)
    if table.empty:
        return
    shown = [f"{r.constraint} ({r.side} {r.limit:.4g} → {r.needed:.4g})" for r in table.head(5).itertuples()]
    more = f" and {len(table) - 5} more" if len(table) > 5 else ""
    raise InfeasibleError(
        f"{problem.spec.source}: infeasible: these limits conflict: {'; '.join(shown)}{more} "
        "(see .relaxation for how far each must move)",
        table,
    )


def relaxation_table(rows: Sequence[Rows], weights: np.ndarray) -> pd.DataFrame:
    """One line per row breached at the elastic optimum: the limit, the value needed, the move."""
    records = []
    for r in rows:
        if r.soft is not None:
            continue  # a soft limit may be exceeded: it never conflicts
        value = np.asarray(r.evaluate(weights), dtype=np.float64)
        over = value - r.upper
        under = r.lower - value
        for i in range(r.size):
            for side, gap, limit in (("upper", over[i], r.upper[i]), ("lower", under[i], r.lower[i])):
                if np.isfinite(limit) and gap > ELASTIC_TOL * max(1.0, abs(limit)) * max(1.0, r.scale):
                    label = r.labels[i] if (r.per_asset or r.size > 1) else None
                    records.append({
                        "constraint": r.name if label is None else f"{r.name}[{label}]",
                        "kind": r.kind, "side": side, "limit": float(limit), "needed": float(value[i]),
                        "relax_by": float(gap), "scale": r.scale, "unit": r.unit,
                    })
    table = pd.DataFrame.from_records(records, columns=COLUMNS)
    if len(table):
        table = table.sort_values("relax_by", ascending=False, key=lambda s: s / table.loc[s.index, "scale"])
    return table.reset_index(drop=True)
