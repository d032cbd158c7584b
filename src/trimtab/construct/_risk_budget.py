"""Risk budgeting: a long-only, fully invested portfolio whose risk contributions equal given shares.

Spinu's (2013) convex formulation: minimise f(x) = ½·xᵀΣx − Σᵢ bᵢ·log xᵢ over x > 0. At the
minimum ∇f = Σx − b/x = 0, so xᵢ(Σx)ᵢ = bᵢ for every asset, and w = x / Σx has risk contributions
RCᵢ = wᵢ(Σw)ᵢ / wᵀΣw = bᵢ / Σb. The minimiser is found by damped Newton steps; each Hessian
Σ + diag(b/x²) = U·Uᵀ + diag(d + b/x²) (U = B·L) is solved by the Woodbury identity in O(N·K²),
so no N×N matrix is formed.

A budget per group (``by`` an attribute column) is spread equally over the group's assets, which
gives every group its share.
"""

from __future__ import annotations

import time
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.construct._outcome import Outcome
from trimtab.construct._verify import verify
from trimtab.construct.constraints._base import Rows
from trimtab.errors import SolverError

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: Newton stops when the decrement λ²/2 falls below this (f is scale-free in b).
NEWTON_TOL = 1e-22
MAX_NEWTON = 200


def budgets(problem: RebalanceProblem) -> np.ndarray:
    """Risk share per asset (sums to 1)."""
    options = problem.spec.objective["risk_budget"]
    data = problem.data
    path = problem.spec.path("objective", "risk_budget")
    given = dict(options["budgets"] or {})
    default = given.pop("default", None)
    if options["by"] is None:
        labels = pd.Series(np.arange(data.n_assets), index=data.assets)
        keys = data.assets
        unknown = [k for k in given if k not in set(keys)]
        if unknown:
            raise (path / "budgets").fail(f"assets not in the risk model: {list_labels(unknown)}")
        if not given:
            return np.full(data.n_assets, 1.0 / data.n_assets)
        missing = [a for a in keys if a not in given]
        if missing and default is None:
            raise (path / "budgets").fail(f"no budget for assets {list_labels(missing)} (give a default)")
        raw = np.array([given.get(a, default) for a in keys], dtype=np.float64)
        return raw / raw.sum()
    column = data.column(options["by"], path / "by", numeric=False)
    groups = pd.unique(column.to_numpy())
    unknown = [g for g in given if g not in set(groups)]
    if unknown:
        raise (path / "budgets").fail(f"unknown group(s) {list_labels(unknown)} in column {options['by']!r}")
    if given:
        missing = [g for g in groups if g not in given]
        if missing and default is None:
            raise (path / "budgets").fail(f"no budget for groups {list_labels(missing)} (give a default)")
    share: dict[Any, float] = {}
    for g in groups:
        budget = given.get(g, default) if given else 1.0
        assert budget is not None  # a group without a budget and no default raised above
        share[g] = budget
    total = sum(share.values())
    counts = column.value_counts()
    labels = column
    return np.array([share[g] / total / counts[g] for g in labels.to_numpy()], dtype=np.float64)


def newton(U: np.ndarray, d: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, int]:
    """Minimise ½xᵀ(UUᵀ + diag d)x − bᵀlog x; returns x and the number of Newton steps."""
    sigma_diag = np.einsum("ij,ij->i", U, U) + d
    x = np.sqrt(b / sigma_diag)

    def value(z: np.ndarray) -> float:
        uz = U.T @ z
        return 0.5 * float(uz @ uz + d @ (z * z)) - float(b @ np.log(z))

    f = value(x)
    for step in range(1, MAX_NEWTON + 1):
        grad = U @ (U.T @ x) + d * x - b / x
        D = d + b / (x * x)
        Dinv_U = U / D[:, None]
        small = np.eye(U.shape[1]) + U.T @ Dinv_U
        rhs = grad / D
        direction = -(rhs - Dinv_U @ np.linalg.solve(small, U.T @ rhs))
        decrement = -float(grad @ direction)
        if decrement / 2 <= NEWTON_TOL * max(1.0, abs(f)):
            return x, step
        t = 1.0
        neg = direction < 0
        if neg.any():
            t = min(1.0, 0.99 * float(np.min(-x[neg] / direction[neg])))
        while True:
            candidate = x + t * direction
            fc = value(candidate)
            if fc <= f - 0.25 * t * decrement or t < 1e-12:
                break
            t *= 0.5
        x, f = candidate, fc
    raise SolverError(f"risk budgeting: Newton's method did not converge in {MAX_NEWTON} steps")


def contributions(problem: RebalanceProblem, w: np.ndarray) -> np.ndarray:
    """Risk shares RCᵢ = wᵢ(Σw)ᵢ / wᵀΣw."""
    sigma_w = problem.model.covariance_dot(w)
    return w * sigma_w / float(w @ sigma_w)


def solve_risk_budget(problem: RebalanceProblem) -> Outcome:
    """Newton on Spinu's formulation, then w = x/Σx and the verification of the shares."""
    start = time.perf_counter()
    target = budgets(problem)
    U = problem.model._scaled_exposures * np.sqrt(problem.data.periods_per_year)
    d = problem.data.specific_variance * problem.data.periods_per_year
    build = time.perf_counter() - start
    x, steps = newton(U, d, target)
    w = x / x.sum()
    seconds = time.perf_counter() - start - build
    share_rows = Rows(
        name="risk_budget", kind="risk_budget", unit="share of risk", labels=problem.data.assets,
        lower=target.copy(), upper=target.copy(), evaluate=lambda v: contributions(problem, v), per_asset=True,
    )
    rows = [*problem.all_rows(), share_rows]
    table = verify(rows, w)
    if not table["ok"].all():
        raise SolverError(f"{problem.spec.source}: risk budgeting: weights fail verification")
    return Outcome(w, "optimal", "NEWTON", steps, seconds, build, [], table, {}, rows, float("nan"),
                   notes=["risk budgeting by Newton's method on the log formulation (Spinu 2013)"])
