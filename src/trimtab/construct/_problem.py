"""The built rebalance problem: inputs checked once, re-solved with changes, verified after each solve."""

from __future__ import annotations

import time
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any

import numpy as np
import pandas as pd

from trimtab.construct import _alpha_factor, _elastic, _fast, _heuristics, _overlay, _passive, _solve
from trimtab.construct._assembly import Assembly
from trimtab.construct._cvxpy import cp
from trimtab.construct._data import ProblemData, prepare
from trimtab.construct._objective import Objective
from trimtab.construct._outcome import Outcome
from trimtab.construct._spec import RebalanceSpec, validate_scenario
from trimtab.construct._stress_table import check_listed_shocks
from trimtab.construct._variables import Variables
from trimtab.construct._verify import describe_failures, failures, soft_penalty, verify
from trimtab.construct.constraints import REGISTRY, Constraint, Rows
from trimtab.errors import InputError, SolverError
from trimtab.model import FactorModel


class RebalanceProblem:
    """A rebalance problem with its inputs aligned and checked; :meth:`solve` builds and solves it.

    Build with :func:`build_problem`. What-if runs call :meth:`update` (new alpha, holdings,
    benchmark, risk aversion or limits) and :meth:`solve` again: the inputs are not re-read or
    re-checked beyond what changed, and the cvxpy problem is rebuilt from the cached arrays
    (measured faster than cvxpy Parameters at these sizes; see docs/construction.md).

    Attributes
    ----------
    spec : RebalanceSpec
        The validated scenario.
    data : ProblemData
        Inputs in model order.
    constraints : list of Constraint
        One object per convex constraint key, in scenario order.
    """

    def __init__(self, spec: RebalanceSpec, data: ProblemData, solvers: Sequence[str] | None = None,
                 unknown_assets: str = "error", warm: _fast.WarmBox | None = None) -> None:
        self.spec = spec
        #: the last converged FACTOR_IPM point of this problem and of those made from it by update()
        #: with new limits or λ: such a re-solve starts from it (20–35 % fewer iterations measured)
        self.warm = warm if warm is not None else _fast.WarmBox()
        self.data = data
        self.unknown_assets = unknown_assets
        self.solvers = _solve.solver_order(solvers)
        self.constraints: list[Constraint] = [
            REGISTRY[key](options, data, spec) for key, options in spec.constraints.items() if key in REGISTRY
        ]
        self.objective = Objective(spec, data)
        for c in self.constraints:
            _ = c.rows  # build (and check against the data) now, before any solve
        #: the hedge overlay's notionals under check, its own rows; risk rows re-read on w + X·h
        self.hedge: _overlay.HedgeState | None = None
        self.overlay_rows: list[Rows] = []
        if data.overlay is not None:
            self.hedge = _overlay.HedgeState(data.overlay)
            self.objective.hedge = self.hedge.hedged
            for c in self.constraints:
                if c.key in _overlay.RISK_KEYS:
                    c.__dict__["rows"] = [_overlay.wrap(r, self.hedge) for r in c.rows]
            self.overlay_rows = _overlay.overlay_rows(self.hedge)
        #: positions the market carried beyond a per-asset limit, moved back as far as trading allows
        self.passive_notes = _passive.cure(self)
        #: scenario keys a variant scenario set itself: named first when limits conflict
        self.changed: tuple[str, ...] = ()
        _heuristics.check(self)

    @property
    def model(self) -> FactorModel:
        return self.data.model

    # ------------------------------------------------------------------ what-if changes
    def update(
        self,
        *,
        alpha: pd.Series | None = None,
        holdings: pd.Series | None = None,
        benchmark: pd.Series | None = None,
        risk_aversion: float | None = None,
        limits: Mapping[str, float] | None = None,
    ) -> RebalanceProblem:
        """A new problem sharing this one's model and attributes, with the given inputs replaced.

        Parameters
        ----------
        alpha, holdings, benchmark : pandas.Series, optional
            Replacements (same rules as :func:`rebalance`, with this problem's ``unknown_assets``
            policy; holdings sold outside the optimizer are replaced with the holdings).
        risk_aversion : float, optional
            New λ (utility objective only).
        limits : Mapping[str, float], optional
            Dotted paths under ``constraints`` → new value, e.g. ``{"tracking_error.max": 0.02}``.

        Returns
        -------
        RebalanceProblem
        """
        spec = self.spec
        if limits:
            spec = spec.with_limits(limits)
        if risk_aversion is not None:
            spec = spec.with_risk_aversion(risk_aversion)
        data = self.data
        if alpha is not None or holdings is not None or benchmark is not None:
            model = data.model
            fresh = prepare(
                model,
                holdings=holdings if holdings is not None else pd.Series(data.holdings, index=model.assets),
                benchmark=benchmark if benchmark is not None else (
                    None if data.benchmark is None else pd.Series(data.benchmark, index=model.assets)),
                alpha=alpha if alpha is not None else pd.Series(data.alpha, index=model.assets),
                attributes=None, nav=data.nav, unknown_assets=self.unknown_assets, long_book=_long_book(spec),
            )
            data = fresh.with_changes(attributes=data.attributes, overlay=data.overlay,
                                      sold_outside=data.sold_outside if holdings is None else fresh.sold_outside)
            data = _alpha_factor.augment(data, spec.mapping)
        # a warm start pays for limit, λ, holdings and benchmark changes (measured at 1,000 × 20 to
        # 5,000 × 50: 12–22 iterations against 18–28 cold, even for an unrelated new book); with a new
        # alpha the old point costs iterations (28–33 against 19–23 cold), so that starts cold
        warm = self.warm if alpha is None else None
        problem = RebalanceProblem(spec, data, self.solvers, self.unknown_assets, warm)
        problem.changed = self.changed
        return problem

    def solve(self, **changes: Any) -> Any:
        """Solve (after :meth:`update` with ``changes`` when given) and return a RebalanceResult.

        Raises
        ------
        InfeasibleError
            With the conflict set and the relaxation options (:mod:`trimtab.construct._elastic`).
        SolverError
            When every solver failed or returned weights that breach a constraint.
        """
        if changes:
            return self.update(**changes).solve()
        from trimtab.construct._result import make_result

        if self.objective.kind == "risk_budget":
            from trimtab.construct._risk_budget import solve_risk_budget

            outcome = solve_risk_budget(self)
        else:
            outcome = self.solve_convex()
            outcome = _heuristics.apply(self, outcome)
        if self.passive_notes:
            outcome = replace(outcome, notes=[*self.passive_notes, *outcome.notes])
        return make_result(self, outcome)

    def relaxed(self, moves: Sequence[Mapping[str, Any]]) -> RebalanceProblem:
        """The same problem with the limits of a relaxation option loosened (see ``_elastic.relaxation``)."""
        fresh = RebalanceProblem(self.spec, self.data, self.solvers, self.unknown_assets, self.warm)
        moved = {id(m["rows"]) for m in moves}
        if self.hedge is not None:  # the copied risk rows read this problem's notionals
            fresh.hedge, fresh.overlay_rows = self.hedge, self.overlay_rows
            fresh.objective.hedge = self.hedge.hedged
        for old, new in zip(self.constraints, fresh.constraints, strict=True):
            new.__dict__["rows"] = [_elastic.loosen(r, moves) if id(r) in moved else r for r in old.rows]
        fresh.changed = self.changed
        return fresh

    # ------------------------------------------------------------------ the convex solve
    def all_rows(self, extra: Sequence[Rows] = ()) -> list[Rows]:
        return [r for c in self.constraints for r in c.rows] + self.overlay_rows + list(extra)

    def build(self, extra: Sequence[Rows] = ()) -> tuple[cp.Problem, Variables, Assembly]:
        """The cvxpy problem in factor form: maximise U − soft-limit penalties."""
        variables = Variables(self.data)
        assembly = Assembly(variables)
        for c in self.constraints:
            c.add(assembly)
        for r in [*self.overlay_rows, *extra]:
            assembly.add(r)
        # the objective may create variables (trades, impact) whose definitions finish() must collect
        goal = self.objective.expression(variables) - assembly.penalty
        return cp.Problem(cp.Maximize(goal), assembly.finish()), variables, assembly

    def solve_convex(self, extra: Sequence[Rows] = ()) -> Outcome:
        """Solve in solver order, verify each answer from w; diagnose infeasibility; fail loudly otherwise.

        The cvxpy problem is built only when a cvxpy solver is reached (FACTOR_IPM needs none).
        """
        rows = self.all_rows(extra)
        attempts: list[_solve.Attempt] = []
        rejected: list[str] = []
        skipped: list[str] = []  # solvers whose class the problem is outside of (not in the notes)
        built: tuple[cp.Problem, Variables, Assembly] | None = None
        build_time = 0.0

        def accept(raw: np.ndarray, solver_objective: float, name: str,
                   notionals: np.ndarray | None = None) -> tuple[np.ndarray, pd.DataFrame] | None:
            if self.hedge is not None:  # the risk rows check w + X·h with the h that leaves with w
                self.hedge.h = np.zeros(self.hedge.overlay.size) if notionals is None else notionals
            for weights in (_without_noise(raw), raw):
                numpy_objective = self.objective.breakdown(weights, soft_penalty(rows, weights))["total"]
                table = verify(rows, weights, solver_objective=solver_objective, numpy_objective=numpy_objective)
                if not len(failures(table)):
                    return weights, table
            rejected.append(f"{name}: {describe_failures(table)}")
            return None

        def notes(name: str) -> list[str]:
            return [f"solver: accepted {name} after {' | '.join(rejected)}"] if rejected else []

        for solver, settings in _solve.plan(self.solvers):
            name = _solve.label(solver, settings)
            if solver == _fast.NAME:
                reason = _fast.unsupported(self, rows)
                if reason is not None:
                    skipped.append(f"{name}: not for {reason}")
                    continue
                start = time.perf_counter()
                answer = _fast.solve(self, rows, self.warm if not extra else None)
                if answer is None:  # empty weight boxes: the cvxpy path diagnoses them
                    skipped.append(f"{name}: a weight's lower bound is above its upper bound")
                    continue
                sol = answer.solution
                attempts.append(_solve.Attempt(solver, sol.status, sol.iterations, time.perf_counter() - start, "",
                                               _fast.settings()))
                if sol.status == "infeasible":
                    # a Farkas certificate (_ipm._Run.farkas): no general solver need say it again
                    # raises InfeasibleError when confirmed; the certificate's iterate seeds the diagnosis' starts
                    _elastic.diagnose(self, extra, attempts, seed=answer.weights)
                    rejected.append(f"{name}: infeasible but the limits can all hold (no conflict set)")
                    continue
                if not sol.converged:
                    rejected.append(f"{name}: {sol.status}")
                    continue
                accepted = accept(answer.weights, answer.solver_objective, name)
                if accepted is None:
                    continue
                weights, table = accepted
                return Outcome(weights, "optimal", solver, sol.iterations, sol.seconds, answer.build_seconds,
                               attempts, table, answer.duals, rows, answer.solver_objective, notes(name), skipped)
            if built is None:
                start = time.perf_counter()
                built = self.build(extra)
                build_time = time.perf_counter() - start
            problem, variables, assembly = built
            attempt = _solve.run(problem, solver, settings)
            attempts.append(attempt)
            if attempt.status in _solve.UNBOUNDED:
                raise SolverError(
                    f"{self.spec.source}: the objective {self.objective.kind} is unbounded under these "
                    "constraints (add a risk cap, weight bounds or a budget)"
                )
            if attempt.status in _solve.INFEASIBLE:
                _elastic.diagnose(self, extra, attempts)  # raises InfeasibleError when confirmed
                rejected.append(f"{name}: {attempt.status} but the limits can all hold (no conflict set)")
                continue
            if variables.w.value is None or attempt.status not in (*_solve.OPTIMAL, cp.OPTIMAL_INACCURATE):
                rejected.append(f"{name}: {attempt.status}{' ' + attempt.message if attempt.message else ''}")
                continue
            # an optimal_inaccurate status is judged against the solver's reduced tolerances: never accepted
            if attempt.status != cp.OPTIMAL:
                rejected.append(f"{name}: status {attempt.status}")
                continue
            # every rung, relaxed ones included, is verified from w with numpy
            solver_objective = float(problem.value)
            notionals = None if variables.h is None else np.asarray(variables.h.value, dtype=np.float64)
            accepted = accept(np.asarray(variables.w.value, dtype=np.float64), solver_objective, name, notionals)
            if accepted is None:
                continue
            weights, table = accepted
            return Outcome(weights, attempt.status, solver, attempt.iterations, attempt.seconds, build_time,
                           attempts, table, assembly.duals(), rows, solver_objective, notes(name), skipped,
                           overlay=None if self.hedge is None else self.hedge.h.copy())
        # a solver that fails near infeasibility gets the same diagnosis as an infeasible status
        _elastic.diagnose(self, extra, attempts)
        raise SolverError(f"{self.spec.source}: no solver returned verified weights: " + " | ".join(skipped + rejected))


