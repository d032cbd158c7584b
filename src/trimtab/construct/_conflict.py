"""Which limits conflict: an irreducible infeasible subset over limit groups (the conflict set).

A *limit group* is what a user sets with one value in the scenario: ``tracking_error.max``,
``turnover.max``, the weight caps, the budget, long only, one group band, one factor bound, the
liquidity limit. The conflict set is a set of groups that cannot all hold while every proper
subset can: drop any one of its limits and the others are satisfiable together. It is found by
the deletion filter (Chinneck & Dravnieks, "Locating minimal infeasible constraint sets in linear
programs", ORSA J. Computing 3(2), 1991): start from every group (infeasible); for each group in
turn, drop it if the rest are still infeasible, else keep it. What is left is irreducible. Each
test is one feasibility problem, solved by FACTOR_IPM when it is in the problem's solver order and
can take the rows (:mod:`trimtab.construct._diagnosis_ipm`), else with the cvxpy solvers of the
problem's order; groups are tested in scenario order, those a variant scenario changed last, so that when
several conflict sets exist the one naming the limits just changed is preferred.

A solver's "feasible" counts only when its weights hold every limit of the test within the
verification tolerance (SCS at its own tolerance calls a point 0.1% beyond a TE cap optimal). When
no solver can tell (at the very edge of feasibility Clarabel fails with a numerical error, #21),
the *elastic measure* decides: every limit of the test gets slacks (weighted as in the elastic
problem of :mod:`trimtab.construct._elastic`) and their weighted sum is minimised. That problem
is always feasible and well posed. A breach left at its optimum beyond ELASTIC_TOL relative to its
limit is a positive violation: the limits cannot all hold. None of them breached beyond their
verification tolerance: they can. Only an answer in between (or no answer) keeps the group: the
set is then still infeasible but may not be irreducible, and :attr:`Conflict.irreducible` says so.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from trimtab._format import compact_limits
from trimtab.construct import _diagnosis_ipm, _diagnosis_memo, _solve
from trimtab.construct._assembly import Assembly
from trimtab.construct._cvxpy import cp
from trimtab.construct._overlay import take_notionals
from trimtab.construct._variables import Variables
from trimtab.construct.constraints._base import Rows

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

#: Settings of a feasibility test's first try (the solver's own defaults otherwise).
FEASIBILITY_SETTINGS: dict[str, dict[str, Any]] = {"CLARABEL": {"max_iter": 200}, "SCS": {"max_iters": 20_000}}
#: A slack counts when above max(ELASTIC_TOL, ELASTIC_TOL·|limit|).
ELASTIC_TOL = 1e-6
#: Keys whose limits are on/off rules rather than numbers: they can conflict but a relaxation never moves them.
RULE_KEYS = ("long_only", "no_buy", "no_sell", "no_trade")


@dataclass(frozen=True, eq=False)
class LimitGroup:
    """One limit as the user set it: its key path, and the rows (or elements of rows) it covers.

    ``index`` selects elements of ``rows`` (None: all of them). ``key`` is the scenario key under
    ``constraints`` (``tracking_error``, ``group``, …); ``label`` the band's or factor's label.
    """

    key: str
    path: str
    rows: Rows
    index: np.ndarray | None = None
    label: str | None = None

    def restricted(self) -> Rows:
        """The group's rows only (the other elements of the block unbounded)."""
        if self.index is None:
            return self.rows
        lower = np.full(self.rows.size, -np.inf)
        upper = np.full(self.rows.size, np.inf)
        lower[self.index], upper[self.index] = self.rows.lower[self.index], self.rows.upper[self.index]
        return replace(self.rows, lower=lower, upper=upper)

    @property
    def rule(self) -> bool:
        """True for a yes/no rule (long only, a trade list, full investment)."""
        return self.key in RULE_KEYS


@dataclass(frozen=True)
class Conflict:
    """The conflict set: the limit groups that cannot all hold, each needed for the conflict."""

    groups: tuple[LimitGroup, ...]
    irreducible: bool
    solves: int

    @property
    def paths(self) -> list[str]:
        return [g.path for g in self.groups]

    def sentence(self) -> str:
        """``these limits cannot all hold: A, B, C``."""
        return "these limits cannot all hold: " + compact_limits(self.paths)


# ---------------------------------------------------------------------------------------------
# Limit groups
# ---------------------------------------------------------------------------------------------
def limit_groups(problem: RebalanceProblem, extra: Sequence[Rows] = ()) -> list[LimitGroup]:
    """Every hard limit of the problem as user-level groups, in scenario order (soft limits never conflict)."""
    out: list[LimitGroup] = []
    for constraint in problem.constraints:
        key = constraint.key
        for block, rows in enumerate(constraint.rows):
            if rows.soft is not None:
                continue
            if key in ("group", "factor_exposure") and not rows.per_asset:
                out.extend(_labelled(problem, key, block, rows))
            else:
                out.append(LimitGroup(key, _path(key, rows), rows))
    # rows the post-solve steps add (max_names.fixed: the names max_names dropped) read as their key
    out.extend(LimitGroup(r.kind, f"constraints.{r.kind}", r) for r in extra if r.soft is None)
    return out


