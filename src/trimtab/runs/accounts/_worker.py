"""What runs on a worker: a chunk of accounts solved on inputs prepared once per worker.

The shared inputs (model, scenario, alpha, benchmark, attributes) reach a worker once (scattered on
Dask). The first chunk a worker runs aligns them to the model (:func:`built`); every later chunk and
every later round of the equilibrium reuses that, and an account solved again in a later round starts
from its own last converged interior point (the warm start the what-if re-solves use).
"""

from __future__ import annotations

import time
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InfeasibleError, SolverError, TrimtabError
from trimtab.runs.accounts._inputs import Account, holdings_weights

#: Trades smaller than this (weight of NAV) are solver noise, not orders.
ORDER_NOISE = 1e-9
STATUS_SOLVED, STATUS_INFEASIBLE, STATUS_FAILED, STATUS_SOLVER = "solved", "infeasible", "failed", "solver failure"


@dataclass(frozen=True, eq=False)
class SharedInputs:
    """Everything every account needs alike; sent to each worker once."""

    token: str
    model: Any
    spec: Any
    benchmark: pd.Series | None
    alpha: pd.Series | None
    attributes: pd.DataFrame | None
    solvers: tuple[str, ...] | None
    unknown_assets: str
    prices: np.ndarray | None


@dataclass(frozen=True, eq=False)
class Task:
    """A chunk of accounts for one round: the impact prices and each account's allotted shares."""

    accounts: tuple[Account, ...]
    pool_price: np.ndarray | None
    allotments: Mapping[str, np.ndarray]
    keep_results: bool = False
    #: start each account from its own last interior point (False right after the caps were shared:
    #: the new bounds make the old point a worse start than a cold one)
    warm: bool = True


@dataclass(eq=False)
class Built:
    """The shared inputs aligned to the model once, and what a worker learns as it goes."""

    data: Any
    long_book: bool
    #: account → its last converged interior point on this worker (a warm start pays for the same
    #: account in the next round; from another account's point it cost 45 iterations against 28 cold,
    #: measured on 30 accounts of 100 names in 1,500)
    warm: dict[str, Any] = field(default_factory=dict)
    specs: dict[str, Any] = field(default_factory=dict)


#: token → Built, per process (a worker keeps the last few runs' inputs)
_BUILT: dict[str, Built] = {}
_KEEP = 2


def built(shared: SharedInputs) -> Built:
    """The shared inputs prepared on this worker (once per run)."""
    found = _BUILT.get(shared.token)
    if found is not None:
        return found
    from trimtab.construct._data import prepare
    from trimtab.construct._problem import _long_book

    long_book = _long_book(shared.spec)
    data = prepare(shared.model, holdings=None, benchmark=shared.benchmark, alpha=shared.alpha,
                   attributes=shared.attributes, nav=None, unknown_assets=shared.unknown_assets, long_book=long_book)
    found = Built(data, long_book)
    while len(_BUILT) >= _KEEP:
        _BUILT.pop(next(iter(_BUILT)))
    _BUILT[shared.token] = found
    return found


def forget(token: str) -> None:
    """Drop a finished run's inputs from this process."""
    _BUILT.pop(token, None)


def account_problem(shared: SharedInputs, account: Account, pool_price: np.ndarray | None,
                    allotment: np.ndarray | None) -> Any:
    """The account's problem, ready to solve; raises TrimtabError naming the account on bad data."""
    from trimtab.construct._data import prepare
    from trimtab.runs.accounts._problem import AccountProblem

    base = built(shared)
    where = f"account {account.name}"
    prices = None if shared.attributes is None or "price" not in shared.attributes.columns else shared.attributes["price"]
    weights, nav = holdings_weights(account, prices)
    key = repr(sorted(account.limits.items()))
    spec = base.specs.get(key)
    if spec is None:
        spec = shared.spec.with_limits(account.limits) if account.limits else shared.spec
        base.specs[key] = spec
    try:
        fresh = prepare(shared.model, holdings=weights, benchmark=None, alpha=None, attributes=None, nav=nav,
                        unknown_assets=shared.unknown_assets, long_book=base.long_book)
    except TrimtabError as err:
        raise type(err)(f"{where}: {err}") from None
    data = base.data.with_changes(holdings=fresh.holdings, nav=fresh.nav, sold_outside=fresh.sold_outside)
    exclude = data.index_of(account.exclude, _Where(f"{where}: exclude")) if account.exclude else ()
    from trimtab.construct import _fast

    warm = base.warm.setdefault(account.name, _fast.WarmBox())
    problem = AccountProblem(spec, data, shared.solvers, shared.unknown_assets, warm, exclude=list(exclude),
                             allotment=allotment, pool_price=pool_price, prices=shared.prices)
    problem.changed = tuple(dict.fromkeys(k.removeprefix("constraints.").split(".", 1)[0] for k in account.limits))
    return problem


class _Where:
    """A key path stand-in for ``ProblemData.index_of`` (its ``fail`` names the account)."""

    def __init__(self, text: str) -> None:
        self.text = text

    def fail(self, message: str) -> Exception:
        from trimtab.errors import InputError

        return InputError(f"{self.text}: {message}")