#: Interior-point weights this close to zero are solver noise (e.g. −3e-14 in a long-only book).
WEIGHT_NOISE = 1e-11


def _without_noise(weights: np.ndarray) -> np.ndarray:
    """Weights with |wᵢ| < WEIGHT_NOISE set to exactly 0; kept only if they still verify."""
    cleaned = weights.copy()
    cleaned[np.abs(cleaned) < WEIGHT_NOISE] = 0.0
    return cleaned


def _long_book(spec: RebalanceSpec) -> bool:
    return "long_only" in spec.constraints and "leverage" not in spec.constraints


def build_problem(
    model: FactorModel,
    scenario: Mapping[str, Any] | RebalanceSpec,
    *,
    holdings: pd.Series | None = None,
    benchmark: pd.Series | None = None,
    alpha: pd.Series | None = None,
    attributes: pd.DataFrame | None = None,
    nav: float | None = None,
    solvers: Sequence[str] | None = None,
    unknown_assets: str = "error",
    source: str = "scenario",
    changed_limits: Sequence[str] = (),
    overlay: Mapping[str, Any] | None = None,
) -> RebalanceProblem:
    """Validate the scenario and the inputs and return the problem, ready to :meth:`~RebalanceProblem.solve`.

    Parameters are those of :func:`rebalance`; ``source`` prefixes scenario messages.

    Returns
    -------
    RebalanceProblem
    """
    spec = scenario if isinstance(scenario, RebalanceSpec) else validate_scenario(scenario, source=source)
    data = prepare(model, holdings=holdings, benchmark=benchmark, alpha=alpha, attributes=attributes, nav=nav,
                   unknown_assets=unknown_assets, long_book=_long_book(spec))
    if spec.objective["kind"] in ("utility", "alpha") and alpha is None:
        raise InputError(f"rebalance: objective {spec.objective['kind']} needs alpha (pass alpha=...)")
    data = _alpha_factor.augment(data, spec.mapping)
    if overlay is not None:
        if spec.objective["kind"] == "risk_budget":
            raise InputError("overlay: a hedge overlay needs a convex objective (not risk_budget)")
        data = data.with_changes(overlay=_overlay.make_overlay(overlay, model))
    check_listed_shocks(model, spec.mapping, source)
    problem = RebalanceProblem(spec, data, solvers, unknown_assets)
    problem.changed = _changed_keys(changed_limits)
    return problem


