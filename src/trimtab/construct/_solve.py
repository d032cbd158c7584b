"""Solver order and settings (the retry ladder), and one attempt's outcome.

Ladder: first FACTOR_IPM, trimtab's own interior-point method in factor form
(:mod:`trimtab.construct._ipm`), for the problems in its class; then, for each cvxpy solver in
order (Clarabel, then SCS, or the installed solvers the caller names), the solver's settings
(SOLVER_SETTINGS), then its retries (RETRY_SETTINGS) while its answer is not ``optimal`` or fails
the numpy verification. FACTOR_IPM comes first because it is 2–4× faster end to end at
N ≥ 2,000 (benchmarks/rebalance_speed.py); any answer of it that is not converged or fails
verification goes down the same ladder. Clarabel's rungs:

1. ``tol_feas=1e-10``, ``tol_gap_abs=tol_gap_rel=1e-10``, ``direct_solve_method='qdldl'``,
   ``equilibrate_enable=False``: qdldl is faster than the default factorisation at large K,
   equilibration added 30–100% iterations, and the tight feasibility tolerance keeps a turnover
   cap summed over thousands of assets inside its verification tolerance (with Clarabel's default
   1e-8 it was breached by 1e-6).
2. the same at 1e-9: on about 1% of ordinary instances (walk-forward backtests at N = 1,000, a
   5% turnover cap) Clarabel's primal residual stalls between 1e-10 and 1e-8 once the barrier
   parameter is below ~1e-13 (the KKT solve has no more accuracy to give), and Clarabel stops with
   ``AlmostSolved`` (cvxpy: ``optimal_inaccurate``). That status is judged against Clarabel's
   *reduced* tolerances (1e-4 to 5e-5), so it is not accepted; the 1e-9 rung reaches ``optimal``.
3. equilibration on, the default factorisation and Clarabel's own tolerances (1e-8): a differently
   scaled KKT system, for what rungs 1–2 could not solve.

Every rung's weights are verified from w with numpy (docs/construction.md, "Solvers"), so a
relaxed rung never lets a breach beyond the documented tolerance pass.
"""

from __future__ import annotations

import functools
import time
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from trimtab.construct._cvxpy import cp
from trimtab.errors import InputError

#: The factor-form interior-point method of trimtab.construct._ipm (not a cvxpy solver).
FACTOR_IPM = "FACTOR_IPM"
#: Solvers tried in this order unless the caller gives ``solvers=``. FACTOR_IPM is skipped for
#: problems outside its class (soft constraints, impact costs, gross/short leverage limits).
SOLVER_ORDER: tuple[str, ...] = (FACTOR_IPM, "CLARABEL", "SCS")

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
    # BLAS threads while FACTOR_IPM runs (None: leave the process's setting). Its products are a few
    # ms each; on two cores a second thread made every measured size slower (docs/performance.md)
    FACTOR_IPM: {"blas_threads": 1},
}

#: Tries of the same solver after its settings, in order, while its answer is not ``optimal`` or
#: fails verification (the rungs in the module docstring).
RETRY_SETTINGS: dict[str, tuple[dict[str, Any], ...]] = {
    "CLARABEL": (
        {**SOLVER_SETTINGS["CLARABEL"], "tol_feas": 1e-9, "tol_gap_abs": 1e-9, "tol_gap_rel": 1e-9},
        {"equilibrate_enable": True, "tol_feas": 1e-8, "tol_gap_abs": 1e-8, "tol_gap_rel": 1e-8, "max_iter": 500},
    ),
}

# cvxpy's status strings (cvxpy.settings), written out so that importing this module does not import cvxpy
OPTIMAL = ("optimal",)
INACCURATE = ("optimal_inaccurate", "infeasible_inaccurate", "unbounded_inaccurate")
INFEASIBLE = ("infeasible", "infeasible_inaccurate")
UNBOUNDED = ("unbounded", "unbounded_inaccurate")


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
    """cvxpy's installed solvers and FACTOR_IPM (asked once: the lookup imports every solver interface)."""
    return frozenset(cp.installed_solvers()) | {FACTOR_IPM}


def solver_order(solvers: Sequence[str] | None) -> tuple[str, ...]:
    """The solvers to try, checked against what is installed.

    The default order is trimtab's own method and two of cvxpy's own dependencies: it is taken as it
    stands, without asking cvxpy what is installed (which imports cvxpy and every solver interface, a
    second that ``trimtab check`` and a FACTOR_IPM solve need not pay). A solver missing all the same
    fails its attempt with cvxpy's message, and the next one is tried.
    """
    order = tuple(s.upper() for s in (solvers if solvers is not None else SOLVER_ORDER))
    if not order:
        raise InputError("rebalance: solvers must name at least one solver")
    if solvers is None:
        return order
    installed_now = installed()
    missing = [s for s in order if s not in installed_now]
    if solvers is not None and missing:
        raise InputError(
            f"rebalance: solvers not installed: {', '.join(missing)}; installed: {', '.join(sorted(installed_now))}"
        )
    return tuple(s for s in order if s in installed_now)


def plan(solvers: Sequence[str]) -> list[tuple[str, dict[str, Any] | None]]:
    """(solver, settings) in the order tried: each solver's settings (None), then its retries."""
    out: list[tuple[str, dict[str, Any] | None]] = []
    for solver in solvers:
        out.append((solver, None))
        out.extend((solver, dict(settings)) for settings in RETRY_SETTINGS.get(solver, ()))
    return out


def label(solver: str, settings: dict[str, Any] | None) -> str:
    """``CLARABEL`` for a solver's own settings; with a retry's tolerances and scaling otherwise."""
    if settings is None:
        return solver
    tolerances = [f"{key}={settings[key]:g}" for key in ("tol_feas", "eps_abs") if key in settings]
    if settings.get("equilibrate_enable"):
        tolerances.append("equilibrated")
    return f"{solver} retry ({', '.join(tolerances) or 'changed settings'})"


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