def solve_account(shared: SharedInputs, account: Account, pool_price: np.ndarray | None,
                  allotment: np.ndarray | None, keep_result: bool) -> dict[str, Any]:
    """One account's answer: status and reason, or its weights, figures and (optionally) full result."""
    started = time.perf_counter()
    answer: dict[str, Any] = {"account": account.name}
    try:
        problem = account_problem(shared, account, pool_price, allotment)
        answer["nav"] = float(problem.data.nav)
        answer["holdings"] = problem.data.holdings
        answer["forced"] = forced_trades(problem)
        w, solver, iterations, result = _solve(problem, keep_result)
        answer.update(status=STATUS_SOLVED, reason="", conflict=None, weights=w, solver=solver, iterations=iterations,
                      **_figures(problem, w))
        if result is not None:
            answer["result"] = replace(result, _model=None, _attributes=None)
    except InfeasibleError as err:
        reason = (_account_words(_first_line(err))  # the table it points to is the account's rows in relaxations
                  .replace("(see the relaxation table)", "(see the account's rows in relaxations.csv)")
                  .replace("the relaxation table shows", "the account's rows in relaxations.csv show"))
        answer.update(status=STATUS_INFEASIBLE, reason=reason,
                      conflict=[_account_words(p) for p in (err.conflict or [])],
                      relaxation=_account_relaxation(err.relaxation))
    except SolverError as err:
        answer.update(status=STATUS_SOLVER, reason=_first_line(err), conflict=None)
    except TrimtabError as err:
        answer.update(status=STATUS_FAILED, reason=_first_line(err), conflict=None)
    answer["seconds"] = time.perf_counter() - started
    return answer


#: Per-asset limits on the position (the trade-type limits are what the cap shares out).
_POSITION_KINDS = ("weight", "active_weight", "exclude", "long_only", "must_hold")


def forced_trades(problem: Any) -> dict[int, float]:
    """Position → the least |trade| (weight of NAV) that brings w0 inside the account's position boxes."""
    from trimtab.construct.constraints._base import merge_boxes

    rows = [r for c in problem.constraints for r in c.rows if r.box and r.soft is None and c.kind in _POSITION_KINDS]
    if not rows:
        return {}
    lo, hi = merge_boxes(rows, problem.data.n_assets)
    w0 = problem.data.holdings
    need = np.maximum(lo - w0, 0.0) + np.maximum(w0 - hi, 0.0)
    return {int(i): float(need[i]) for i in np.flatnonzero(need > ORDER_NOISE)}


def _solve(problem: Any, full: bool) -> tuple[np.ndarray, str, int, Any]:
    """Verified weights; the full RebalanceResult only when asked (building it costs as much as the
    solve: the equilibrium's rounds need the weights alone)."""
    from trimtab.construct import HEURISTIC_KEYS
    from trimtab.construct import _heuristics

    spec = problem.spec
    if full or problem.objective.kind == "risk_budget" or any(k in spec.constraints for k in HEURISTIC_KEYS):
        result = problem.solve()
        w = result.weights.reindex(problem.model.assets).fillna(0.0).to_numpy(dtype=np.float64)
        return w, result.solver, int(result.iterations), result if full else None
    outcome = _heuristics.apply(problem, problem.solve_convex())
    return np.asarray(outcome.weights, dtype=np.float64), outcome.solver, int(outcome.iterations), None


def _figures(problem: Any, w: np.ndarray) -> dict[str, Any]:
    """The summary figures, recomputed from the weights with the model's own algebra."""
    from trimtab.construct._orders import cash_after_costs_weights

    data, model = problem.data, problem.model
    trade = w - data.holdings
    rates = problem.objective.rates
    costs = rates.cost(trade) if rates.any else np.zeros(len(trade))
    return {
        "costs": costs,
        "tracking_error": model.volatility(w - data.bench),
        "expected_alpha": float(data.alpha @ (w - data.bench)),
        "turnover": 0.5 * float(np.abs(trade).sum()) + data.outside_turnover,
        "cost": float(costs.sum()),
        "orders": int((np.abs(trade) > ORDER_NOISE).sum()),
        # cash after the trades and their estimated costs, pooled impact included (currency), as a
        # single rebalance's trade list reports it
        "cash_after": float(data.nav) * cash_after_costs_weights(problem, w),
    }


def _account_relaxation(table: Any) -> pd.DataFrame | None:
    """The account's relaxation table, its limit names in the account's words (None when there is none)."""
    if not isinstance(table, pd.DataFrame) or table.empty:
        return None
    table = table.copy()
    if "constraint" in table.columns:
        table["constraint"] = table["constraint"].map(lambda v: _account_words(v) if isinstance(v, str) else v)
    return table


def _account_words(text: str) -> str:
    """Conflict paths of the account's own bounds read as what the user set."""
    return (text.replace("constraints.aggregate_cap", "aggregate.max_adv_fraction (this account's share)")
                .replace("constraints.exclude", "exclude"))


def _first_line(err: BaseException) -> str:
    text = str(err).strip().splitlines()
    return text[0] if text else type(err).__name__


def solve_chunk(task: Task, shared: SharedInputs) -> list[dict[str, Any]]:
    """Solve every account of a chunk; one account's failure is its own row, never the chunk's."""
    out = []
    for account in task.accounts:
        if not task.warm:
            built(shared).warm.pop(account.name, None)
        allotment = task.allotments.get(account.name)
        out.append(solve_account(shared, account, task.pool_price, allotment, task.keep_results))
    return out