def _path(key: str, rows: Rows) -> str:
    """The YAML key path a user reads: constraints.tracking_error.max, constraints.leverage.gross, …"""
    if key == "liquidity":
        return "constraints.liquidity.max_adv_fraction"
    if key == "leverage":
        return f"constraints.{rows.name}"
    if key in ("tracking_error", "total_risk", "factor_risk", "specific_risk", "turnover"):
        return f"constraints.{key}.max"
    if key in RULE_KEYS or key in ("must_hold", "fully_invested"):
        return f"constraints.{key}"
    upper, lower = np.isfinite(rows.upper).any(), np.isfinite(rows.lower).any()
    side = ".max" if upper and not lower else (".min" if lower and not upper else "")
    return f"constraints.{key}{side}"


def _labelled(problem: RebalanceProblem, key: str, block: int, rows: Rows) -> list[LimitGroup]:
    """One group per band (group) or per factor bound (factor_exposure)."""
    options = problem.spec.constraints[key]
    if key == "group":
        items = options if isinstance(options, list) else [options]
        by = rows.name.split(".", 1)[1] if "." in rows.name else ""
        where = next((i for i, o in enumerate(items) if o.get("by") == by), 0)
        explicit = items[where].get("bounds", {})
        prefix = f"constraints.group.{where}" if len(items) > 1 else "constraints.group"
    else:
        explicit = options.get("bounds", {})
        prefix = "constraints.factor_exposure"
    out = []
    for i, label in enumerate(rows.labels):
        text = str(label)
        path = f"{prefix}.bounds.{text}" if label in explicit else f"{prefix}.bounds.default ({text})"
        out.append(LimitGroup(key, path, rows, np.array([i]), text))
    return out


# ---------------------------------------------------------------------------------------------
# Feasibility tests
# ---------------------------------------------------------------------------------------------
def cvxpy_solvers(problem: RebalanceProblem) -> list[str]:
    """The solvers of the diagnosis: Clarabel first when installed (an interior-point method decides
    feasibility sharply where a first-order method such as SCS often ends inaccurate near the
    boundary), then the other cvxpy solvers of the problem's order."""
    named = [s for s in problem.solvers if s != _solve.FACTOR_IPM]
    first = ["CLARABEL"] if "CLARABEL" in _solve.installed() else []
    return list(dict.fromkeys(first + named)) or ["SCS"]


class LazySolvers(Sequence[str]):
    """:func:`cvxpy_solvers`, asked for only when a cvxpy solve is reached: asking imports cvxpy
    and every solver interface (1–2.6 s in a fresh process), which a diagnosis in factor form skips."""

    def __init__(self, problem: RebalanceProblem) -> None:
        self._problem = problem
        self._names: list[str] | None = None

    def _get(self) -> list[str]:
        if self._names is None:
            self._names = cvxpy_solvers(self._problem)
        return self._names

    def __getitem__(self, i: Any) -> Any:
        return self._get()[i]

    def __len__(self) -> int:
        return len(self._get())


def feasible(problem: RebalanceProblem, rows: Sequence[Rows], solvers: Sequence[str]) -> bool | None:
    """Whether the rows hold together (True/False), or None when neither the solvers nor the elastic
    measure could tell (see the module notes)."""
    hard = [r for r in rows if np.isfinite(r.lower).any() or np.isfinite(r.upper).any()]
    memo = _diagnosis_memo.current()
    if memo is not None:
        known = memo.answer(hard)  # implied by an earlier solve of this diagnosis
        if known is not None:
            return known
    answer = _feasible(problem, hard, solvers)
    if memo is not None:
        memo.learn(hard, answer)
    return answer


def _feasible(problem: RebalanceProblem, hard: list[Rows], solvers: Sequence[str]) -> bool | None:
    """:func:`feasible` by solving: FACTOR_IPM first, then the cvxpy solvers, then the elastic measure."""
    answer = _diagnosis_ipm.feasible(problem, hard)  # FACTOR_IPM first, when in the solver order
    if answer is not None:
        return answer
    variables = Variables(problem.data)
    assembly = Assembly(variables)
    for r in hard:
        assembly.add(r)
    cvx = cp.Problem(cp.Minimize(0), assembly.finish())
    # a solver's own default tolerances first: a yes/no answer needs no 1e-10 accuracy, and near the
    # edge of feasibility Clarabel certifies infeasibility in a fraction of the iterations it takes
    # at 1e-10 (measured 0.6 s against 3.7-5.2 s on the demo, 1,500 assets, a TE cap 0.003% below its reach)
    for solver, settings in [(s, FEASIBILITY_SETTINGS.get(s, {})) for s in solvers] + _solve.plan(solvers):
        status = _solve.run(cvx, solver, settings).status
        if status in (cp.OPTIMAL, cp.OPTIMAL_INACCURATE):
            take_notionals(problem, variables)
            if variables.w.value is not None and _diagnosis_ipm.holds(hard, np.asarray(variables.w.value, dtype=np.float64)):
                _diagnosis_memo.point(np.asarray(variables.w.value, dtype=np.float64))
                return True
            continue  # a point beyond the limits proves nothing
        if status in _solve.INFEASIBLE:
            return False
    return elastic_feasible(problem, hard, solvers)


