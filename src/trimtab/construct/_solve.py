"""Solver order and settings, and one attempt's outcome.

Order: Clarabel (interior point, conic; settings below; retried once with equilibration when its
answer is inaccurate or fails verification), then SCS (first-order, conic, tight tolerances), or the
installed solvers the caller names. Clarabel's settings follow the
measurements in docs/construction.md: ``direct_solve_method='qdldl'`` (faster than the default
factorisation at large K), ``equilibrate_enable=False`` (equilibration added 30–100% iterations on
these problems) and ``tol_feas=1e-10`` (with the default feasibility tolerance a turnover cap summed
over thousands of assets was breached by 1e-6).
"""

from __future__ import annotations

import functools
import time
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import cvxpy as cp

from trimtab.errors import InputError

#: Solvers tried in this order unless the caller gives ``solvers=``.
SOLVER_ORDER: tuple[str, ...] = ("CLARABEL", "SCS")

#: Keyword settings passed to each solver through cvxpy.
SOLVER_SETTINGS: dict[str, dict[str, Any]] = {
    "CLARABEL": {
        "direct_solve_method": "qdldl",
        "equilibrate_enable": False,
        "tol_feas": 1e-10,
        "tol_gap_abs": 1e-10,
        "tol_gap_rel": 1e-10,
        "max_iter": 500,
    },
    "SCS": {"eps_abs": 1e-9, "eps_rel": 1e-9, "max_iters": 100_000},
}

#: A second try of the same solver when its first answer is inaccurate or fails verification:
#: Clarabel with equilibration and its default linear solver (slower, sometimes more robust).
RETRY_SETTINGS: dict[str, dict[str, Any]] = {
    "CLARABEL": {"equilibrate_enable": True, "tol_feas": 1e-10, "tol_gap_abs": 1e-10, "tol_gap_rel": 1e-10,
                 "max_iter": 500},
}

OPTIMAL = (cp.OPTIMAL,)
INACCURATE = (cp.OPTIMAL_INACCURATE, cp.INFEASIBLE_INACCURATE, cp.UNBOUNDED_INACCURATE)
INFEASIBLE = (cp.INFEASIBLE, cp.INFEASIBLE_INACCURATE)
UNBOUNDED = (cp.UNBOUNDED, cp.UNBOUNDED_INACCURATE)


@dataclass(frozen=True)
class Attempt:
    """One solver run: its status, iterations and time (and the error text if it raised)."""

    solver: str
    status: str
    iterations: int
    seconds: float
    message: str = ""
    settings: dict[str, Any] = field(default_factory=dict)


@functools.lru_cache(maxsize=1)
def installed() -> frozenset[str]:
    """cvxpy's installed solvers (asked once: the lookup imports every solver interface)."""
    return frozenset(cp.installed_solvers())


def solver_order(solvers: Sequence[str] | None) -> tuple[str, ...]:
    """The solvers to try, checked against what is installed."""
    installed_now = installed()
    order = tuple(s.upper() for s in (solvers if solvers is not None else SOLVER_ORDER))
    if not order:
        raise InputError("rebalance: solvers must name at least one solver")
    missing = [s for s in order if s not in installed_now]
    if solvers is not None and missing:
        raise InputError(
            f"rebalance: solvers not installed: {', '.join(missing)}; installed: {', '.join(sorted(installed_now))}"
        )
    return tuple(s for s in order if s in installed_now)


def plan(solvers: Sequence[str]) -> list[tuple[str, dict[str, Any] | None]]:
    """(solver, settings) in the order tried: each solver's settings, then its retry settings."""
    out: list[tuple[str, dict[str, Any] | None]] = []
    for solver in solvers:
        out.append((solver, None))
        if solver in RETRY_SETTINGS:
            out.append((solver, RETRY_SETTINGS[solver]))
    return out


def run(problem: cp.Problem, solver: str, settings: dict[str, Any] | None = None) -> Attempt:
    """Solve once (``settings`` default to SOLVER_SETTINGS); a solver exception becomes a failed attempt."""
    options = dict(SOLVER_SETTINGS.get(solver, {}) if settings is None else settings)
    start = time.perf_counter()
    try:
        with warnings.catch_warnings():
            # cvxpy warns about inaccurate solutions; the status carries that and is acted on
            warnings.simplefilter("ignore", UserWarning)
            problem.solve(solver=solver, **options)
    except cp.error.SolverError as err:
        return Attempt(solver, "solver_error", 0, time.perf_counter() - start, str(err).splitlines()[0], options)
    stats = problem.solver_stats
    iterations = int(getattr(stats, "num_iters", 0) or 0)
    return Attempt(solver, str(problem.status), iterations, time.perf_counter() - start, "", options)
