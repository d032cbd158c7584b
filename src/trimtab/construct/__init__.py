"""Portfolio construction: rebalance to a risk budget and mandate on a factor model, in factor form.

:func:`rebalance` validates a scenario (:func:`validate_scenario`), aligns the inputs, solves the
problem in factor form (never an N×N matrix) with trimtab's own interior-point method when the
scenario is in its class (:mod:`trimtab.construct._ipm`), else builds the cvxpy problem with
y = Bᵀw as variables and solves it with Clarabel (then SCS), verifies every limit from the
weights with plain numpy, and returns a :class:`RebalanceResult`.
An infeasible problem raises :class:`~trimtab.errors.InfeasibleError` with a relaxation table.
"""

from __future__ import annotations

from trimtab.construct._problem import RebalanceProblem, build_problem, rebalance
from trimtab.construct._result import RebalanceResult
from trimtab.construct._solve import SOLVER_ORDER, SOLVER_SETTINGS
from trimtab.construct._spec import RebalanceSpec, validate_scenario
from trimtab.construct.constraints import HEURISTIC_KEYS, REGISTRY
from trimtab.errors import InfeasibleError, SolverError

__all__ = [
    "HEURISTIC_KEYS",
    "REGISTRY",
    "SOLVER_ORDER",
    "SOLVER_SETTINGS",
    "InfeasibleError",
    "RebalanceProblem",
    "RebalanceResult",
    "RebalanceSpec",
    "SolverError",
    "build_problem",
    "rebalance",
    "validate_scenario",
]