def penalty(rows: Rows, index: np.ndarray | None = None) -> float:
    """1/|limit| (at least 1%): a move is measured relative to the limit's own size."""
    lo = rows.lower if index is None else rows.lower[index]
    hi = rows.upper if index is None else rows.upper[index]
    finite = np.concatenate([np.abs(lo[np.isfinite(lo)]), np.abs(hi[np.isfinite(hi)])])
    return 1.0 / max(0.01, float(finite.max()) if len(finite) else 0.0)


def elastic_feasible(problem: RebalanceProblem, rows: Sequence[Rows], solvers: Sequence[str]) -> bool | None:
    """The elastic measure's answer: False on a positive violation, True when every row holds, else None."""
    variables = Variables(problem.data)
    assembly = Assembly(variables)
    for r in rows:
        assembly.add(replace(r, soft=penalty(r)))
    cvx = cp.Problem(cp.Minimize(assembly.penalty), assembly.finish())
    for solver, settings in [(s, FEASIBILITY_SETTINGS.get(s, {})) for s in solvers] + _solve.plan(solvers):
        attempt = _solve.run(cvx, solver, settings)
        if attempt.status != cp.OPTIMAL or variables.w.value is None:
            continue
        take_notionals(problem, variables)
        weights = np.asarray(variables.w.value, dtype=np.float64)
        if _diagnosis_ipm.holds(rows, weights):
            return True
        positive, measured = False, 0.0
        for r in rows:
            limit = np.fmax(np.where(np.isfinite(r.lower), np.abs(r.lower), 0.0),
                            np.where(np.isfinite(r.upper), np.abs(r.upper), 0.0))
            breach = r.breach(np.asarray(r.evaluate(weights), dtype=np.float64))
            positive |= bool(np.any(breach > ELASTIC_TOL * np.maximum(1.0, limit)))
            measured += penalty(r) * float(breach.sum())
        # the solver's own optimum must show the violation the weights show (a point read back
        # wrongly, or far from the optimum, proves nothing)
        solver_value = float(cvx.value) if cvx.value is not None else 0.0
        return False if positive and solver_value >= 0.5 * measured else None
    return None


def conflict_set(problem: RebalanceProblem, extra: Sequence[Rows] = (), changed: Sequence[str] = (),
                 hint: Sequence[str] | None = None) -> Conflict | None:
    """The deletion filter over limit groups; None when the limits turn out to be satisfiable together.

    Parameters
    ----------
    problem : RebalanceProblem
    extra : sequence of Rows
        Rows added by the post-solve steps.
    changed : sequence of str
        Scenario keys the variant set itself (tested last, so kept in preference).
    hint : sequence of str, optional
        Paths of groups likely to hold a conflict (those an elastic solve had to move). When they
        are infeasible on their own, every other group is dropped in one test, which the deletion
        filter allows (the rest stays infeasible), and the filter runs over the hint only.

    Returns
    -------
    Conflict or None
        Groups in report order: those in ``changed`` first, then scenario order.
    """
    groups = limit_groups(problem, extra)
    solvers = LazySolvers(problem)
    solves = 0
    keep: set[int] = set()
    hinted = {i for i, g in enumerate(groups) if g.path in set(hint or ())}
    if hinted:
        solves += 1
        if feasible(problem, [groups[i].restricted() for i in sorted(hinted)], solvers) is False:
            keep = hinted  # a subset is infeasible, so the whole set is too
    if not keep:
        solves += 1
        if feasible(problem, [g.restricted() for g in groups], solvers) is not False:
            return None
        keep = set(range(len(groups)))
    order = sorted(keep, key=lambda i: groups[i].key in changed)
    sure = True
    for i in order:
        trial = keep - {i}
        answer = feasible(problem, [groups[j].restricted() for j in sorted(trial)], solvers)
        solves += 1
        if answer is False:
            keep = trial
        elif answer is None:
            sure = False
    chosen = sorted(keep, key=lambda i: (groups[i].key not in changed, i))
    return Conflict(tuple(groups[i] for i in chosen), sure, solves)


def describe_groups(groups: Sequence[LimitGroup]) -> list[dict[str, Any]]:
    """Plain records of groups (for result documents)."""
    return [{"limit": g.path, "key": g.key, "label": g.label} for g in groups]