def _changed_keys(changed_limits: Sequence[str]) -> tuple[str, ...]:
    """Constraint keys (``turnover``, ``constraints.turnover.max`` → ``turnover``), checked."""
    if (isinstance(changed_limits, str) or not isinstance(changed_limits, Sequence)
            or not all(isinstance(k, str) for k in changed_limits)):
        raise InputError(f"rebalance: changed_limits must be a list of constraint keys, got {changed_limits!r}")
    keys = (k.removeprefix("constraints.").split(".", 1)[0] for k in changed_limits)
    return tuple(dict.fromkeys(keys))


def rebalance(
    model: FactorModel,
    scenario: Mapping[str, Any],
    *,
    holdings: pd.Series | None = None,
    benchmark: pd.Series | None = None,
    alpha: pd.Series | None = None,
    attributes: pd.DataFrame | None = None,
    nav: float | None = None,
    solvers: Sequence[str] | None = None,
    unknown_assets: str = "error",
    changed_limits: Sequence[str] = (),
    overlay: Mapping[str, Any] | None = None,
) -> Any:
    """Target weights and trades inside the risk budget and mandate, verified from the weights.

    Parameters
    ----------
    model : FactorModel
        Σ = B·F·Bᵀ + diag(d), per period; risk figures are annualised with ``periods_per_year``.
    scenario : Mapping
        ``{"objective": {...}, "constraints": {...}}`` (docs/construction.md lists every key).
    holdings : pandas.Series, optional
        Current weights of NAV by asset (default: all cash).
    benchmark : pandas.Series, optional
        Benchmark weights (sum to 1). Without one, active figures are total figures.
    alpha : pandas.Series, optional
        Annualised expected active returns by asset (required by the utility and alpha objectives).
    attributes : pandas.DataFrame, optional
        Per-asset columns: group labels, ``price``, ``adv`` (shares a day), ``lot``, cost columns.
    nav : float, optional
        Fund value (currency): needed for liquidity and round lots, and to report shares and notionals.
    solvers : sequence of str, optional
        Solver order (default FACTOR_IPM, then Clarabel, then SCS; FACTOR_IPM only for the
        problems in its class, see docs/construction.md).
    unknown_assets : {"error", "drop", "zero"}, default "error"
        What to do with ids the model does not know (see :mod:`trimtab.construct._data`).
    changed_limits : sequence of str, optional
        Constraint keys this scenario changed from the one it varies (``"turnover"`` or
        ``"constraints.turnover.max"``): when the limits conflict, these are named first, and of
        several conflicting sets the one holding them is preferred.

    Returns
    -------
    RebalanceResult

    Raises
    ------
    ScenarioError, InputError, ModelError
        Bad scenario or inputs, before any solve.
    InfeasibleError
        The limits conflict; ``.relaxation`` says which and how far each must move.
    SolverError
        No solver returned weights that pass verification.

    Notes
    -----
    Equivalent to ``build_problem(...).solve()``.

    Examples
    --------
    >>> result = rebalance(model, {"objective": {"minimize": "active_risk"},
    ...                            "constraints": {"fully_invested": True, "long_only": True}},
    ...                    benchmark=benchmark)  # doctest: +SKIP
    """
    return build_problem(model, scenario, holdings=holdings, benchmark=benchmark, alpha=alpha, attributes=attributes,
                         nav=nav, solvers=solvers, unknown_assets=unknown_assets, changed_limits=changed_limits,
                         overlay=overlay).solve()
